"""Write the demo rig's two-body cases into trajectories/rig/ (invented data, ours).

The demo landing rig (rigs/demo_landing_rig.toml): the rail arm carries a drone mock-up (body
`drone`), the pedestal arm carries the moving vehicle's roof pad (body `pad`). The pad heaves,
surges, rolls and pitches gently as a vehicle roof would; the drone flies a landing approach
onto it and rides on it for the last seconds. Poses are given in the rig frame (the default
placement). Sampling 100 Hz with ±10 % jitter, as a real-time simulation's log would be.
The rig starts and ends at rest (reachgate checks `--ends rest` by default): the motion is
played on a clock that speeds up from standstill over RAMP_S and slows to standstill over the
last RAMP_S (minimum-jerk rates), so the paths themselves are those of the steady motion.

- landing_calm.csv: calm air; the mock-up meets the pad at touchdown (a declared contact).
- landing_gusty.csv: a side gust late in the approach pushes the mock-up towards the pad
  arm; its rotor guard comes too close to that arm's forearm.
- landing_low_pass.csv: the approach dips low over the floor halfway; the mock-up comes too
  close to the floor.

Run: python scripts/make_rig_cases.py
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from reachgate.model.trajectory import Scenario, Trajectory, write_scenario
from reachgate.model.transforms import matrix_to_quat, rpy_to_matrix

RATE_HZ = 100.0
APPROACH_S = 36.0
ON_PAD_S = 4.0
#: Run-up and run-down of the motion's clock at the two ends, s.
RAMP_S = 2.0
OUT = Path(__file__).resolve().parents[1] / "trajectories" / "rig"

#: The pad arm's TCP at home in the rig frame, and its yaw there (rig x towards -pad y).
PAD_HOME_M = np.array([7.5, -0.042, 1.579])
PAD_YAW_RAD = np.radians(-90.0)
#: Mock-up centre above the pad's top face when it sits on the pad (half its body height).
SEATED_M = 0.06
#: Where the approach starts, from the seated pose, m (rig frame).
START_OFFSET_M = np.array([-4.6, 0.0, 0.30])


def minimum_jerk(s: np.ndarray) -> np.ndarray:
    return 10 * s**3 - 15 * s**4 + 6 * s**5


def times(seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    n = int((APPROACH_S + ON_PAD_S + RAMP_S) * RATE_HZ)
    return np.cumsum(np.concatenate([[0.0], rng.uniform(0.9, 1.1, n) / RATE_HZ]))


def motion_clock(t: np.ndarray) -> np.ndarray:
    """The motion's own time at rig times t: its rate rises from 0 to 1 over RAMP_S and falls
    back to 0 over the last RAMP_S, so every body starts and ends at rest."""
    rate = minimum_jerk(np.clip(t / RAMP_S, 0.0, 1.0))
    rate *= minimum_jerk(np.clip((t[-1] - t) / RAMP_S, 0.0, 1.0))
    return np.concatenate([[0.0], np.cumsum(0.5 * (rate[1:] + rate[:-1]) * np.diff(t))])


def pad_motion(t: np.ndarray):
    """The roof pad: positions (N, 3) m and rotation matrices (N, 3, 3), rig frame."""
    p = PAD_HOME_M + np.column_stack(
        [
            0.04 * np.sin(2 * np.pi * 0.08 * t),
            0.02 * np.sin(2 * np.pi * 0.13 * t),
            0.02 * np.sin(2 * np.pi * 0.4 * t),
        ]
    )
    rpy = np.column_stack(
        [
            np.radians(1.5) * np.sin(2 * np.pi * 0.3 * t),
            np.radians(1.0) * np.sin(2 * np.pi * 0.25 * t + 1.0),
            np.full(t.size, PAD_YAW_RAD),
        ]
    )
    return p, rpy_to_matrix(rpy)


def drone_motion(t, pad_p, pad_R, *, gust_m=0.0, dip_m=0.0, dip_pitch_deg=0.0):
    """The mock-up: from START_OFFSET_M onto the pad, seated for the last ON_PAD_S seconds.

    gust_m: sideways (+y, towards the pad arm) push late in the approach; dip_m: how far the
    path sinks halfway, pitching nose-down by dip_pitch_deg at the bottom. Returns positions (N, 3) and rotation matrices (N, 3, 3), rig frame.
    """
    s = minimum_jerk(np.clip(t / APPROACH_S, 0.0, 1.0))
    away = 1.0 - s
    seated = pad_p + pad_R[:, :, 2] * SEATED_M
    p = seated + away[:, None] * START_OFFSET_M
    p[:, 1] += away * 0.05 * np.sin(2 * np.pi * 0.3 * t)
    p[:, 2] += away * 0.02 * np.sin(2 * np.pi * 0.7 * t)
    wobble = np.column_stack(
        [
            np.radians(3.0) * np.sin(2 * np.pi * 0.5 * t),
            np.radians(3.0) * np.sin(2 * np.pi * 0.4 * t + 1.0),
            np.radians(8.0) * np.sin(2 * np.pi * 0.05 * t),
        ]
    ) * away[:, None]
    if gust_m:
        burst = np.exp(-0.5 * ((t - 0.86 * APPROACH_S) / 1.2) ** 2)
        p[:, 1] += gust_m * burst
        wobble[:, 0] -= np.radians(6.0) * burst  # the gust rolls it towards the arm
    if dip_m:
        low = np.sin(np.pi * np.minimum(s / 0.8, 1.0)) ** 2  # level again well before the pad
        p[:, 2] -= dip_m * low
        wobble[:, 1] += np.radians(dip_pitch_deg) * low
    # seated, the mock-up faces along the rig's +x: the pad's yaw turned back by 90 deg
    facing = rpy_to_matrix(np.array([0.0, 0.0, -PAD_YAW_RAD]))
    R = pad_R @ facing @ rpy_to_matrix(wobble)
    return p, R


def write_case(name: str, description: str, seed: int, **drone) -> None:
    t = times(seed)
    clock = motion_clock(t)
    pad_p, pad_R = pad_motion(clock)
    drone_p, drone_R = drone_motion(clock, pad_p, pad_R, **drone)
    scenario = Scenario.from_trajectories(
        {
            "drone": Trajectory.from_arrays(t, drone_p, matrix_to_quat(drone_R)),
            "pad": Trajectory.from_arrays(t, pad_p, matrix_to_quat(pad_R)),
        },
        name=name,
    )
    comments = (
        "reachgate demo rig case (invented): drone mock-up landing on a moving roof pad",
        description,
        "frame: rig (default placement); bodies drone and pad; sampling 100 Hz with 10 % jitter",
    )
    write_scenario(OUT / name, scenario, comments)


def main() -> None:
    OUT.mkdir(parents=True, exist_ok=True)
    write_case(
        "landing_calm.csv",
        "calm air, 36 s approach, 4 s on the pad: passes (the touchdown is a declared contact)",
        seed=1101,
    )
    write_case(
        "landing_gusty.csv",
        "side gust 30 s in: the rotor guard comes too close to the pad arm's forearm",
        seed=1102,
        gust_m=0.33,
    )
    write_case(
        "landing_low_pass.csv",
        "the approach sinks 1.55 m, nose down, 40 % of the way in: the mock-up comes too close to the floor",
        seed=1103,
        dip_m=1.55,
        dip_pitch_deg=40.0,
    )


if __name__ == "__main__":
    main()
