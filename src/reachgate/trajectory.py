"""Commanded TCP paths: the Trajectory value, CSV loading and writing (DESIGN §4).

A trajectory gives TCP poses in the *scenario* frame at strictly increasing times.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from reachgate.errors import ReachgateError
from reachgate.transforms import UNIT_QUATERNION_TOL, quat_to_matrix, transform


@dataclass(frozen=True, eq=False)
class Trajectory:
    """A commanded TCP path.

    t_s: (N,) strictly increasing times in s.
    scenario_p_m: (N, 3) TCP positions in the scenario frame, m.
    scenario_q_wxyz: (N, 4) TCP orientations in the scenario frame, unit quaternions, scalar-first.
    name: what the path is called in reports (the file name for loaded files).
    ignored_columns: columns of the file that were kept out of the check.
    """

    t_s: np.ndarray
    scenario_p_m: np.ndarray
    scenario_q_wxyz: np.ndarray
    name: str = "arrays"
    ignored_columns: tuple[str, ...] = field(default=())

    @classmethod
    def from_arrays(
        cls,
        t_s,
        p_m,
        q_wxyz=None,
        *,
        rpy_rad=None,
        name: str = "arrays",
    ) -> Trajectory:
        """Build and validate a trajectory from arrays (t (N,), p (N,3), quaternions (N,4) or rpy (N,3)).

        Raises ReachgateError naming the array and the fault.
        """
        from reachgate.transforms import matrix_to_quat, rpy_to_matrix

        t_s = np.asarray(t_s, dtype=float)
        p_m = np.asarray(p_m, dtype=float)
        if (q_wxyz is None) == (rpy_rad is None):
            raise ReachgateError(f"{name}: give the orientation as quaternions or as rpy, once")
        if t_s.ndim != 1 or t_s.size < 2:
            raise ReachgateError(f"{name}: t_s must have shape (N,) with N >= 2, got {t_s.shape}")
        n = t_s.size
        if p_m.shape != (n, 3):
            raise ReachgateError(f"{name}: positions must have shape ({n}, 3), got {p_m.shape}")
        if q_wxyz is not None:
            q = np.array(q_wxyz, dtype=float)
            if q.shape != (n, 4):
                raise ReachgateError(f"{name}: quaternions must have shape ({n}, 4), got {q.shape}")
        else:
            rpy = np.asarray(rpy_rad, dtype=float)
            if rpy.shape != (n, 3):
                raise ReachgateError(f"{name}: rpy must have shape ({n}, 3), got {rpy.shape}")
            q = matrix_to_quat(rpy_to_matrix(rpy))
        for label, arr in (("t_s", t_s), ("positions", p_m), ("orientations", q)):
            bad = ~np.isfinite(arr)
            if bad.any():
                row = int(np.argwhere(bad)[0][0])
                raise ReachgateError(f"{name}: {label} sample {row} is not a finite number")
        steps = np.diff(t_s)
        if (steps <= 0).any():
            row = int(np.argmax(steps <= 0)) + 1
            raise ReachgateError(
                f"{name}: time must strictly increase, sample {row} has t = {t_s[row]!r} s "
                f"after {t_s[row - 1]!r} s"
            )
        norms = np.linalg.norm(q, axis=1)
        off = np.abs(norms - 1.0) > UNIT_QUATERNION_TOL
        if off.any():
            row = int(np.argmax(off))
            raise ReachgateError(
                f"{name}: quaternion at sample {row} has length {norms[row]:.9g}, "
                f"more than {UNIT_QUATERNION_TOL:g} from 1"
            )
        q = q / norms[:, None]
        return cls(t_s=t_s, scenario_p_m=p_m, scenario_q_wxyz=q, name=name)

    @property
    def n_samples(self) -> int:
        return int(self.t_s.size)

    @property
    def duration_s(self) -> float:
        return float(self.t_s[-1] - self.t_s[0])

    def scenario_T_tcp(self) -> np.ndarray:
        """TCP poses in the scenario frame, (N, 4, 4)."""
        return transform(quat_to_matrix(self.scenario_q_wxyz), self.scenario_p_m)


def load_trajectory(path: str | Path) -> Trajectory:
    """Load and validate a trajectory CSV (DESIGN §4). Raises ReachgateError on bad input."""
    raise NotImplementedError("being written")


def write_trajectory(path: str | Path, trajectory: Trajectory, comments: tuple[str, ...] = ()) -> None:
    """Write a trajectory as CSV: comment lines, then t_s,x_m,y_m,z_m,qw,qx,qy,qz at full precision."""
    raise NotImplementedError("being written")
