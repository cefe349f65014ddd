"""Rigs in batches: `perturb --body` (gusts on one body of a scenario, the others carried over)
and `scan RIG` (every case checked as `check RIG` does, locally and on Dask, the store keyed
on the rig file and every robot file it names).

Outside references: the gust statistics of the moved body are those of the one-body path,
whose Dryden spectra are checked against MIL-F-8785C in test_disturb.py; here the moved body
must draw exactly the same numbers for the same seed. The scan's verdicts and margins are
checked against `check RIG` run case by case (checking/rig_check.py, itself checked against
coal distances and hand-worked transforms in test_clearance.py and test_rig_check.py).
"""

from __future__ import annotations

import hashlib
import json
import shutil
import tracemalloc
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from reachgate.batch.model_files import RigFiles, fingerprint, read_model_files, scan_settings
from reachgate.batch.scan import _worst_margin, check_case, load_summary, scan
from reachgate.batch.store import CaseVerdict
from reachgate.checking.pipeline import CheckSettings
from reachgate.checking.rig_check import check_rig
from reachgate.model.rig import load_rig
from reachgate.model.trajectory import (
    Scenario,
    Trajectory,
    load_scenario,
    load_trajectory,
    write_scenario,
    write_trajectory,
)
from reachgate.motion.disturb import iter_disturbance_cases
from reachgate.render.cases import write_case_files

from conftest import DEMO_CASES, DEMO_ROBOT, REPO
from conftest import run_cli as run

DEMO_RIG = REPO / "rigs" / "demo_landing_rig.toml"
#: Every 8th sample of the demo rig cases (12.5 Hz; the same motions, a fraction of the time).
EVERY = 8


# -- perturb --body ------------------------------------------------------------------------


def two_body_nominal(path: Path, duration_s: float = 6.0, rate_hz: float = 50.0) -> Path:
    """A drone drifting over a gently heaving pad, both at rest at the ends (invented)."""
    t = np.arange(int(duration_s * rate_hz) + 1) / rate_hz
    s = 0.5 - 0.5 * np.cos(2 * np.pi * t / duration_s)
    drone = Trajectory.from_arrays(
        t, np.column_stack([2.0 + 0.3 * s, 0.1 * s, 1.9 - 0.2 * s]), rpy_rad=np.zeros((t.size, 3))
    )
    pad = Trajectory.from_arrays(
        t,
        np.column_stack([7.5 + 0 * t, -0.042 + 0 * t, 1.579 + 0.02 * s]),
        rpy_rad=np.column_stack([0.01 * s, 0 * t, -np.pi / 2 + 0 * t]),
    )
    write_scenario(path, Scenario.from_trajectories({"drone": drone, "pad": pad}))
    return path


def test_perturb_body_moves_only_that_body_and_copies_the_others(tmp_path):
    nominal = two_body_nominal(tmp_path / "meet.csv")
    out = tmp_path / "cases"
    result = run("perturb", nominal, "--count", 2, "--seed", 31, "--body", "drone", "--out", out)
    assert result.exit_code == 0, result.output
    given = load_scenario(nominal)
    for case in sorted(out.glob("*.csv")):
        made = load_scenario(case)
        assert list(made.bodies) == ["drone", "pad"] and np.array_equal(made.t_s, given.t_s)
        for attr in ("scenario_p_m", "scenario_q_wxyz"):  # the pad: the very same floats
            assert np.array_equal(
                getattr(made.bodies["pad"], attr), getattr(given.bodies["pad"], attr)
            )
        moved = np.abs(made.bodies["drone"].scenario_p_m - given.bodies["drone"].scenario_p_m)
        assert moved.max() > 1e-3  # moderate gusts move the drone by millimetres at least
        assert np.all(moved[0] == 0.0) and np.all(moved[-1] == 0.0)  # faded in and out
        header = [line for line in case.read_text().splitlines() if line.startswith("#")]
        assert "# body = drone" in header


def test_moved_body_draws_what_its_path_alone_draws_with_the_same_seed(tmp_path):
    """Same seed, same case number: the drone of the two-body case is bit for bit the case
    perturb makes of the drone's path given alone (so its gust statistics are those that
    test_disturb.py checks against MIL-F-8785C)."""
    nominal = two_body_nominal(tmp_path / "meet.csv")
    alone = tmp_path / "drone_alone.csv"
    write_trajectory(alone, load_scenario(nominal).bodies["drone"])
    assert run("perturb", nominal, "--count", 3, "--seed", 32, "--body", "drone",
               "--out", tmp_path / "two").exit_code == 0  # fmt: skip
    assert (
        run("perturb", alone, "--count", 3, "--seed", 32, "--out", tmp_path / "one").exit_code == 0
    )
    for k in (1, 2, 3):
        two = load_scenario(tmp_path / "two" / f"meet_{k:04d}.csv").bodies["drone"]
        one = load_trajectory(tmp_path / "one" / f"drone_alone_{k:04d}.csv")
        assert np.array_equal(two.scenario_p_m, one.scenario_p_m)
        assert np.array_equal(two.scenario_q_wxyz, one.scenario_q_wxyz)
    spread = [
        np.std(load_trajectory(tmp_path / "one" / f"drone_alone_{k:04d}.csv").scenario_p_m[:, 2])
        for k in (1, 2, 3)
    ]
    assert len(set(spread)) == 3  # three cases, three different draws


def _peak_traced_bytes(nominal: Scenario, count: int, out: Path) -> int:
    tracemalloc.start()
    try:
        write_case_files(iter_disturbance_cases(nominal, count, 35, body="drone"), out, "m")
        return tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


def test_perturb_body_memory_does_not_grow_with_the_count(tmp_path):
    """Cases of a two-body nominal are made and written one at a time, as for one body
    (test_perturb_batches.py): 5 more cases of a 4,000-sample nominal add less than 3 cases'
    new arrays (the moved body's positions and quaternions; the pad's are shared). Measured:
    0.9 of them streamed, 5.1 with the batch held in a list."""
    nominal = load_scenario(two_body_nominal(tmp_path / "meet.csv", duration_s=8.0, rate_hz=500))
    one_case = 7 * 8 * nominal.n_samples  # p (3) + q (4) float64 columns of the moved body
    two = _peak_traced_bytes(nominal, 2, tmp_path / "two")
    seven = _peak_traced_bytes(nominal, 7, tmp_path / "seven")
    assert seven - two < 3 * one_case, (two, seven, one_case)


@pytest.mark.parametrize(
    ("nominal", "body", "message"),
    [
        ("two", None, "several bodies (drone, pad); name the body the gusts move with --body"),
        ("two", "deck", "--body deck: meet.csv has no such body (it has drone, pad)"),
        ("one", "drone", "--body drone: alone.csv has one body (plain columns"),
    ],
)
def test_perturb_body_refusals_say_what_to_give(tmp_path, nominal, body, message):
    path = two_body_nominal(tmp_path / "meet.csv")
    if nominal == "one":
        path = tmp_path / "alone.csv"
        write_trajectory(path, load_scenario(tmp_path / "meet.csv").bodies["pad"])
    args = ["perturb", path, "--count", 1, "--seed", 1, "--out", tmp_path / "out"]
    result = run(*args, *(["--body", body] if body else []))
    assert result.exit_code == 2
    assert message in result.output and "Traceback" not in result.output
    assert not (tmp_path / "out").exists()


def test_cases_of_another_body_are_not_mixed_into_a_folder(tmp_path):
    nominal = two_body_nominal(tmp_path / "meet.csv")
    out = tmp_path / "cases"
    assert run("perturb", nominal, "--count", 1, "--seed", 33, "--body", "drone",
               "--out", out).exit_code == 0  # fmt: skip
    result = run("perturb", nominal, "--count", 1, "--seed", 33, "--body", "pad", "--out", out)
    assert result.exit_code == 2 and "body drone there, pad now" in result.output
    assert run("perturb", nominal, "--count", 1, "--seed", 33, "--body", "pad", "--out", out,
               "--replace").exit_code == 0  # fmt: skip
    assert "# body = pad" in (out / "meet_0001.csv").read_text()


# -- scan RIG ------------------------------------------------------------------------------


def copy_rig(folder: Path) -> Path:
    """The demo rig and its two robot files, copied into folder (so a test may change them)."""
    (folder / "rigs").mkdir(parents=True)
    (folder / "robots").mkdir()
    for name in ("demo_rail_arm.toml", "demo_pedestal_arm.toml"):
        shutil.copy(REPO / "robots" / name, folder / "robots" / name)
    shutil.copy(DEMO_RIG, folder / "rigs" / DEMO_RIG.name)
    return folder / "rigs" / DEMO_RIG.name


@pytest.fixture
def rig_copy(tmp_path) -> Path:
    return copy_rig(tmp_path)


def short_cases(folder: Path, names=("landing_calm", "landing_gusty", "landing_low_pass")):
    """The demo rig cases at every EVERY-th sample, written into folder."""
    folder.mkdir(parents=True, exist_ok=True)
    paths = []
    for name in names:
        scenario = load_scenario(DEMO_CASES / "rig" / f"{name}.csv")
        bodies = {
            body: replace(b, t_s=b.t_s[::EVERY], scenario_p_m=b.scenario_p_m[::EVERY],
                          scenario_q_wxyz=b.scenario_q_wxyz[::EVERY])
            for body, b in scenario.bodies.items()
        }  # fmt: skip
        paths.append(folder / f"{name}.csv")
        write_scenario(paths[-1], Scenario.from_trajectories(bodies))
    return paths


@pytest.fixture(scope="module")
def rig_scan(tmp_path_factory):
    """The three short demo rig cases and a light-gust case of the calm one (perturb --body
    drone), scanned once with two local workers."""
    folder = tmp_path_factory.mktemp("rig_scan")
    rig = copy_rig(folder)
    paths = short_cases(folder / "cases")
    gusts = iter_disturbance_cases(load_scenario(paths[0]), 1, 34, intensity="light", body="drone")
    paths += write_case_files(gusts, folder / "cases" / "gusts", "calm")
    store = folder / "s.sqlite"
    summary = scan(rig, paths, store_path=store, workers=2)
    return {"rig": rig, "paths": paths, "store": store, "summary": summary}


def test_scan_rig_gives_check_rig_verdicts_and_worst_margins_case_by_case(rig_scan):
    summary, paths = rig_scan["summary"], rig_scan["paths"]
    rig = load_rig(rig_scan["rig"])
    by_name = {Path(c.name).name: c for c in summary.cases}
    assert summary.checked == 4
    for path in paths:
        report = check_rig(rig, load_scenario(path), CheckSettings())
        stored = by_name[path.name]
        assert stored.verdict.value == report.verdict.value
        worst = _worst_margin(json.loads(report.to_json())["margins"])
        assert (stored.worst_margin, stored.worst_margin_axis, stored.worst_margin_check) == worst
        assert [(v.check, v.axis, v.severity, v.worst) for v in stored.violations] == [
            (v.check, v.axis, v.severity, v.worst) for v in report.violations
        ]
        assert stored.robot_name == "demo landing rig"
        assert stored.settings["robots"]["carrier"]["rail"] == "follow"  # from the rig file
    gust_case = by_name["calm_0001.csv"]  # the scan keeps what perturb recorded
    assert gust_case.parameters["body"] == "drone" and gust_case.parameters["intensity"] == "light"
    # the pass/fail mix the demo cases are built for, ranked worst first
    demo = [c for c in summary.cases if c is not gust_case]
    assert [Path(c.name).name for c in demo] == [
        "landing_gusty.csv", "landing_low_pass.csv", "landing_calm.csv"
    ]  # fmt: skip
    gusty, low, calm = demo
    assert calm.verdict is CaseVerdict.PASS and "." in calm.worst_margin_axis  # e.g. table.j5
    assert gusty.worst.axis == "carrier.rotor guard/table.link4"
    assert low.worst.axis == "carrier.rotor guard/floor" and low.worst_margin_check == "clearance"


def test_scan_rig_tables_show_clearance_and_robot_axes(rig_scan):
    store = rig_scan["store"]
    result = run("scan", "--report", "--store", store, "--format", "csv")
    assert result.exit_code == 1, result.output
    rows = [line.split(",") for line in result.output.splitlines()]
    fields = [dict(zip(rows[0], row, strict=True)) for row in rows[1:]]
    worst_axis = {Path(f["case"]).name: f["worst_axis"] for f in fields}
    assert worst_axis["landing_gusty.csv"] == "carrier.rotor guard/table.link4"
    assert worst_axis["landing_low_pass.csv"] == "carrier.rotor guard/floor"
    margin_axis = {Path(f["case"]).name: f["worst_margin_axis"] for f in fields}
    assert margin_axis["landing_calm.csv"].startswith(("carrier.", "table."))
    table = " ".join(run("scan", "--report", "--store", store).output.split())
    assert "clearance" in table and "rail carrier follow 0.5 Hz (from the rig file)" in table
    page = run("scan", "--report", "--store", store, "--format", "html", "--pictures", 1)
    assert page.exit_code == 1 and "carrier.rotor guard/floor" in page.output
    pedestal = rig_scan["rig"].parent.parent / "robots" / "demo_pedestal_arm.toml"
    pedestal_sha = hashlib.sha256(pedestal.read_bytes()).hexdigest()
    assert f'demo landing rig: robot file of table</td><td class="mono">{pedestal_sha}' in (
        page.output
    )
    assert "data:image/png;base64," in page.output  # the rechecked rig case's picture


def test_changing_a_robot_file_named_by_the_rig_checks_the_cases_again(rig_copy, tmp_path):
    paths = short_cases(tmp_path / "cases", names=("landing_calm",))
    store = tmp_path / "s.sqlite"
    assert scan(rig_copy, paths, store_path=store, workers=1).checked == 1
    assert scan(rig_copy, paths, store_path=store, workers=1).resumed == 1
    pedestal = rig_copy.parent.parent / "robots" / "demo_pedestal_arm.toml"
    pedestal.write_text(pedestal.read_text() + "\n# a comment: new bytes, same robot\n")
    again = scan(rig_copy, paths, store_path=store, workers=1)
    assert (again.checked, again.resumed) == (1, 0)
    assert load_summary(store, robot_path=rig_copy).cases[0].name == "cases/landing_calm.csv"
    before = fingerprint(read_model_files(rig_copy)[0])
    rig_copy.write_text(rig_copy.read_text() + "\n# the rig file changed too\n")
    assert fingerprint(read_model_files(rig_copy)[0]) != before  # the rig file counts too


def test_a_worker_builds_the_rig_from_the_bytes_it_is_sent(rig_copy, tmp_path):
    """check_case with RigFiles whose paths no longer exist: nothing is read from disk."""
    (case,) = short_cases(tmp_path / "cases", names=("landing_gusty",))
    files, rig = read_model_files(rig_copy)
    robots = tuple((f"/nowhere/rigs/../robots/{Path(p).name}", raw) for p, raw in files.robots)
    moved = RigFiles("/nowhere/rigs/rig.toml", files.raw, robots)
    out = check_case(str(case), CheckSettings(), moved, moved.path)
    assert out["error"] is None, out["error"]
    assert out["verdict"] == check_rig(rig, load_scenario(case)).verdict.value == "fail"
    clearance = [f for v, f in zip(out["report"]["violations"], out["excess_fractions"],
                                   strict=True) if v["check"] == "clearance"]  # fmt: skip
    assert clearance and all(f is not None for f in clearance)


def test_scan_rig_over_dask_matches_local_workers(rig_scan, tmp_path):
    """The cluster engine takes a rig (a worker thread in this process; the local scan's
    spawned workers already show that RigFiles travels by pickle)."""
    distributed = pytest.importorskip("dask.distributed")
    paths = rig_scan["paths"]
    with distributed.LocalCluster(
        n_workers=1, processes=False, threads_per_worker=1, dashboard_address=None
    ) as cluster:
        remote = scan(rig_scan["rig"], paths, store_path=rig_scan["store"].with_name("d.sqlite"),
                      cluster=cluster.scheduler_address)  # fmt: skip
    assert [(c.name, c.verdict, c.worst_margin, c.violations) for c in remote.cases] == [
        (c.name, c.verdict, c.worst_margin, c.violations) for c in rig_scan["summary"].cases
    ]


def test_a_robot_file_alone_travels_and_is_known_as_before():
    """A robot file: its bytes go to the workers, the store keys on their sha256 and keeps
    the plain settings (what scan did before rigs)."""
    source, rig = read_model_files(DEMO_ROBOT)
    assert rig.alone and source == DEMO_ROBOT.read_bytes()
    assert fingerprint(source) == hashlib.sha256(DEMO_ROBOT.read_bytes()).hexdigest()
    settings = CheckSettings(lag_s=0.02)
    assert scan_settings(rig, settings, None, source) == settings.as_dict()


def test_rail_options_given_on_the_command_line_override_the_rig_files(tmp_path):
    """--rail, --rail-at, --rail-bandwidth given: every robot with a rail takes them (DESIGN
    §8), in `check RIG` and `scan RIG` alike; not given: the rig file's (carrier: follow)."""
    (case,) = short_cases(tmp_path / "cases", names=("landing_calm",))
    rails = {}
    for given in ([], ["--rail", "fixed"]):
        result = run("check", DEMO_RIG, case, "--format", "json", *given)
        rails[bool(given)] = json.loads(result.output)["settings"]["robots"]["carrier"]["rail"]
    assert rails == {False: "follow", True: "fixed"}
    store = tmp_path / "s.sqlite"
    result = run("scan", DEMO_RIG, case, "--rail-at", 99, "--store", store, "--workers", 1)
    assert result.exit_code == 2 and "--rail-at: 99 m is outside the rail range" in result.output
    assert not store.exists()  # refused before any case
