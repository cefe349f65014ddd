"""Write the demo scenario's cases into trajectories/ (invented data, ours).

A drone mock-up, carried by the demo rail arm, flies a landing approach onto a pad on the
roof of a moving vehicle. The path is the drone's pose relative to the pad's mock-up, given
directly in the cell frame (the default placement). Sampling is 250 Hz with ±10 % jitter, as
a real-time simulation's log would be. Every case starts and ends at rest: the approach
itself is a minimum-jerk move, and the sway on top of it fades in and out over RAMP_S (a
minimum-jerk ramp), as a rig run must (reachgate checks `--ends rest` by default).
Run: python scripts/make_demo_cases.py
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from reachgate.model.transforms import matrix_to_quat, rpy_to_matrix

RATE_HZ = 250.0
#: Fade-in and fade-out of the sway, s (at most a quarter of the case).
RAMP_S = 2.0
OUT = Path(__file__).resolve().parents[1] / "trajectories"


def minimum_jerk(s: np.ndarray) -> np.ndarray:
    return 10 * s**3 - 15 * s**4 + 6 * s**5


def approach(duration_s: float, seed: int, *, lateral_m=0.0, pitch_up_deg=0.0, gust=0.0):
    """Times (N,), positions (N, 3) m and rpy (N, 3) rad of one approach."""
    rng = np.random.default_rng(seed)
    step = 1.0 / RATE_HZ
    t = np.cumsum(np.concatenate([[0.0], step * rng.uniform(0.9, 1.1, int(duration_s * RATE_HZ))]))
    s = minimum_jerk(np.clip(t / t[-1], 0.0, 1.0))
    ramp_s = min(RAMP_S, duration_s / 4)
    fade = minimum_jerk(np.clip(t / ramp_s, 0.0, 1.0)) * minimum_jerk(
        np.clip((t[-1] - t) / ramp_s, 0.0, 1.0)
    )
    x = 2.9 + 4.6 * s
    y = fade * 0.05 * np.sin(2 * np.pi * 0.3 * t) + lateral_m * s
    z = 2.1 - 0.8 * s + fade * 0.02 * np.sin(2 * np.pi * 0.7 * t)
    roll = fade * np.radians(3.0) * np.sin(2 * np.pi * 0.5 * t)
    pitch = (
        fade * np.radians(3.0) * np.sin(2 * np.pi * 0.4 * t + 1.0) - np.radians(pitch_up_deg) * s
    )
    yaw = fade * np.radians(10.0) * np.sin(2 * np.pi * 0.05 * t)
    if gust:
        # a gust burst in the middle of the approach, 2.5 Hz roll and 1.8 Hz pitch
        burst = np.exp(-0.5 * ((t - 0.5 * duration_s) / 2.0) ** 2)
        roll += gust * np.radians(8.0) * burst * np.sin(2 * np.pi * 2.5 * t)
        pitch += gust * np.radians(5.0) * burst * np.sin(2 * np.pi * 1.8 * t + 0.3)
        z += gust * 0.03 * burst * np.sin(2 * np.pi * 2.2 * t)
    return t, np.column_stack([x, y, z]), np.column_stack([roll, pitch, yaw])


def write_case(name: str, description: str, t, p, rpy, *, extra=None) -> None:
    q = matrix_to_quat(rpy_to_matrix(rpy))
    header = "t_s,x_m,y_m,z_m,qw,qx,qy,qz"
    columns = [t, p[:, 0], p[:, 1], p[:, 2], q[:, 0], q[:, 1], q[:, 2], q[:, 3]]
    if extra is not None:
        header += ",pad_speed_m_s"
        columns.append(extra)
    path = OUT / name
    with open(path, "w", encoding="utf-8", newline="\n") as handle:
        handle.write(
            "# reachgate demo case (invented): drone mock-up landing on a moving roof pad\n"
        )
        handle.write(f"# {description}\n")
        handle.write("# frame: cell (default placement); sampling 250 Hz with 10 % jitter\n")
        handle.write(header + "\n")
        np.savetxt(handle, np.column_stack(columns), delimiter=",", fmt="%.17g")
    print(f"wrote {path.relative_to(OUT.parent)} ({t.size} samples)")


def main() -> None:
    OUT.mkdir(exist_ok=True)
    t, p, rpy = approach(40.0, seed=1)
    write_case(
        "approach_calm.csv",
        "calm air, 40 s approach: passes with --rail follow",
        t,
        p,
        rpy,
        extra=np.full(t.size, 8.3),
    )
    t, p, rpy = approach(40.0, seed=2, gust=0.35)
    write_case(
        "approach_gusty.csv",
        "gust burst mid-approach: wrist too slow, needs a slow-down",
        t,
        p,
        rpy,
    )
    t, p, rpy = approach(40.0, seed=3, lateral_m=2.9)
    write_case(
        "approach_wide.csv",
        "vehicle drifts 2.9 m sideways: the pad leaves the arm's reach",
        t,
        p,
        rpy,
    )
    t, p, rpy = approach(40.0, seed=4, pitch_up_deg=40.0)
    write_case(
        "approach_steep.csv", "steep pitch-up final: the wrist passes its straight pose", t, p, rpy
    )
    t, p, rpy = approach(3.5, seed=5)
    write_case(
        "approach_rushed.csv", "the whole approach in 3.5 s: rail and arm too slow", t, p, rpy
    )


if __name__ == "__main__":
    main()
