"""One case -> Report: rail policy, derivatives, violation intervals, the check pipeline."""
