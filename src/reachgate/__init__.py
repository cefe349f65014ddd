"""reachgate: check, before anything moves, whether an arm can follow a commanded TCP path.

Library use::

    import reachgate
    robot = reachgate.load_robot("robots/demo_rail_arm.toml")
    path = reachgate.load_trajectory("trajectories/approach_calm.csv")
    report = reachgate.check(robot, path, reachgate.CheckSettings(rail=reachgate.RailPolicy.FOLLOW))
    print(report.verdict, report.slowdown, report.to_json())

    # a rig of several robots, and a scenario of several bodies (drone.x_m, pad.x_m, ...)
    rig = reachgate.load_rig("rigs/demo_landing_rig.toml")
    report = reachgate.check(rig, reachgate.load_scenario("trajectories/rig/landing_calm.csv"))
"""

from reachgate.checking.intervals import Check, Severity, Violation
from reachgate.checking.lag import Prediction
from reachgate.checking.pipeline import CheckSettings, Ends, Placement, Report, Verdict
from reachgate.checking.rail import RailPolicy
from reachgate.checking.rig_check import RailChoice, RigReport
from reachgate.checking.rig_check import check_any as check
from reachgate.errors import ReachgateError
from reachgate.model.rig import Rig, load_rig
from reachgate.model.robot import Robot, load_robot, robot_from_dict
from reachgate.model.trajectory import Scenario, Trajectory, load_scenario, load_trajectory
from reachgate.search.placement import PlacementResult, place
from reachgate.version import __version__

__all__ = [
    "Check",
    "CheckSettings",
    "Ends",
    "Placement",
    "PlacementResult",
    "Prediction",
    "RailChoice",
    "RailPolicy",
    "ReachgateError",
    "Report",
    "Rig",
    "RigReport",
    "Robot",
    "Scenario",
    "Severity",
    "Trajectory",
    "Verdict",
    "Violation",
    "__version__",
    "check",
    "load_rig",
    "load_robot",
    "load_scenario",
    "load_trajectory",
    "place",
    "robot_from_dict",
]
