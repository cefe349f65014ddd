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

from reachgate.check import CheckSettings, Placement, Report, Verdict, check  # noqa: E402
from reachgate.checks import Check, Severity, Violation  # noqa: E402
from reachgate.errors import ReachgateError  # noqa: E402
from reachgate.rail import RailPolicy  # noqa: E402
from reachgate.robot import Robot, load_robot, robot_from_dict  # noqa: E402
from reachgate.trajectory import Trajectory, load_trajectory  # noqa: E402

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
