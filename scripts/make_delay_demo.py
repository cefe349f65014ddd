"""Write the loop-delay demo logs into trajectories/delay/ (invented data, ours).

A shake test, as an engineer would run it to measure the rig: the mock-up is moved a few
millimetres and tenths of a degree about a pose in front of the demo rail arm by a sum of
sines (0.5 to 40 Hz, random phases, amplitudes falling with frequency so speeds stay small),
commanded at 250 Hz with ±10 % jitter like a real-time simulation's log. The "measured" log
is what a rig with a pure delay of DELAY_S and a first-order lag of bandwidth BANDWIDTH_HZ
reports back, sampled evenly at 500 Hz like a robot controller's log, with a little noise:
for a sum of sines the steady response is exact at any time, each line multiplied by
exp(-jωτ)/(1 + jωT). Run: python scripts/make_delay_demo.py
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from reachgate.model.trajectory import Trajectory, write_trajectory

#: The rig the measured log comes from (the values `reachgate delay` should find).
DELAY_S = 0.035
BANDWIDTH_HZ = 6.0
DURATION_S = 30.0
COMMAND_HZ, MEASURED_HZ = 250.0, 500.0
#: Noise of the rig's own position and angle readings (standard deviation).
NOISE_M, NOISE_RAD = 2e-5, math.radians(0.002)
#: Centre of the shake (cell frame): in front of the demo arm, level.
CENTRE_M = np.array([3.9, 0.0, 1.6])
OUT = Path(__file__).resolve().parents[1] / "trajectories" / "delay"


def sum_of_sines(t: np.ndarray, seed: int, response=None) -> np.ndarray:
    """(N, 6): x, y, z offsets in m and roll, pitch, yaw in rad, each a sum of 40 sines.

    response(f) -> complex gain applied to each line (None: the command itself)."""
    rng = np.random.default_rng(seed)
    freqs = np.geomspace(0.5, 40.0, 40)
    out = np.empty((t.size, 6))
    for channel in range(6):
        phase = rng.uniform(0.0, 2 * math.pi, freqs.size)
        amplitude = (0.004 if channel < 3 else math.radians(0.3)) / np.sqrt(freqs)
        gain = np.ones(freqs.size, complex) if response is None else response(freqs)
        arg = 2 * math.pi * np.outer(t, freqs) + phase + np.angle(gain)
        out[:, channel] = (np.sin(arg) * (amplitude * np.abs(gain))).sum(axis=1)
    return out


def rig_response(freqs: np.ndarray) -> np.ndarray:
    omega = 2 * math.pi * freqs
    return np.exp(-1j * omega * DELAY_S) / (1 + 1j * omega / (2 * math.pi * BANDWIDTH_HZ))


def write_log(path: Path, t: np.ndarray, pose: np.ndarray, comments: tuple[str, ...]) -> None:
    trajectory = Trajectory.from_arrays(t, CENTRE_M + pose[:, :3], rpy_rad=pose[:, 3:])
    write_trajectory(path, trajectory, comments)


def main() -> None:
    OUT.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(20261202)
    steps = rng.uniform(0.9, 1.1, int(DURATION_S * COMMAND_HZ)) / COMMAND_HZ
    t_command = np.concatenate([[0.0], np.cumsum(steps)])
    t_measured = np.arange(0.0, t_command[-1], 1.0 / MEASURED_HZ)
    seed = 1301
    commanded = sum_of_sines(t_command, seed)
    measured = sum_of_sines(t_measured, seed, rig_response)
    noise = np.array([NOISE_M] * 3 + [NOISE_RAD] * 3)
    measured += noise * rng.standard_normal(measured.shape)
    about = "shake test of the demo rig (invented): sum of 40 sines, 0.5-40 Hz, 30 s"
    write_log(OUT / "shake_commanded.csv", t_command, commanded, (about, "commanded, 250 Hz"))
    write_log(
        OUT / "shake_measured.csv",
        t_measured,
        measured,
        (
            about,
            f"reported by a rig with a {DELAY_S * 1000:g} ms delay and a {BANDWIDTH_HZ:g} Hz "
            "first-order lag, 500 Hz",
        ),
    )
    print(f"wrote {OUT / 'shake_commanded.csv'} and {OUT / 'shake_measured.csv'}")


if __name__ == "__main__":
    main()
