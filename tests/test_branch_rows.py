"""Branch rows in words: which joint the kept configuration takes out of its range, by how
much, and which other branch of the closed-form solution keeps every joint in range over the
stretch, or that none does (row field `fitting_branches`, table, JSON, CSV)."""

from __future__ import annotations

import csv
import io
import json
import sqlite3

import numpy as np
from roboticstoolbox import DHRobot, RevoluteDH

import reachgate
from reachgate.batch.scan import scan
from reachgate.batch.store import Store, load_summary
from reachgate.checking.intervals import ROW_KEYS, Check, Severity
from reachgate.checking.pipeline import CheckSettings
from reachgate.checking.rail import RailPolicy
from reachgate.kinematics.chain import forward
from reachgate.kinematics.closed_form import Branch, SphericalWristSolver, is_spherical_wrist
from reachgate.kinematics.path_ik import chain_targets
from reachgate.render.check_report import render_csv, render_table
from reachgate.render.pictures import _path_label
from test_ik_configurations import joint_ramp

from conftest import DEMO_CASES, DEMO_ROBOT, REPO, offset_wrist_arm

#: rtb's FK of our closed-form joints meets the target to this (m, and rotation entries).
FK_TOL = 1e-9
#: The home branch (shoulder +, elbow +, wrist +) with the wrist flipped.
WRIST_FLIP = Branch(1, 1, -1)


def wrist_arm(j1_deg: float, j4_deg: float) -> reachgate.Robot:
    """The demo arm's invented geometry (spherical wrist: closed form), no rail, with symmetric
    ranges of j1_deg and j4_deg on joints 1 and 4."""
    return offset_wrist_arm(j1_deg=j1_deg, j4_deg=j4_deg, a4_m=0.0, d5_m=0.0)


def rtb_arm(chain) -> DHRobot:
    return DHRobot(
        [
            RevoluteDH(a=a, alpha=al, d=d, offset=th)
            for a, al, d, th in zip(
                chain.a_m, chain.alpha_rad, chain.d_m, chain.theta_offset_rad, strict=True
            )
        ]
    )


def rtb_misses(chain, q_arm: np.ndarray, targets: np.ndarray) -> np.ndarray:
    """(M,) largest entry of |FK(q) - target| by roboticstoolbox's DHRobot.fkine."""
    reached = np.array([T.A for T in rtb_arm(chain).fkine(q_arm)]).reshape(-1, 4, 4)
    return np.abs(reached - targets).max(axis=(1, 2))


def rows_of(report, check):
    return [v for v in report.violations if v.check is check and v.severity is Severity.VIOLATION]


def test_the_row_names_the_flipped_wrist_that_keeps_joint_4_in_range():
    """j4 turned to 200° on a ±190° range: the kept branch (shoulder +, elbow +, wrist +)
    leaves j4's range by up to 10°; flipping the wrist (θ4 - 180°, -θ5, θ6 + 180°) keeps every
    joint in range. The branch row is on j4, says 10°, and names shoulder +, elbow +, wrist -.
    Outside check: roboticstoolbox's DHRobot.fkine of that branch's joint values meets every
    target of the row, and those values lie inside every range. A shoulder flip needs θ1 about
    180° away, outside j1's ±30°, so no shoulder - branch may be named (analytic)."""
    robot = wrist_arm(j1_deg=30.0, j4_deg=190.0)
    assert is_spherical_wrist(robot.chain)
    path, q = joint_ramp(robot, 3, 200.0)
    report = reachgate.check(robot, path)
    (branch,) = rows_of(report, Check.BRANCH)
    (position,) = rows_of(report, Check.POSITION)
    assert branch.axis == "j4" and position.axis == "j4"
    assert abs(np.degrees(branch.worst) - 10.0) < 1e-6 and branch.limit == 0.0
    assert WRIST_FLIP.describe() in branch.fitting_branches
    assert not any(name.startswith("shoulder -") for name in branch.fitting_branches)
    assert position.fitting_branches == branch.fitting_branches

    inside = (report.t_s >= branch.start_s) & (report.t_s <= branch.end_s)
    assert np.array_equal(inside, q[:, 3] > robot.upper[3])
    targets = chain_targets(robot, forward(robot, q[inside]), None)
    flipped = SphericalWristSolver(robot.chain).solve(targets, WRIST_FLIP)
    q_flipped = flipped.theta - robot.chain.theta_offset_rad
    assert rtb_misses(robot.chain, q_flipped, targets).max() < FK_TOL
    turned = robot.lower + np.mod(q_flipped - robot.lower, 2 * np.pi)  # whole turns allowed
    assert (turned <= robot.upper).all()

    table = render_table(report, width=80)
    assert max(len(line) for line in table.splitlines()) <= 80
    text = " ".join(table.split())
    assert "takes j4 up to 10.00 deg beyond its range" in text
    assert "The branch shoulder +, elbow +, wrist - reaches every pose there" in text
    assert "cannot change configuration in mid-path" in text
    assert _path_label(Check.BRANCH, report.violations) == (
        "branch (shoulder +, elbow +, wrist - would fit)"
    )


def test_where_no_branch_fits_the_report_says_so():
    """j1 turned to 40° on a ±30° range: every other branch either keeps θ1 or turns it by
    about 180° (analytic for a closed-form arm), so none fits: no branch row, the position
    row's fitting_branches is empty, and the words say that another home will not help."""
    robot = wrist_arm(j1_deg=30.0, j4_deg=190.0)
    path, _ = joint_ramp(robot, 0, 40.0)
    report = reachgate.check(robot, path)
    assert not rows_of(report, Check.BRANCH)
    (position,) = rows_of(report, Check.POSITION)
    assert position.axis == "j1" and position.fitting_branches == ()
    table = render_table(report, width=80)
    assert max(len(line) for line in table.splitlines()) <= 80
    text = " ".join(table.split())
    assert "takes j1 up to 10.00 deg beyond its range" in text
    assert "none of the other seven branches of the closed-form solution reaches" in text
    assert "another home will not help" in text
    document = json.loads(report.to_json())
    rows = {row["check"]: row for row in document["violations"]}
    assert rows["position"]["fitting_branches"] == []


def test_a_branch_that_misses_the_pose_never_counts_as_fitting():
    """On the demo calm case j2 leaves its range (20° end) near the pad; the shoulder-flipped
    branches give joint values inside every range there, but their wrist centre lies outside
    their shell, so they do not reach the pose: roboticstoolbox's DHRobot.fkine of those
    values misses the target by centimetres. No branch row, and the JSON and CSV say that no
    other branch fits (the report once claimed one did)."""
    robot = reachgate.load_robot(DEMO_ROBOT)
    report = reachgate.check(robot, reachgate.load_trajectory(DEMO_CASES / "approach_calm.csv"))
    assert not rows_of(report, Check.BRANCH)
    (position,) = rows_of(report, Check.POSITION)
    assert position.axis == "j2" and position.fitting_branches == ()

    k = int(np.searchsorted(report.t_s, position.worst_s))
    q = report.solution.q[k : k + 1]
    targets = chain_targets(robot, forward(robot, q), q[:, 0])
    flipped = SphericalWristSolver(robot.chain).solve(targets, Branch(-1, 1, 1))
    assert flipped.reach_excess_m[0] > 0.1
    q_flipped = flipped.theta - robot.chain.theta_offset_rad
    assert ((q_flipped >= robot.lower[1:]) & (q_flipped <= robot.upper[1:])).all()
    assert rtb_misses(robot.chain, q_flipped, targets)[0] > 0.01

    document = json.loads(report.to_json())
    (row,) = [r for r in document["violations"] if r["check"] == "position"]
    assert row["fitting_branches"] == []
    assert all(r["fitting_branches"] is None for r in document["violations"] if r is not row)
    lines = list(csv.DictReader(io.StringIO(render_csv(report))))
    assert [r["fitting_branches"] for r in lines if r["check"] == "position"] == ["none"]


def test_every_row_key_is_in_the_reference():
    """docs/reference.md documents every key of a report row, fitting_branches included."""
    text = (REPO / "docs" / "reference.md").read_text(encoding="utf-8")
    assert "fitting_branches" in ROW_KEYS
    assert [key for key in ROW_KEYS if f"`{key}`" not in text] == []


def test_a_scan_keeps_fitting_branches_and_opens_a_store_from_before_them(tmp_path):
    """The scan store keeps each row's fitting_branches (the calm case's j2 row: none fits),
    so scan rows equal check rows; a store written before the column (rows without a value:
    the gusty case under --rail follow has only rate rows) still opens with its checksums
    intact, read-only without a change, and gains the column when next opened to write."""
    store = tmp_path / "calm.sqlite"
    scan(DEMO_ROBOT, [DEMO_CASES / "approach_calm.csv"], store_path=store, workers=1)
    (case,) = load_summary(store).cases
    assert [v.fitting_branches for v in case.violations if v.check is Check.POSITION] == [()]

    old = tmp_path / "old.sqlite"
    gusty = DEMO_CASES / "approach_gusty.csv"
    scan(DEMO_ROBOT, [gusty], CheckSettings(rail=RailPolicy.FOLLOW), store_path=old, workers=1)
    with sqlite3.connect(old) as db:
        db.execute("ALTER TABLE violations DROP COLUMN fitting_branches_json")
    (case,) = load_summary(old).cases
    assert case.violations and all(v.fitting_branches is None for v in case.violations)

    def columns() -> set[str]:
        with sqlite3.connect(old) as db:
            return {r[1] for r in db.execute("PRAGMA table_info(violations)")}

    assert "fitting_branches_json" not in columns()
    with Store(old):
        pass
    assert "fitting_branches_json" in columns()
    assert len(load_summary(old).cases[0].violations) == len(case.violations)
