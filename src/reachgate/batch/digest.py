"""What the morning report (DESIGN §12) computes from a results store, apart from drawing.

Pass rates by the parameters the case files record about themselves (perturb's intensity,
sigma, seed, ...), each case's worst margin per check, failing cases per check and axis,
and the worst cases checked again for their pictures. The render layer turns a NightDigest
into the page.
"""

from __future__ import annotations

import hashlib
import json
import math
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from reachgate.batch.store import CaseResult, CaseVerdict, ScanSummary
from reachgate.checking.intervals import Check, Severity
from reachgate.errors import ReachgateError
from reachgate.motion.case_parameters import read_case_parameters

#: Parameters shown first, in this order, when they vary (what `perturb` writes); other
#: recorded keys that vary follow in name order.
PARAMETER_ORDER = (
    "intensity",
    "sigma_w_m_s",
    "seed",
    "nominal",
    "airspeed_m_s",
    "altitude_m",
    "washout_s",
    "response_hz",
    "wingspan_m",
)
#: Keys that name one case each (a pass rate over them says nothing).
CASE_IDENTITY_KEYS = frozenset({"case", "case_seed"})
#: A parameter with more distinct values than this is drawn in this many equal-width bins
#: when numeric, and left out (and said) when text: a bar per value would be unreadable.
MAX_GROUPS = 12
#: Label of the cases that do not record a parameter others do.
NOT_RECORDED = "(not recorded)"
#: Where a case's parameters came from.
SOURCE_STORE, SOURCE_FILE, SOURCE_NONE = "results store", "case file, read now", "unknown"


@dataclass(frozen=True)
class RateGroup:
    """Cases sharing one value (or bin) of a parameter: how many, how many pass."""

    label: str
    cases: int
    passed: int

    @property
    def rate(self) -> float:
        return self.passed / self.cases


@dataclass(frozen=True)
class ParameterRates:
    """Pass rate per value of one parameter that varies across the batch.

    same_as: an earlier parameter that splits the cases into the very same groups (sigma_w
    when the intensity was named), drawn once.
    """

    key: str
    groups: tuple[RateGroup, ...]
    binned: bool = False
    same_as: str | None = None


@dataclass(frozen=True)
class AxisCount:
    """Rows of one check on one axis over the batch: violation rows, near rows, failing cases."""

    check: str
    axis: str
    violations: int
    near: int
    cases: int


@dataclass(frozen=True)
class NightDigest:
    """The batch in figures. margins_by_check: check -> (n,) each case's worst margin for that
    check (fraction of the limit left, min over axes); unmeasured: check -> cases where that
    margin is NaN (not measured, never read as a pass)."""

    tally: dict[str, int]
    rates: tuple[ParameterRates, ...]
    constant: dict[str, object]
    skipped: tuple[str, ...]
    parameter_sources: dict[str, int]
    margins_by_check: dict[str, np.ndarray]
    unmeasured: dict[str, int]
    axis_counts: tuple[AxisCount, ...]

    @property
    def cases(self) -> int:
        return sum(self.tally.values())

    @property
    def pass_rate(self) -> float:
        return self.tally[CaseVerdict.PASS.value] / self.cases


def case_parameters(cases: Iterable[CaseResult]) -> tuple[dict[str, dict], dict[str, int]]:
    """Each case's recorded parameters -> ({case name: parameters}, {source: cases}).

    From the store where it recorded them; for a store written before that, from the case
    file's comment lines now, but only while the file still has the stored sha256 (else the
    case's parameters are unknown: {} and counted so).
    """
    found: dict[str, dict] = {}
    sources = {SOURCE_STORE: 0, SOURCE_FILE: 0, SOURCE_NONE: 0}
    for c in cases:
        if c.parameters is not None:
            found[c.name], source = c.parameters, SOURCE_STORE
        else:
            found[c.name], source = _parameters_from_file(c)
        sources[source] += 1
    return found, sources


def _parameters_from_file(c: CaseResult) -> tuple[dict, str]:
    path = Path(c.path)
    try:
        if c.case_sha256 is None or _sha256(path) != c.case_sha256:
            return {}, SOURCE_NONE
        return read_case_parameters(path), SOURCE_FILE
    except (OSError, ReachgateError):
        return {}, SOURCE_NONE


def _sha256(path: Path) -> str:
    digest = hashlib.sha256()
    with path.open("rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def _value_key(value) -> tuple:
    """Numbers by value first, then text by name (perturb's intensities, light < moderate <
    severe, happen to sort in their order of strength)."""
    return (0, value, "") if isinstance(value, int | float) else (1, 0, str(value))


def _label(value) -> str:
    return f"{value:g}" if isinstance(value, float) else str(value)


def _groups(key: str, values: dict[str, object], passed: dict[str, bool]):
    """-> (groups, binned, partition) or None when the key cannot be grouped readably."""
    present = {n: v for n, v in values.items() if v is not None}
    distinct = sorted(set(present.values()), key=_value_key)
    numeric = all(isinstance(v, int | float) for v in distinct)
    members: dict[str, list[str]] = {}
    binned = False
    if len(distinct) > MAX_GROUPS:
        if not numeric:
            return None
        binned = True
        low, high = float(distinct[0]), float(distinct[-1])
        edges = np.linspace(low, high, MAX_GROUPS + 1)
        for n, v in present.items():
            i = min(int(np.searchsorted(edges, float(v), side="right")) - 1, MAX_GROUPS - 1)
            members.setdefault(f"{edges[i]:.4g}–{edges[i + 1]:.4g}", []).append(n)
        order = [f"{edges[i]:.4g}–{edges[i + 1]:.4g}" for i in range(MAX_GROUPS)]
        members = {k: members[k] for k in order if k in members}
    else:
        for v in distinct:
            members[_label(v)] = [n for n, x in present.items() if x == v]
    missing = [n for n, v in values.items() if v is None]
    if missing:
        members[NOT_RECORDED] = missing
    groups = tuple(
        RateGroup(label, len(names), sum(passed[n] for n in names))
        for label, names in members.items()
    )
    partition = frozenset(frozenset(names) for names in members.values())
    return groups, binned, partition


def pass_rates(
    cases: tuple[CaseResult, ...], parameters: dict[str, dict]
) -> tuple[tuple[ParameterRates, ...], dict[str, object], tuple[str, ...]]:
    """Pass rate per value of every recorded parameter that varies.

    -> (rates, constant {key: the one value every case records}, skipped keys (text with
    more than MAX_GROUPS values)). A case that errored counts as not passed.
    """
    passed = {c.name: c.verdict is CaseVerdict.PASS for c in cases}
    keys = {k for p in parameters.values() for k in p} - CASE_IDENTITY_KEYS
    ordered = [k for k in PARAMETER_ORDER if k in keys] + sorted(keys - set(PARAMETER_ORDER))
    rates: list[ParameterRates] = []
    constant: dict[str, object] = {}
    skipped: list[str] = []
    seen: dict[frozenset, str] = {}
    for key in ordered:
        values = {c.name: parameters[c.name].get(key) for c in cases}
        distinct = set(values.values())
        if len(distinct) == 1:
            constant[key] = distinct.pop()
            continue
        grouped = _groups(key, values, passed)
        if grouped is None:
            skipped.append(key)
            continue
        groups, binned, partition = grouped
        rates.append(ParameterRates(key, groups, binned, seen.get(partition)))
        seen.setdefault(partition, key)
    return tuple(rates), constant, tuple(skipped)


def _margin_checks(cases: tuple[CaseResult, ...]) -> list[str]:
    kinds = {k for c in cases for values in (c.margins or {}).values() for k in values}
    return [k.value for k in Check if k.value in kinds] + sorted(kinds - {k.value for k in Check})


def worst_margins_by_check(
    cases: tuple[CaseResult, ...],
) -> tuple[dict[str, np.ndarray], dict[str, int]]:
    """Each case's worst margin per check (min over axes). -> (check -> (n,) finite margins,
    check -> cases whose margin for it is NaN). Cases without margins (errors) are left out."""
    out: dict[str, np.ndarray] = {}
    unmeasured: dict[str, int] = {}
    for kind in _margin_checks(cases):
        per_case = []
        for c in cases:
            values = [v[kind] for v in (c.margins or {}).values() if kind in v]
            if values:
                finite = [x for x in values if x is not None and math.isfinite(x)]
                per_case.append(min(finite) if len(finite) == len(values) else math.nan)
        margins = np.asarray(per_case, dtype=float)
        out[kind] = margins[np.isfinite(margins)]
        unmeasured[kind] = int(np.count_nonzero(~np.isfinite(margins)))
    return out, unmeasured


def axis_counts(cases: tuple[CaseResult, ...]) -> tuple[AxisCount, ...]:
    """Rows per (check, axis) over the batch, in check order then axis name."""
    rows: dict[tuple[str, str], list[int]] = {}
    failing: dict[tuple[str, str], set[str]] = {}
    for c in cases:
        for v in c.violations:
            key = (v.check.value, v.axis)
            counts = rows.setdefault(key, [0, 0])
            if v.severity is Severity.VIOLATION:
                counts[0] += 1
                failing.setdefault(key, set()).add(c.name)
            else:
                counts[1] += 1
    order = {k.value: i for i, k in enumerate(Check)}
    return tuple(
        AxisCount(check, axis, n[0], n[1], len(failing.get((check, axis), ())))
        for (check, axis), n in sorted(rows.items(), key=lambda kv: (order[kv[0][0]], kv[0][1]))
    )


def night_digest(summary: ScanSummary) -> NightDigest:
    parameters, sources = case_parameters(summary.cases)
    rates, constant, skipped = pass_rates(summary.cases, parameters)
    margins, unmeasured = worst_margins_by_check(summary.cases)
    return NightDigest(
        tally=summary.tally(),
        rates=rates,
        constant=constant,
        skipped=skipped,
        parameter_sources=sources,
        margins_by_check=margins,
        unmeasured=unmeasured,
        axis_counts=axis_counts(summary.cases),
    )


# -- the worst cases, checked again for their pictures -------------------------------------


@dataclass(frozen=True)
class Rechecked:
    """One of the worst cases checked again: report and robot, or why there is no picture."""

    case: CaseResult
    report: object | None
    robot: object | None
    reason: str | None


def settings_from_dict(settings: dict):
    """(CheckSettings, rails) from the settings stored with each case: CheckSettings.as_dict(),
    or a rig's (model_files.scan_settings; rails None when the rig file chose them)."""
    from reachgate.checking.lag import DEFAULT_LAG_TOL_RAD, Prediction
    from reachgate.checking.pipeline import CheckSettings, Ends, Placement
    from reachgate.checking.rail import DEFAULT_BANDWIDTH_HZ, RailPolicy
    from reachgate.checking.rig_check import RailChoice

    placement = Placement(
        tuple(settings["place_xyz_m"]), tuple(math.radians(v) for v in settings["place_rpy_deg"])
    )
    rails = None
    if "robots" not in settings:
        rail = settings
    else:  # a rig: the command line's choice was the same for every robot with a rail
        with_rail = [r for r in settings["robots"].values() if r["rail"] is not None]
        rail = with_rail[0] if with_rail else {"rail": "fixed", "rail_at_m": None}
        rail = {"rail_bandwidth_hz": DEFAULT_BANDWIDTH_HZ, **rail}
    choice = RailChoice(RailPolicy(rail["rail"]), rail["rail_at_m"], rail["rail_bandwidth_hz"])
    if settings.get("rails_from") == "command line":
        rails = choice
    return CheckSettings(
        placement=placement,
        rail=choice.policy,
        rail_at_m=choice.at_m,
        rail_bandwidth_hz=choice.bandwidth_hz,
        lag_s=settings["lag_s"],
        lag_tol_m=settings["lag_tol_m"],
        lag_tol_rad=settings.get("lag_tol_rad", DEFAULT_LAG_TOL_RAD),
        predict=Prediction(settings.get("predict", "none")),
        ends=Ends(settings.get("ends", "rest")),
    ), rails


def robot_files(store_path: Path, robot_path: Path | None) -> dict[str, Path]:
    """robot or rig fingerprint (model_files) -> a robot or rig file that has it now: ROBOT if
    given, else the runs' robot paths (newest run first) whose files (a rig's robot files
    too) still hold the content they were scanned with."""
    from reachgate.batch.model_files import file_fingerprint
    from reachgate.batch.store import Store

    candidates = [] if robot_path is None else [Path(robot_path)]
    with Store(store_path, create=False) as store:
        rows = store.db.execute("SELECT robot_path FROM runs ORDER BY run_id DESC").fetchall()
    candidates += [Path(r[0]) for r in rows]
    found: dict[str, Path] = {}
    for path in candidates:
        try:
            found.setdefault(file_fingerprint(path), path)
        except ReachgateError:
            continue
    return found


def recheck_worst(summary: ScanSummary, count: int, robot_path: Path | None = None):
    """Check the `count` worst failing cases again (their pictures need the solved arrays,
    which the store does not keep). -> tuple of Rechecked, worst first; `robot` is the Robot,
    or the Rig (and `report` a RigReport) for a rig's cases."""
    from reachgate.checking.pipeline import check
    from reachgate.checking.rig_check import check_rig
    from reachgate.model.rig import load_rig
    from reachgate.model.trajectory import load_scenario, load_trajectory

    worst = [c for c in summary.cases if c.verdict is CaseVerdict.FAIL][:count]
    if not worst:
        return ()
    robots = robot_files(summary.store_path, robot_path)
    loaded: dict[str, object] = {}
    out = []
    for c in worst:
        robot_file = robots.get(c.robot_sha256)
        if robot_file is None:
            out.append(Rechecked(c, None, None, "no robot file with the stored content found"))
            continue
        try:
            if c.case_sha256 is None or _sha256(Path(c.path)) != c.case_sha256:
                out.append(Rechecked(c, None, None, f"{c.path} changed since the scan"))
                continue
            rig = loaded.get(c.robot_sha256) or load_rig(robot_file)
            loaded[c.robot_sha256] = rig
            settings, rails = settings_from_dict(c.settings)
            if rig.alone:
                robot = rig.robots[0].robot
                report = check(robot, load_trajectory(c.path), settings)
            else:
                robot = rig
                report = check_rig(rig, load_scenario(c.path), settings, rails)
        except OSError as error:
            out.append(Rechecked(c, None, None, f"{c.path}: {error.strerror or error}"))
            continue
        except ReachgateError as error:
            out.append(Rechecked(c, None, None, str(error)))
            continue
        same = report.verdict.value == c.verdict.value
        note = (
            None
            if same
            else f"checked again it gives {report.verdict.value}, not {c.verdict.value}"
        )
        out.append(Rechecked(c, report, robot, note))
    return tuple(out)


def settings_digest(settings: dict) -> str:
    """sha256 of a settings dict in its stored JSON form (sorted keys)."""
    return hashlib.sha256(json.dumps(settings, sort_keys=True).encode()).hexdigest()
