"""reachgate: check, before anything moves, whether an arm can follow a commanded TCP path.

Library use::

    import reachgate
    robot = reachgate.load_robot("robots/demo_rail_arm.toml")
    path = reachgate.load_trajectory("trajectories/approach_calm.csv")
    report = reachgate.check(robot, path, reachgate.CheckSettings(rail=reachgate.RailPolicy.FOLLOW))
    print(report.verdict, report.slowdown, report.to_json())
"""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("reachgate")
except PackageNotFoundError:  # running from a source tree without installing
    __version__ = "0.0.0+source"

from reachgate.check import CheckSettings, Placement, Report, Verdict, check
from reachgate.checks import Check, Severity, Violation
from reachgate.errors import ReachgateError
from reachgate.rail import RailPolicy
from reachgate.robot import Robot, load_robot, robot_from_dict
from reachgate.trajectory import Trajectory, load_trajectory

__all__ = [
    "Check",
    "CheckSettings",
    "Placement",
    "RailPolicy",
    "ReachgateError",
    "Report",
    "Robot",
    "Severity",
    "Trajectory",
    "Verdict",
    "Violation",
    "__version__",
    "check",
    "load_robot",
    "load_trajectory",
    "robot_from_dict",
]
