"""What a report warns about besides its rows (DESIGN §6 `notes`): inputs that a check can
judge only in part, said in one line each so that a pass is not read as more than it is.

Every threshold here is ours (common practice for real-time simulation logs, documented in
the README); each note says what was seen and what it means for the verdict.
"""

from __future__ import annotations

import numpy as np

from reachgate.model.robot import Robot
from reachgate.model.trajectory import Trajectory

#: A step this many times the median step is a gap in the log.
GAP_FACTOR = 10.0
#: Coarser than this median step (s), the samples cannot show the motion a rig makes between
#: them (10 Hz: rig loops run at 250 Hz to 1 kHz; simulation logs at 50 Hz or more).
COARSE_STEP_S = 0.1
#: Whole-number times with a median step at least this (s) look like milliseconds under t_s.
MILLISECOND_STEP_S = 1.0
#: Samples the fit needs for an acceleration, and for a jerk (a line has no curvature).
ACCEL_MIN_SAMPLES = 3
JERK_MIN_SAMPLES = 4


def input_notes(robot: Robot, trajectory: Trajectory) -> tuple[str, ...]:
    """Notes on the inputs: gaps, millisecond-looking times, coarse sampling, too few
    samples for accel or jerk, no [tool] in the robot file."""
    notes = []
    t = trajectory.t_s
    steps = np.diff(t)
    median = float(np.median(steps)) if steps.size else 0.0
    if steps.size >= 2 and median > 0:
        worst = int(np.argmax(steps))
        if steps[worst] > GAP_FACTOR * median:
            notes.append(
                f"gap in the time steps: {steps[worst]:.6g} s after t = {t[worst]:.6g} s, "
                f"{steps[worst] / median:.0f} times the median step ({median:.3g} s); the "
                "motion across it is judged as one smooth move, check the log"
            )
    if median >= MILLISECOND_STEP_S and np.all(t == np.round(t)):
        notes.append(
            f"t_s holds whole numbers {median:g} apart: if they are milliseconds, divide by "
            "1000 (as seconds every speed, accel and jerk is judged far too low)"
        )
    elif median > COARSE_STEP_S:
        notes.append(
            f"coarse sampling: median step {median:.3g} s (over {COARSE_STEP_S:g} s); motion "
            "between samples is not seen, so speeds, accels and jerks may be far higher on "
            "the rig: check the case at the rate the rig will replay it"
        )
    n = trajectory.n_samples
    if n < JERK_MIN_SAMPLES:
        what = "accel and jerk" if n < ACCEL_MIN_SAMPLES else "jerk"
        notes.append(
            f"{n} samples are too few to estimate {what} (at least {ACCEL_MIN_SAMPLES} for accel,"
            f" {JERK_MIN_SAMPLES} for jerk): those margins are null and not checked"
        )
    if not robot.has_tool:
        notes.append(
            f"{robot.source}: no [tool]: the TCP is the flange itself; give the mock-up's "
            "TCP as [tool] unless that is meant"
        )
    return tuple(notes)


def unmeasured_rates(n_samples: int) -> tuple[str, ...]:
    """The rate margins that n_samples cannot measure: ('accel', 'jerk'), ('jerk',) or ()."""
    if n_samples < ACCEL_MIN_SAMPLES:
        return ("accel", "jerk")
    if n_samples < JERK_MIN_SAMPLES:
        return ("jerk",)
    return ()
