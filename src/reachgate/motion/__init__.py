"""Motion made or measured: turbulence cases, exact discretisation, the sinusoid envelope."""
