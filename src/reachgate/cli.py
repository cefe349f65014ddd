"""The ``reachgate`` command line: parse arguments, call one library function, render.

Every command turns a ReachgateError into one line on stderr and exit code 2.
"""

from __future__ import annotations

import math
import os
import sys
import warnings
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from enum import Enum
from pathlib import Path
from typing import Annotated, TypeVar

import typer
from typer.core import TyperGroup

try:  # typer carries its own copy of click since 0.2x
    from typer._click.exceptions import NoArgsIsHelpError, UsageError
except ImportError:  # pragma: no cover - older typer on the real click
    from click.exceptions import NoArgsIsHelpError, UsageError

from reachgate.checking.lag import DEFAULT_LAG_TOL_RAD
from reachgate.checking.pipeline import DEFAULT_LAG_TOL_M
from reachgate.checking.rail import DEFAULT_BANDWIDTH_HZ
from reachgate.errors import ClusterLostError, ReachgateError

DEFAULT_LAG_TOL_MM = DEFAULT_LAG_TOL_M * 1000.0
DEFAULT_LAG_TOL_DEG = round(math.degrees(DEFAULT_LAG_TOL_RAD), 9)


@contextmanager
def _one_line_errors() -> Iterator[None]:
    """A wrong command line as one stderr line and exit 2 (click prints Usage / Try / Error),
    and no numeric warning (overflow, invalid value) on the terminal: every result that
    matters is judged by the checks, never read from a warning."""
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            yield
    except NoArgsIsHelpError:
        raise
    except UsageError as error:
        where = f" (see: {error.ctx.command_path} --help)" if error.ctx else ""
        message = " ".join(error.format_message().replace("Value error, ", "").split())
        print(f"reachgate: error: {message}{where}", file=sys.stderr)
        raise typer.Exit(EXIT_BAD_INPUT) from None


class _OneLineErrors(TyperGroup):
    """The command group, its usage errors and warnings handled by _one_line_errors."""

    def make_context(self, *args, **kwargs):
        with _one_line_errors():
            return super().make_context(*args, **kwargs)

    def invoke(self, ctx):
        with _one_line_errors():
            return super().invoke(ctx)


app = typer.Typer(
    cls=_OneLineErrors,
    add_completion=False,
    no_args_is_help=True,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
    help="Check, before anything moves, whether an arm can follow a commanded TCP path.",
)

T = TypeVar("T")

EXIT_PASS, EXIT_FAIL, EXIT_BAD_INPUT = 0, 1, 2


def _fail_bad_input(message: str) -> None:
    print(f"reachgate: error: {message}", file=sys.stderr)
    raise typer.Exit(EXIT_BAD_INPUT)


def _guarded(call: Callable[[], T]) -> T:
    """Run a library call; bad input becomes one stderr line and exit code 2. Stray numerical
    warnings (RuntimeWarning) are kept off the terminal: undefined values stop a check by name."""
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            return call()
    except ClusterLostError:
        raise  # its own exit code, set by the scan command
    except ReachgateError as error:
        _fail_bad_input(str(error))
    except OSError as error:  # unreadable output paths and the like
        _fail_bad_input(f"{getattr(error, 'filename', '') or ''}: {error.strerror or error}")
    raise AssertionError("unreachable")


def _write_or_print(text: str, out: Path | None) -> None:
    if out is None:
        sys.stdout.write(text if text.endswith("\n") else text + "\n")
    else:
        from reachgate.render.files import write_text

        _guarded(lambda: write_text(out, text))


def _refuse_overwriting_inputs(outputs: dict, inputs: dict) -> None:
    """Exit 2 when an output option names an input file (or two outputs one file)."""
    from reachgate.render.files import refuse_overwriting_inputs

    _guarded(lambda: refuse_overwriting_inputs(outputs, inputs))


# --- commands are registered below, one section each --------------------------------------


class OutputFormat(str, Enum):
    table = "table"
    json = "json"
    csv = "csv"


class RailMode(str, Enum):
    fixed = "fixed"
    follow = "follow"


PlaceOption = Annotated[
    str | None,
    typer.Option("--place", help="Scenario frame in the cell: 'x,y,z,roll,pitch,yaw' (m, deg)."),
]
WorkersOption = Annotated[
    int | None, typer.Option("--workers", help="Local worker processes (default: one per CPU).")
]
ClusterOption = Annotated[
    str | None,
    typer.Option("--cluster", help="Address of a running Dask scheduler to check the cases."),
]
RailOption = Annotated[RailMode, typer.Option("--rail", help="Rail policy: fixed or follow.")]
RailAtOption = Annotated[
    float | None, typer.Option("--rail-at", help="Fixed rail position, m (default: home).")
]
BandwidthOption = Annotated[
    float, typer.Option("--rail-bandwidth", help="follow: the rail takes motion below this, Hz.")
]
LagOption = Annotated[float | None, typer.Option("--lag", help="Loop delay of the rig, s.")]
LagTolOption = Annotated[
    float | None,
    typer.Option(
        "--lag-tol",
        help=f"Tracking error the delay may cause, mm (with --lag; default {DEFAULT_LAG_TOL_MM:g})",
    ),
]


class PredictMode(str, Enum):
    none = "none"
    linear = "linear"
    quadratic = "quadratic"


LagTolDegOption = Annotated[
    float | None,
    typer.Option(
        "--lag-tol-deg",
        help=f"TCP rotation error the delay may cause, deg (default {DEFAULT_LAG_TOL_DEG:g}).",
    ),
]
PredictOption = Annotated[
    PredictMode | None,
    typer.Option(
        "--predict",
        help="The rig's delay compensation: extrapolate the command over --lag (causally).",
    ),
]


class EndsMode(str, Enum):
    rest = "rest"
    free = "free"


EndsOption = Annotated[
    EndsMode,
    typer.Option(
        "--ends",
        help="rest: the arm is held still before the first sample and after the last; "
        "free: the path is cut out of a longer run.",
    ),
]


def settings_from_options(
    place,
    rail,
    rail_at,
    rail_bandwidth,
    lag,
    lag_tol,
    lag_tol_deg=None,
    predict=None,
    ends=None,
):
    """CheckSettings from the shared check/scan options (SI inside).

    Refuses options that would be ignored: --lag-tol, --lag-tol-deg or --predict without
    --lag, --rail-at with --rail follow (the carriage then moves; --rail-at fixes it).
    """
    from reachgate.checking.lag import Prediction
    from reachgate.checking.pipeline import CheckSettings, Ends, Placement
    from reachgate.checking.rail import RailPolicy

    _refuse_ignored_rail_at(rail, rail_at)
    for name, given in (
        ("--lag-tol", lag_tol),
        ("--lag-tol-deg", lag_tol_deg),
        ("--predict", predict),
    ):
        if given is not None and lag is None:
            raise ReachgateError(
                f"{name}: the lag check runs only with --lag S (the rig's loop delay); "
                f"give --lag, or leave out {name}"
            )
    return CheckSettings(
        placement=Placement() if place is None else Placement.parse(place),
        rail=RailPolicy(rail.value),
        rail_at_m=rail_at,
        rail_bandwidth_hz=rail_bandwidth,
        lag_s=lag,
        lag_tol_m=DEFAULT_LAG_TOL_M if lag_tol is None else lag_tol / 1000.0,
        lag_tol_rad=DEFAULT_LAG_TOL_RAD if lag_tol_deg is None else math.radians(lag_tol_deg),
        predict=Prediction.NONE if predict is None else Prediction(predict.value),
        ends=Ends.REST if ends is None else Ends(ends.value),
    )


def _refuse_ignored_rail_at(rail, rail_at) -> None:
    if rail_at is not None and rail is RailMode.follow:
        raise ReachgateError(
            f"--rail-at {rail_at:g}: fixes the carriage, but --rail follow moves it with the "
            "path (around the rail's home); give one or the other"
        )


# --- check ---


@app.command("check")
def check_command(
    ctx: typer.Context,
    robot: Annotated[Path, typer.Argument(help="Robot description or rig file (TOML).")],
    trajectory: Annotated[
        Path,
        typer.Argument(
            help="Trajectory (CSV, Parquet or Arrow IPC); a rig's scenario (CSV) gives each "
            "body's columns."
        ),
    ],
    place: PlaceOption = None,
    rail: RailOption = RailMode.fixed,
    rail_at: RailAtOption = None,
    rail_bandwidth: BandwidthOption = DEFAULT_BANDWIDTH_HZ,
    lag: LagOption = None,
    lag_tol: LagTolOption = None,
    lag_tol_deg: LagTolDegOption = None,
    predict: PredictOption = None,
    ends: EndsOption = EndsMode.rest,
    fmt: Annotated[
        OutputFormat, typer.Option("--format", help="Report format.")
    ] = OutputFormat.table,
    out: Annotated[Path | None, typer.Option("--out", help="Write the report here.")] = None,
    joints_out: Annotated[
        Path | None, typer.Option("--joints-out", help="Write the solved joint trajectory (CSV).")
    ] = None,
    plot: Annotated[
        Path | None,
        typer.Option("--plot", help="Write a picture of every axis against its limits."),
    ] = None,
) -> None:
    """Check one case: can the arm (every arm of a rig) follow every sample of the trajectory?"""
    from reachgate.batch.scan import file_sha256
    from reachgate.checking.pipeline import check
    from reachgate.model.rig import load_rig
    from reachgate.model.trajectory import load_trajectory
    from reachgate.render.check_report import render, write_joints

    _refuse_overwriting_inputs(
        {"--out": out, "--joints-out": joints_out, "--plot": plot},
        {"robot file": robot, "trajectory": trajectory},
    )
    settings = _guarded(
        lambda: settings_from_options(
            place, rail, rail_at, rail_bandwidth, lag, lag_tol, lag_tol_deg, predict, ends
        )
    )
    rig = _guarded(lambda: load_rig(robot))
    if not rig.alone:
        _refuse_overwriting_inputs(
            {"--out": out, "--joints-out": joints_out, "--plot": plot},
            {f"robot file of {r.name}": Path(r.robot.source) for r in rig.robots},
        )
        given = _given(ctx, "rail", "rail_at", "rail_bandwidth")
        _check_rig(rig, trajectory, settings, given, fmt, out, joints_out, plot)
    model = rig.robots[0].robot
    path = _guarded(lambda: load_trajectory(trajectory))
    report = _guarded(lambda: check(model, path, settings))
    inputs = {"robot_sha256": file_sha256(robot), "trajectory_sha256": file_sha256(trajectory)}
    _write_or_print(render(report, fmt.value, inputs), out)
    if joints_out is not None:
        _guarded(lambda: write_joints(report, joints_out, model.axes))
    if plot is not None:
        from reachgate.render.pictures import plot_report

        _guarded(lambda: plot_report(report, model, plot))
    raise typer.Exit(EXIT_PASS if report.passed else EXIT_FAIL)


def _given(ctx: typer.Context, *names: str) -> bool:
    """True when any of the named options was given on the command line. (By the source's
    name: typer's own copy of click has its own ParameterSource enum, not click's.)"""
    return any(getattr(ctx.get_parameter_source(n), "name", None) == "COMMANDLINE" for n in names)


def _check_rig(rig, scenario_path, settings, rails_given, fmt, out, joints_out, plot) -> None:
    """`check RIG SCENARIO`: every robot and the clearance of every pair, one report."""
    from reachgate.batch.scan import file_sha256
    from reachgate.checking.rig_check import RailChoice, check_rig
    from reachgate.model.trajectory import load_scenario
    from reachgate.render.rig_report import render_rig, write_rig_joints

    rails = None
    if rails_given:
        rails = RailChoice(settings.rail, settings.rail_at_m, settings.rail_bandwidth_hz)
    scenario = _guarded(lambda: load_scenario(scenario_path))
    report = _guarded(lambda: check_rig(rig, scenario, settings, rails))
    inputs = {
        "rig_sha256": file_sha256(rig.source),
        "robot_sha256": {r.name: file_sha256(r.robot.source) for r in rig.robots},
        "trajectory_sha256": file_sha256(scenario_path),
    }
    _write_or_print(render_rig(report, fmt.value, inputs), out)
    if joints_out is not None:
        _guarded(lambda: write_rig_joints(report, rig, joints_out))
    if plot is not None:
        from reachgate.render.rig_picture import plot_rig_report

        _guarded(lambda: plot_rig_report(report, rig, plot))
    raise typer.Exit(EXIT_PASS if report.passed else EXIT_FAIL)


# --- robot ---


@app.command("robot")
def robot_command(
    robot: Annotated[Path, typer.Argument(help="Robot description (TOML).")],
) -> None:
    """Load, validate and describe a robot: DH table, limits, home pose, reach, IK solver."""
    from reachgate.model.robot import load_robot
    from reachgate.render.describe import describe_robot

    model = _guarded(lambda: load_robot(robot))
    _write_or_print(describe_robot(model), None)


# --- rig ---


@app.command("rig")
def rig_command(
    rig: Annotated[Path, typer.Argument(help="Rig file (TOML), or a robot file alone.")],
    plot: Annotated[
        Path | None, typer.Option("--plot", help="Write top and side views at home (PNG).")
    ] = None,
) -> None:
    """Load, validate and describe a rig: robots, bases, obstacles, the pairs checked and not."""
    from reachgate.model.rig import load_rig
    from reachgate.render.rig_describe import describe_rig

    _refuse_overwriting_inputs({"--plot": plot}, {"rig file": rig})
    model = _guarded(lambda: load_rig(rig))
    _write_or_print(_guarded(lambda: describe_rig(model)), None)
    if plot is not None:
        from reachgate.render.rig_picture import plot_rig

        _refuse_overwriting_inputs(
            {"--plot": plot},
            {f"robot file of {r.name}": Path(r.robot.source) for r in model.robots},
        )
        _guarded(lambda: plot_rig(model, plot))


# --- perturb ---


@app.command("perturb")
def perturb_command(
    nominal: Annotated[
        Path, typer.Argument(help="Nominal trajectory, or a scenario of several bodies (CSV).")
    ],
    count: Annotated[int, typer.Option("--count", help="Number of cases to write.")],
    seed: Annotated[int, typer.Option("--seed", help="Seed; the same seed gives the same files.")],
    intensity: Annotated[
        str | None,
        typer.Option("--intensity", help="light, moderate or severe (default moderate)."),
    ] = None,
    sigma: Annotated[
        float | None, typer.Option("--sigma", help="Vertical gust intensity sigma_w, m/s.")
    ] = None,
    airspeed: Annotated[float, typer.Option("--airspeed", help="Airspeed, m/s.")] = 10.0,
    altitude: Annotated[
        float, typer.Option("--altitude", help="Altitude, m (at most 304.8).")
    ] = 10.0,
    washout: Annotated[
        float, typer.Option("--washout", help="Station-keeping washout time constant, s.")
    ] = 0.2,
    response_hz: Annotated[
        float,
        typer.Option("--response-hz", help="Natural frequency of the vehicle's response, Hz."),
    ] = 0.5,
    out: Annotated[
        Path | None, typer.Option("--out", help="Folder for the cases (default NOMINAL_cases).")
    ] = None,
    replace: Annotated[
        bool,
        typer.Option(
            "--replace",
            help="Remove the cases perturb wrote in --out with other settings, then write.",
        ),
    ] = False,
    body: Annotated[
        str | None,
        typer.Option(
            "--body",
            help="A scenario of several bodies: the body the gusts move (the others as given).",
        ),
    ] = None,
) -> None:
    """Write disturbance cases of a nominal path: Dryden turbulence (MIL-F-8785C), for a scan."""
    from reachgate.model.trajectory import load_scenario
    from reachgate.motion.disturb import iter_disturbance_cases
    from reachgate.render.cases import write_case_files

    if intensity is None and sigma is None:
        intensity = "moderate"
    path = _guarded(lambda: load_scenario(nominal))
    cases = _guarded(
        lambda: iter_disturbance_cases(
            path, count, seed, intensity=intensity, sigma_m_s=sigma,
            airspeed_m_s=airspeed, altitude_m=altitude, washout_s=washout,
            response_hz=response_hz, body=body,
        )
    )  # fmt: skip
    out_dir = out if out is not None else nominal.parent / f"{nominal.stem}_cases"
    files = _guarded(
        lambda: write_case_files(cases, out_dir, nominal.stem, replace=replace, inputs=(nominal,))
    )
    print(f"wrote {len(files)} disturbance cases to {out_dir}: {files[0].name} .. {files[-1].name}")


# --- envelope ---


@app.command("envelope")
def envelope_command(
    robot: Annotated[Path, typer.Argument(help="Robot description or rig file (TOML).")],
    robot_name: Annotated[
        str | None,
        typer.Option("--robot", help="A rig: the robot whose envelope to find (its own cell)."),
    ] = None,
    pose: Annotated[
        str | None,
        typer.Option(
            "--pose", help="Operating TCP pose in the cell: 'x,y,z,roll,pitch,yaw' (m, deg)."
        ),
    ] = None,
    axes: Annotated[
        str,
        typer.Option("--axes", help="Directions, any of x,y,z (cell) and roll,pitch,yaw (TCP)."),
    ] = "x,y,z,roll,pitch,yaw",
    freq_range: Annotated[
        str, typer.Option("--freq-range", help="Lowest and highest frequency, 'low,high' in Hz.")
    ] = "0.1,10",
    freqs: Annotated[int, typer.Option("--freqs", help="Number of log-spaced frequencies.")] = 13,
    place: Annotated[
        str | None,
        typer.Option(
            "--place",
            help="Scenario frame in the cell 'x,y,z,roll,pitch,yaw' (m, deg): x,y,z then move "
            "along the scenario's axes.",
        ),
    ] = None,
    rail: RailOption = RailMode.fixed,
    rail_at: RailAtOption = None,
    rail_bandwidth: BandwidthOption = DEFAULT_BANDWIDTH_HZ,
    fmt: Annotated[
        OutputFormat, typer.Option("--format", help="Envelope format.")
    ] = OutputFormat.table,
    out: Annotated[Path | None, typer.Option("--out", help="Write the envelope here.")] = None,
    plot: Annotated[
        Path | None, typer.Option("--plot", help="Write a log-log picture of the envelope.")
    ] = None,
) -> None:
    """Largest sinusoid amplitude the arm can follow around a pose, per direction and frequency."""
    from reachgate.checking.pipeline import Placement
    from reachgate.checking.rail import RailPolicy
    from reachgate.motion.envelope import (
        envelope,
        frequencies_from_range,
        parse_directions,
        parse_pose,
    )
    from reachgate.render.envelope_report import render_envelope

    directions = _guarded(lambda: parse_directions(axes))
    frequencies = _guarded(lambda: frequencies_from_range(freq_range, freqs))
    cell_T_pose = None if pose is None else _guarded(lambda: parse_pose(pose))
    placement = None if place is None else _guarded(lambda: Placement.parse(place))
    _guarded(lambda: _refuse_ignored_rail_at(rail, rail_at))
    if plot is not None and plot.suffix.lower() != ".png":
        _fail_bad_input(f"--plot: {plot}: the picture is written as PNG, name it *.png")
    _refuse_overwriting_inputs({"--out": out, "--plot": plot}, {"robot file": robot})
    model = _guarded(lambda: _robot_of_rig(robot, robot_name))
    result = _guarded(
        lambda: envelope(
            model,
            cell_T_operating=cell_T_pose,
            directions=directions,
            frequencies_hz=frequencies,
            rail=RailPolicy(rail.value),
            placement=placement,
            rail_at_m=rail_at,
            rail_bandwidth_hz=rail_bandwidth,
        )
    )
    _write_or_print(render_envelope(result, fmt.value), out)
    if plot is not None:
        from reachgate.render.pictures import plot_envelope

        _guarded(lambda: plot_envelope(result, plot))
    raise typer.Exit(EXIT_PASS)


def _robot_of_rig(path: Path, name: str | None):
    """The robot of a robot file, or the robot `name` of a rig file (in its own cell frame)."""
    from reachgate.model.rig import load_rig

    rig = load_rig(path)
    if name is None:
        if len(rig.robots) > 1:
            names = ", ".join(r.name for r in rig.robots)
            raise ReachgateError(f"{path}: a rig of robots {names}; pick one with --robot")
        return rig.robots[0].robot
    if rig.alone:
        raise ReachgateError(f"--robot: {path} is a robot file, not a rig")
    return rig.robot(name).robot


# --- scan ---


class ScanFormat(str, Enum):
    table = "table"
    json = "json"
    csv = "csv"
    html = "html"


@app.command("scan")
def scan_command(
    ctx: typer.Context,
    robot: Annotated[
        Path | None,
        typer.Argument(
            help="Robot description or rig file (TOML; a rig's cases are scenarios); "
            "optional with --report."
        ),
    ] = None,
    cases: Annotated[
        list[str] | None,
        typer.Argument(
            help="Case files, folders (every .csv, .parquet, .feather inside) and globs.",
            show_default=False,
        ),
    ] = None,
    place: PlaceOption = None,
    rail: RailOption = RailMode.fixed,
    rail_at: RailAtOption = None,
    rail_bandwidth: BandwidthOption = DEFAULT_BANDWIDTH_HZ,
    lag: LagOption = None,
    lag_tol: LagTolOption = None,
    lag_tol_deg: LagTolDegOption = None,
    predict: PredictOption = None,
    ends: EndsOption = EndsMode.rest,
    store: Annotated[
        Path | None,
        typer.Option(
            "--store",
            help="Results store (SQLite); default reachgate_scan.sqlite in the cases' folder.",
        ),
    ] = None,
    workers: WorkersOption = None,
    cluster: ClusterOption = None,
    fresh: Annotated[
        bool, typer.Option("--fresh", help="Check every case again, even those already stored.")
    ] = False,
    report: Annotated[
        bool, typer.Option("--report", help="Print the summary held in --store; check nothing.")
    ] = False,
    quiet: Annotated[bool, typer.Option("--quiet", help="No progress bar.")] = False,
    fmt: Annotated[
        ScanFormat,
        typer.Option("--format", help="Summary format; html: the one-page morning report."),
    ] = ScanFormat.table,
    out: Annotated[Path | None, typer.Option("--out", help="Write the summary here.")] = None,
    compare: Annotated[
        Path | None,
        typer.Option("--compare", help="Another results store: list what changed since it."),
    ] = None,
    pictures: Annotated[
        int,
        typer.Option("--pictures", help="html: draw this many worst failing cases (0: none)."),
    ] = 3,
) -> None:
    """Check many cases with one robot and one set of options; results in a store, resumable."""
    from contextlib import nullcontext

    from reachgate.batch.scan import load_summary, scan
    from reachgate.render.scan_report import ProgressBar

    _refuse_overwriting_inputs(
        {"--out": out},
        {
            "robot file": robot,
            "results store": store,
            "other results store": compare,
            **{f"case {case}": case for case in cases or () if Path(case).is_file()},
        },
    )
    if pictures < 0:
        _fail_bad_input(f"--pictures: must be 0 or more, got {pictures}")
    if report:
        if store is None:
            _fail_bad_input("--report reads a results store: give --store FILE")
        if cases:
            _fail_bad_input("--report checks nothing: give no cases (ROBOT is optional)")
        summary = _guarded(lambda: load_summary(store, robot_path=robot))
    else:
        if robot is None or not cases:
            _fail_bad_input("scan needs ROBOT and at least one case (file, folder or glob)")
        if out is not None:
            from reachgate.model.rig import load_rig

            model = _guarded(lambda: load_rig(robot))
            _refuse_overwriting_inputs(
                {"--out": out},
                {f"robot file of {r.name}": Path(r.robot.source) for r in model.robots},
            )
        settings = _guarded(
            lambda: settings_from_options(
                place, rail, rail_at, rail_bandwidth, lag, lag_tol, lag_tol_deg, predict, ends
            )
        )
        rails = None
        if _given(ctx, "rail", "rail_at", "rail_bandwidth"):  # else a rig's own rail choices
            from reachgate.checking.rig_check import RailChoice

            rails = RailChoice(settings.rail, settings.rail_at_m, settings.rail_bandwidth_hz)
        if cluster:
            _quiet_dask_logging()
        bar = nullcontext(None) if quiet or not sys.stderr.isatty() else ProgressBar()
        try:
            with bar as show:
                summary = _guarded(
                    lambda: scan(
                        robot,
                        cases,
                        settings,
                        store_path=store,
                        workers=workers,
                        cluster=cluster,
                        fresh=fresh,
                        progress=show,
                        rails=rails,
                    )
                )
        except KeyboardInterrupt:
            print(
                "reachgate: scan interrupted; finished cases are in the store, "
                "run the same command again to resume",
                file=sys.stderr,
            )
            raise typer.Exit(EXIT_INTERRUPTED) from None
        except ClusterLostError as error:
            print(f"reachgate: error: {error}", file=sys.stderr)
            raise typer.Exit(EXIT_CLUSTER_LOST) from None
    text = _guarded(lambda: _scan_output(summary, fmt, robot, compare, pictures))
    _write_or_print(text, out)
    raise typer.Exit(EXIT_PASS if summary.passed else EXIT_FAIL)


def _scan_output(summary, fmt: ScanFormat, robot: Path | None, compare, pictures) -> str:
    """The summary (or with --compare the changes) in the asked format; html: the page."""
    from reachgate.render.scan_report import render_summary

    comparison = None
    if compare is not None:
        from reachgate.batch.compare import compare_stores

        comparison = compare_stores(summary, compare)
    if fmt is ScanFormat.html:
        from reachgate.render.night_report import render_night_page

        return render_night_page(
            summary, robot_path=robot, comparison=comparison, pictures=pictures
        )
    if comparison is not None:
        from reachgate.render.compare_report import render_comparison

        return render_comparison(comparison, fmt.value)
    return render_summary(summary, fmt.value)


# --- delay ---


class DelayFormat(str, Enum):
    table = "table"
    json = "json"


@app.command("delay")
def delay_command(
    commanded: Annotated[
        Path, typer.Argument(help="Commanded log: poses (as a trajectory) or axis values.")
    ],
    measured: Annotated[Path, typer.Argument(help="What the rig reported back, same kind.")],
    fmt: Annotated[
        DelayFormat, typer.Option("--format", help="Output format.")
    ] = DelayFormat.table,
    out: Annotated[Path | None, typer.Option("--out", help="Write the estimate here.")] = None,
    plot: Annotated[
        Path | None, typer.Option("--plot", help="Write gain and phase against frequency (PNG).")
    ] = None,
) -> None:
    """Estimate the rig's loop delay and tracking bandwidth from a run log; the --lag to use."""
    from reachgate.motion.delay import estimate_delay_from_files
    from reachgate.render.delay_report import render_delay

    _refuse_overwriting_inputs(
        {"--out": out, "--plot": plot}, {"commanded log": commanded, "measured log": measured}
    )
    if plot is not None and plot.suffix.lower() != ".png":
        _fail_bad_input(f"--plot: {plot}: the picture is written as PNG, name it *.png")
    estimate = _guarded(lambda: estimate_delay_from_files(commanded, measured))
    _write_or_print(render_delay(estimate, fmt.value), out)
    if plot is not None:
        from reachgate.render.pictures import plot_delay

        _guarded(lambda: plot_delay(estimate, plot))
    raise typer.Exit(EXIT_PASS)


def _quiet_dask_logging() -> None:
    """Keep distributed's log lines (reconnect attempts, a lost scheduler's tracebacks) off
    the terminal: the scan says what happened in one line of its own."""
    import logging

    import distributed  # noqa: F401  (sets up its loggers, which are then turned down)

    for name in [*logging.root.manager.loggerDict, "distributed"]:
        if name == "distributed" or name.startswith("distributed."):
            logging.getLogger(name).setLevel(logging.CRITICAL)


# --- place ---


class PlaceFormat(str, Enum):
    table = "table"
    json = "json"


def _case_labels(paths) -> list[str]:
    """Case names for the output: file names, or paths from the cases' common folder."""
    names = [p.name for p in paths]
    if len(set(names)) == len(names):
        return names
    common = Path(os.path.commonpath([str(p.parent) for p in paths]))
    return [p.relative_to(common).as_posix() for p in paths]


@app.command("place")
def place_command(
    ctx: typer.Context,
    robot: Annotated[Path, typer.Argument(help="Robot description or rig file (TOML).")],
    cases: Annotated[
        list[str],
        typer.Argument(
            help="Case files, folders (every *.csv inside) and glob patterns.", show_default=False
        ),
    ],
    vary: Annotated[
        str,
        typer.Option(
            "--vary",
            help="What may change and how far: 'x=-1:1,y=-2:2,yaw=-45:45' (x y z m, roll "
            "pitch yaw deg, rail_at m, bandwidth Hz; a rig's rails: carrier.rail_at, ...).",
        ),
    ],
    place: PlaceOption = None,
    rail: RailOption = RailMode.fixed,
    rail_at: RailAtOption = None,
    rail_bandwidth: BandwidthOption = DEFAULT_BANDWIDTH_HZ,
    lag: LagOption = None,
    lag_tol: LagTolOption = None,
    lag_tol_deg: LagTolDegOption = None,
    predict: PredictOption = None,
    ends: EndsOption = EndsMode.rest,
    seed: Annotated[int, typer.Option("--seed", help="Seed of the search (repeatable).")] = 0,
    workers: WorkersOption = None,
    cluster: ClusterOption = None,
    map_png: Annotated[
        Path | None,
        typer.Option("--map", help="Write the score over two varied quantities (PNG)."),
    ] = None,
    map_over: Annotated[
        str | None,
        typer.Option("--map-over", help="The map's two quantities, 'x,yaw' (default: first two)."),
    ] = None,
    map_points: Annotated[
        int, typer.Option("--map-points", help="The map's points along each quantity.")
    ] = 25,  # = search.placement.MAP_POINTS (not imported: the CLI starts light)
    quiet: Annotated[bool, typer.Option("--quiet", help="No progress line.")] = False,
    fmt: Annotated[
        PlaceFormat, typer.Option("--format", help="Output format.")
    ] = PlaceFormat.table,
    out: Annotated[Path | None, typer.Option("--out", help="Write the output here.")] = None,
) -> None:
    """Find the placement of the scenario in the cell with the most room on every case."""
    from contextlib import nullcontext

    from reachgate.batch.scan import discover_cases
    from reachgate.checking.rig_check import RailChoice, rig_rails
    from reachgate.model.rig import load_rig
    from reachgate.model.trajectory import load_scenario, load_trajectory
    from reachgate.render.place_report import ProgressLine, render_placement
    from reachgate.search.placement import place as search_placement
    from reachgate.search.vary import check_variations, parse_vary

    variations = _guarded(lambda: parse_vary(vary))
    quantities = None
    if map_png is not None:
        if map_png.suffix.lower() != ".png":
            _fail_bad_input(f"--map: {map_png}: the picture is written as PNG, name it *.png")
        names = [v.name for v in variations]
        chosen = names[:2] if map_over is None else [n.strip() for n in map_over.split(",")]
        if len(names) < 2 or len(chosen) != 2 or not set(chosen) <= set(names):
            _fail_bad_input(
                f"--map needs two of the varied quantities ({', '.join(names)}), "
                f"got {', '.join(chosen) or 'none'}"
            )
        if chosen[0] == chosen[1]:
            _fail_bad_input("--map-over: name two different quantities")
        quantities = (names.index(chosen[0]), names.index(chosen[1]))
    elif map_over is not None:
        _fail_bad_input("--map-over: give --map FILE.png too")
    if workers is not None and cluster:
        _fail_bad_input("--workers and --cluster: give one (the cluster has its own workers)")
    settings = _guarded(
        lambda: settings_from_options(
            place, rail, rail_at, rail_bandwidth, lag, lag_tol, lag_tol_deg, predict, ends
        )
    )
    if cluster:
        _quiet_dask_logging()
    rig = _guarded(lambda: load_rig(robot))
    rails = None
    if rig.alone:
        model, inputs = rig.robots[0].robot, {"robot file": robot}
    else:  # a rig: the rail options, when given, apply to every robot with a rail (as in check)
        model = rig
        inputs = {"rig file": robot, **{f"robot file of {r.name}": Path(r.robot.source)
                                        for r in rig.robots}}  # fmt: skip
        if _given(ctx, "rail", "rail_at", "rail_bandwidth"):
            rails = RailChoice(settings.rail, settings.rail_at_m, settings.rail_bandwidth_hz)
    _guarded(
        lambda: check_variations(
            model, settings, variations, None if rig.alone else rig_rails(rig, rails)
        )
    )
    paths = _guarded(lambda: discover_cases(cases))
    _refuse_overwriting_inputs(
        {"--out": out, "--map": map_png}, {**inputs, **{f"case {p.name}": p for p in paths}}
    )
    load_case = load_trajectory if rig.alone else load_scenario
    paths_loaded = [_guarded(lambda p=p: load_case(p)) for p in paths]
    show = nullcontext(None) if quiet or not sys.stderr.isatty() else ProgressLine()
    with show as progress:
        result = _guarded(
            lambda: search_placement(
                model,
                paths_loaded,
                variations,
                settings,
                rails=rails,
                labels=_case_labels(paths),
                seed=seed,
                workers=workers or os.cpu_count() or 1,
                cluster=cluster,
                map_quantities=quantities,
                map_points=map_points,
                progress=progress,
            )
        )
    _write_or_print(render_placement(result, fmt.value), out)
    if map_png is not None:
        from reachgate.render.place_map import plot_score_map

        _guarded(lambda: plot_score_map(result, map_png))
    raise typer.Exit(EXIT_PASS if result.passed else EXIT_FAIL)


#: Exit code of an interrupted scan: 128 + SIGINT, the shell's convention (common practice).
EXIT_INTERRUPTED = 130
#: Exit code of a scan whose Dask scheduler went away or kept no worker (cases kept).
EXIT_CLUSTER_LOST = 3


def main() -> None:
    """Console-script entry point."""
    os.environ.setdefault("NO_COLOR", "1")
    # Worker processes (scan's are spawned) start with this filter: no numeric warning of
    # theirs reaches the terminal either (this process filters them in _one_line_errors).
    os.environ.setdefault("PYTHONWARNINGS", "ignore::RuntimeWarning")
    app(prog_name="reachgate")


# Keep typer imports used in the sections below visible to linters.
__all__ = ["Annotated", "app", "main"]
