"""reachgate: check, before anything moves, whether an arm can follow a commanded TCP path.

Library use::

    import reachgate
    robot = reachgate.load_robot("robots/demo_rail_arm.toml")
    path = reachgate.load_trajectory("trajectories/approach_calm.csv")
    report = reachgate.check(robot, path, reachgate.CheckSettings(rail=reachgate.RailPolicy.FOLLOW))
    print(report.verdict, report.slowdown, report.to_json())
"""

from reachgate.checking.intervals import Check, Severity, Violation
from reachgate.checking.lag import Prediction
from reachgate.checking.pipeline import CheckSettings, Placement, Report, Verdict, check
from reachgate.checking.rail import RailPolicy
from reachgate.errors import ReachgateError
from reachgate.model.robot import Robot, load_robot, robot_from_dict
from reachgate.model.trajectory import Trajectory, load_trajectory
from reachgate.search.placement import PlacementResult, place
from reachgate.version import __version__

__all__ = [
    "Check",
    "CheckSettings",
    "Placement",
    "PlacementResult",
    "Prediction",
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
    "place",
    "robot_from_dict",
]
