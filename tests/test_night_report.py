"""The morning report (`scan --report --format html`, DESIGN §12) and `--compare`.

A small gust batch (perturb at two intensities and two seeds, one case without parameters,
one unreadable case) is scanned once; the page is then checked in a real browser (headless
Chromium), by a strict HTML5 parser (html5lib, the WHATWG parsing algorithm), and against the
store read with plain SQL.
"""

from __future__ import annotations

import io
import json
import shutil
import sqlite3
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from browser import chromium_path, visit_page
from reachgate.batch.scan import scan
from reachgate.batch.store import Store
from reachgate.checking.pipeline import CheckSettings, Ends
from reachgate.checking.rail import RailPolicy
from reachgate.cli import app
from reachgate.model.trajectory import Trajectory, load_trajectory, write_trajectory
from reachgate.motion.case_parameters import read_case_parameters
from reachgate.motion.disturb import make_disturbance_cases
from reachgate.render.cases import write_case_files
from reachgate.render.pictures import DPI, REPORT_SIZE_IN

from conftest import DEMO_CASES, DEMO_ROBOT

REPO = Path(__file__).resolve().parents[1]
#: Worst cases drawn on the page (each is checked again and drawn: about a second each).
PICTURES = 2
#: (intensity, seed, count) of the batch: light passes, severe mostly fails (measured).
PLAN = (("light", 3, 3), ("severe", 3, 3), ("severe", 4, 3))


def short_nominal() -> Trajectory:
    """The first 6 s of the demo approach, evenly resampled at 100 Hz (perturb is fast on
    even steps)."""
    nominal = load_trajectory(DEMO_CASES / "approach_calm.csv")
    t = np.linspace(0.0, 6.0, 601)
    p = np.column_stack([np.interp(t, nominal.t_s, nominal.scenario_p_m[:, k]) for k in range(3)])
    q = np.column_stack(
        [np.interp(t, nominal.t_s, nominal.scenario_q_wxyz[:, k]) for k in range(4)]
    )
    return Trajectory.from_arrays(t, p, q / np.linalg.norm(q, axis=1)[:, None], name="approach")


@pytest.fixture(scope="module")
def night(tmp_path_factory):
    folder = tmp_path_factory.mktemp("night")
    nominal = short_nominal()
    for intensity, seed, count in PLAN:
        cases = make_disturbance_cases(nominal, count, seed, intensity=intensity)
        write_case_files(cases, folder / "cases" / f"{intensity}_{seed}", "approach")
    write_trajectory(folder / "cases" / "plain.csv", nominal, ("no parameters here",))
    lines = (folder / "cases" / "light_3" / "approach_0001.csv").read_text().splitlines()
    header = next(i for i, line in enumerate(lines) if not line.startswith("#"))
    broken = [*lines[header : header + 10], "1,2,oops"]  # no comment lines: no parameters
    (folder / "cases" / "broken.csv").write_text("\n".join(broken) + "\n")
    store = folder / "night.sqlite"
    # the first 6 s of the approach: a window cut out of it (--ends free, DESIGN §11)
    settings = CheckSettings(rail=RailPolicy.FOLLOW, ends=Ends.FREE)
    summary = scan(DEMO_ROBOT, [folder / "cases"], settings, store_path=store, workers=2)
    page = folder / "night.html"
    args = f"scan --store {store} --report --format html --out {page} --pictures {PICTURES}"
    result = CliRunner().invoke(app, args.split())
    assert result.exit_code == 1, result.output  # some cases fail
    return {"folder": folder, "store": store, "page": page, "summary": summary}


def reseal(db: sqlite3.Connection) -> None:
    """Give every case row the checksum of its values now, as the scan that wrote them would
    have: the edited copies below stand for stores written by other runs, not for damage."""
    from reachgate.batch.store import _stored_checksum

    for (case_id,) in db.execute("SELECT case_id FROM cases").fetchall():
        db.execute(
            "UPDATE cases SET row_sha256 = ? WHERE case_id = ?",
            (_stored_checksum(db, case_id), case_id),
        )


def parse_strict(text: str):
    """The page as an element tree; html5lib in strict mode raises on any parse error."""
    import html5lib

    parser = html5lib.HTMLParser(strict=True, namespaceHTMLElements=False)
    return parser.parse(text)


def table_rows(tree, **attributes: str) -> list[list[str]]:
    """Cell texts of the body rows of the one table with these attributes ('_' for '-')."""
    wanted = {k.replace("_", "-"): v for k, v in attributes.items()}
    [table] = [t for t in tree.iter("table") if all(t.get(k) == v for k, v in wanted.items())]
    return [
        ["".join(td.itertext()).strip() for td in tr.findall("td")]
        for tr in table.find("tbody").findall("tr")
    ]


# -- the page in a browser ---------------------------------------------------------------------


def _need_chromium() -> None:
    if chromium_path() is None:
        pytest.skip("chromium is not installed (.ci/run installs the Debian package chromium)")


def test_page_opens_in_chromium_without_errors_requests_or_blank_screen(night):
    """Headless Chromium loads the file, runs nothing that fails, asks for nothing but the
    file and its embedded images, draws a non-blank screen and holds every case in the table."""
    _need_chromium()
    with sqlite3.connect(night["store"]) as db:
        stored = sorted(r[0] for r in db.execute("SELECT case_name FROM cases"))
    visit = visit_page(
        night["page"],
        expressions={
            "cases": "Array.from(document.querySelectorAll('#cases tbody tr'))"
            ".map(r => r.dataset.case)",
            "images": "Array.from(document.images).map(i => i.complete && i.naturalWidth > 0)",
            "scripts": "document.scripts.length",
        },
    )
    assert visit.errors == []
    outside = [u for u in visit.requests if not u.startswith(("data:image/png;base64,", "file:"))]
    assert outside == []
    assert sorted(visit.values["cases"]) == stored
    assert visit.values["images"] and all(visit.values["images"])  # every picture decoded
    assert visit.values["scripts"] == 0
    from PIL import Image

    pixels = np.asarray(Image.open(io.BytesIO(visit.screenshot_png)).convert("L"), dtype=float)
    assert pixels.shape == (1600, 1280)
    assert pixels.std() > 20.0  # text, tables and charts; a blank page has 0
    assert (pixels < 100).mean() > 0.01  # dark ink on a light page


def test_browser_driver_catches_errors_and_outside_requests(tmp_path):
    """The control for the test above: the same driver reports a console error, an uncaught
    exception and a request for a file that is not in the page."""
    _need_chromium()
    bad = tmp_path / "bad.html"
    bad.write_text(
        "<!DOCTYPE html><html><head><title>bad</title></head><body><p>x</p>"
        '<img src="missing.png" alt="">'
        "<script>console.error('boom'); notDefined();</script></body></html>"
    )
    visit = visit_page(bad)
    assert any("boom" in e for e in visit.errors)
    assert any("notDefined" in e for e in visit.errors)
    assert any(u.endswith("/missing.png") for u in visit.requests)


# -- the page as a document --------------------------------------------------------------------


def test_page_is_strict_html5_self_contained_and_scriptless(night):
    text = night["page"].read_text(encoding="utf-8")
    tree = parse_strict(text)
    assert tree.find(".//script") is None
    sources = [e.get("src") for e in tree.iter() if e.get("src")]
    links = [e.get("href") for e in tree.iter() if e.get("href")]
    assert sources and all(s.startswith("data:image/png;base64,") for s in sources)
    assert links == []
    assert "http:" not in text and "https:" not in text
    from reachgate.render.check_report import SAFETY_CAUTIONS

    cautions = ["".join(li.itertext()) for li in tree.find(".//ul[@class='cautions']")]
    assert cautions == list(SAFETY_CAUTIONS)


def test_ranked_table_holds_the_text_tables_cells(night):
    """Same content as `scan --report`'s text table: every case, rank, verdict, margin."""
    from reachgate.batch.store import load_summary
    from reachgate.render.scan_report import ranked_rows

    tree = parse_strict(night["page"].read_text(encoding="utf-8"))
    expected, _ = ranked_rows(load_summary(night["store"]).cases)
    assert table_rows(tree, id="cases") == [list(r) for r in expected]


def test_counts_and_pass_rates_on_the_page_equal_the_store(night):
    """Plain SQL on the store (JSON1 for the recorded parameters) against the page's tables."""
    tree = parse_strict(night["page"].read_text(encoding="utf-8"))
    db = sqlite3.connect(night["store"])
    verdicts = dict(db.execute("SELECT verdict, count(*) FROM cases GROUP BY verdict").fetchall())
    page_verdicts = {r[0]: int(r[1]) for r in table_rows(tree, id="verdicts")}
    assert page_verdicts == {v: verdicts.get(v, 0) for v in ("pass", "fail", "error")}
    total = sum(verdicts.values())
    pass_rate = tree.find(".//strong[@id='pass-rate']").text
    assert pass_rate == f"{100 * verdicts['pass'] / total:.1f} %"

    for key in ("intensity", "seed"):
        rows = db.execute(
            f"SELECT json_extract(parameters_json, '$.{key}') AS v, count(*), "
            "sum(verdict = 'pass') FROM cases GROUP BY v"
        ).fetchall()
        expected = {
            ("(not recorded)" if v is None else str(v)): (n, passed) for v, n, passed in rows
        }
        page = {
            r[0]: (int(r[1]), int(r[2]))
            for r in table_rows(tree, **{"class": "rates"}, data_parameter=key)
        }
        assert page == expected
        assert len(expected) >= 3  # two values and the cases that record none
    assert page["(not recorded)"] == (2, 1)  # plain.csv passes; broken.csv is an error

    axis_rows = db.execute(
        "SELECT check_name, axis, sum(severity = 'violation'), sum(severity = 'near'), "
        "count(DISTINCT CASE WHEN severity = 'violation' THEN case_id END) "
        "FROM violations GROUP BY check_name, axis"
    ).fetchall()
    page_axes = {
        (r[0], r[1]): tuple(int(x) for x in r[2:]) for r in table_rows(tree, id="axis-counts")
    }
    assert page_axes == {(c, a): (v, n, f) for c, a, v, n, f in axis_rows}
    assert page_axes  # the severe cases have rows
    db.close()


def test_worst_failing_cases_are_checked_again_and_drawn(night):
    import base64

    from PIL import Image

    tree = parse_strict(night["page"].read_text(encoding="utf-8"))
    failing = [c.name for c in night["summary"].cases if c.verdict.value == "fail"]
    figures = tree.findall(".//figure[@class='case-picture']")
    assert [f.get("data-case") for f in figures] == failing[:PICTURES]
    for figure in figures:
        png = base64.b64decode(figure.find("img").get("src").split(",", 1)[1])
        image = Image.open(io.BytesIO(png))
        assert image.size == (REPORT_SIZE_IN[0] * DPI, REPORT_SIZE_IN[1] * DPI)
    assert "checked again" in "".join(tree.find(".//section[@id='pictures']").itertext())


def test_store_from_before_parameters_opens_and_reads_them_from_unchanged_files(night, tmp_path):
    """A store without the parameters column (as written before it) still opens; the report
    reads the parameters from the case files whose sha256 matches, says so, and counts a
    changed file as unknown. A scan writing to it adds the column."""
    from reachgate.batch.digest import SOURCE_FILE, SOURCE_NONE, case_parameters
    from reachgate.batch.store import load_summary

    old = tmp_path / "old.sqlite"
    shutil.copy(night["store"], old)
    with sqlite3.connect(old) as db:
        db.execute("ALTER TABLE cases DROP COLUMN parameters_json")
        reseal(db)
    changed = night["folder"] / "cases" / "severe_4" / "approach_0002.csv"
    original = changed.read_bytes()
    try:
        changed.write_bytes(original.replace(b"# case = 2", b"# case = 2 (edited)"))
        summary = load_summary(old)
        parameters, sources = case_parameters(summary.cases)
    finally:
        changed.write_bytes(original)
    fresh = {c.name: c.parameters for c in load_summary(night["store"]).cases}
    for name, found in parameters.items():
        assert found == ({} if name.endswith("severe_4/approach_0002.csv") else fresh[name] or {})
    assert sources[SOURCE_NONE] == 1  # the edited file
    assert sources[SOURCE_FILE] == len(summary.cases) - 1
    with sqlite3.connect(old) as db:
        columns = {r[1] for r in db.execute("PRAGMA table_info(cases)")}
    assert "parameters_json" not in columns  # reading did not change the store
    with Store(old):
        pass
    with sqlite3.connect(old) as db:
        columns = {r[1] for r in db.execute("PRAGMA table_info(cases)")}
    assert "parameters_json" in columns


def test_perturb_parameters_read_back_from_the_written_files(tmp_path):
    cases = make_disturbance_cases(short_nominal(), 2, 11, intensity=None, sigma_m_s=1.25)
    paths = write_case_files(cases, tmp_path, "n")
    for case, path in zip(cases, paths, strict=True):
        assert read_case_parameters(path) == case.settings


# -- what changed since another store ----------------------------------------------------------


@pytest.fixture(scope="module")
def before(night, tmp_path_factory):
    """A copy of the store, edited as an earlier night could have left it: one case failed
    where it now passes, one case's worst row was on another axis, one case is new since,
    one case existed only then."""
    summary = night["summary"]
    passing = [c for c in summary.cases if c.verdict.value == "pass"]
    failing = [c for c in summary.cases if c.verdict.value == "fail" and c.worst is not None]
    flipped, moved, new_now = passing[0].name, failing[0].name, passing[1].name
    other = tmp_path_factory.mktemp("before") / "before.sqlite"
    shutil.copy(night["store"], other)
    columns = [r[1] for r in sqlite3.connect(other).execute("PRAGMA table_info(cases)")]
    copied = ", ".join(c for c in columns if c not in ("case_id", "case_name"))
    with sqlite3.connect(other) as db:
        db.execute("UPDATE cases SET verdict = 'fail' WHERE case_name = ?", (flipped,))
        db.execute(
            "UPDATE violations SET axis = 'j1-before' WHERE case_id = "
            "(SELECT case_id FROM cases WHERE case_name = ?) AND axis = ? AND check_name = ?",
            (moved, failing[0].worst.axis, failing[0].worst.check.value),
        )
        db.execute(
            "DELETE FROM violations WHERE case_id = "
            "(SELECT case_id FROM cases WHERE case_name = ?)",
            (new_now,),
        )
        db.execute("DELETE FROM cases WHERE case_name = ?", (new_now,))
        db.execute(
            f"INSERT INTO cases (case_name, {copied}) SELECT 'retired.csv', {copied} "
            "FROM cases WHERE case_name = ?",
            (passing[2].name,),
        )
        reseal(db)
    return {"store": other, "flipped": flipped, "moved": moved, "new": new_now}


def _compare(night, before, fmt: str, out: Path | None = None):
    args = ["scan", "--store", str(night["store"]), "--report", "--compare", str(before["store"])]
    args += ["--format", fmt, "--pictures", "0"] + ([] if out is None else ["--out", str(out)])
    return CliRunner().invoke(app, args, env={"COLUMNS": "200"})  # case names unfolded


def test_compare_json_lists_each_kind_of_change(night, before):
    result = _compare(night, before, "json")
    assert result.exit_code == 1, result.output
    data = json.loads(result.stdout)
    assert [
        (r["case"], r["verdict_before"], r["verdict_now"]) for r in data["verdict_changed"]
    ] == [(before["flipped"], "fail", "pass")]
    [moved] = data["worst_changed"]
    assert moved["case"] == before["moved"] and moved["worst_axis_before"] == "j1-before"
    assert moved["worst_axis_now"] != "j1-before"
    assert [r["case"] for r in data["only_in_store"]] == [before["new"]]
    assert [r["case"] for r in data["only_in_other"]] == ["retired.csv"]
    assert data["unchanged"] == len(night["summary"].cases) - 3
    assert data["same_robot"] and data["same_settings"]


def test_compare_text_csv_and_page_name_the_same_cases(night, before, tmp_path):
    text = _compare(night, before, "table").stdout
    for name in (before["flipped"], before["moved"], before["new"], "retired.csv"):
        assert name in text
    assert "verdict changed" in text and "only in the other store" in text
    rows = _compare(night, before, "csv").stdout.splitlines()
    assert rows[0].startswith("change,case,verdict_before,verdict_now")
    assert sorted(r.split(",")[0] for r in rows[1:]) == [
        "only_other",
        "only_store",
        "verdict",
        "worst",
    ]
    page = tmp_path / "compare.html"
    assert _compare(night, before, "html", page).exit_code == 1
    tree = parse_strict(page.read_text(encoding="utf-8"))
    found = {
        t.get("data-change"): [tr.get("data-case") for tr in t.find("tbody").findall("tr")]
        for t in tree.findall(".//table[@class='changes']")
    }
    assert found == {
        "verdict": [before["flipped"]],
        "worst": [before["moved"]],
        "only_store": [before["new"]],
        "only_other": ["retired.csv"],
    }


def test_compare_and_html_bad_input_is_one_line_and_exit_2(night, tmp_path):
    runner = CliRunner()
    base = ["scan", "--store", str(night["store"]), "--report"]
    missing = runner.invoke(app, [*base, "--compare", str(tmp_path / "none.sqlite")])
    assert missing.exit_code == 2
    assert "no such results store" in missing.stderr and len(missing.stderr.splitlines()) == 1
    onto_input = runner.invoke(app, [*base, "--format", "html", "--out", str(night["store"])])
    assert onto_input.exit_code == 2
    assert "an input of this command" in onto_input.stderr


def test_template_is_shipped_as_package_data(tmp_path):
    """setuptools copies the Jinja2 template into a build (build_py of a copy of the tree)."""
    for name in ("pyproject.toml", "README.md"):
        shutil.copy(REPO / name, tmp_path / name)
    shutil.copytree(REPO / "src", tmp_path / "src", ignore=shutil.ignore_patterns("*.egg-info"))
    build = tmp_path / "build"
    SETUP = "import setuptools; setuptools.setup()"
    subprocess.run(
        [sys.executable, "-c", SETUP, "-q", "build_py", "--build-lib", str(build)],
        cwd=tmp_path,
        check=True,
        capture_output=True,
    )
    assert (build / "reachgate" / "render" / "templates" / "night_report.html.j2").is_file()


def test_parameters_changed_outside_reachgate_break_the_row_checksum(night, tmp_path):
    """The recorded parameters feed the pass rates, so the row checksum covers them."""
    from reachgate.batch.store import load_summary
    from reachgate.errors import ReachgateError

    copy = tmp_path / "tampered.sqlite"
    shutil.copy(night["store"], copy)
    with sqlite3.connect(copy) as db:
        db.execute(
            "UPDATE cases SET parameters_json = json_set(parameters_json, '$.intensity', 'light')"
            " WHERE json_extract(parameters_json, '$.intensity') = 'severe'"
        )
    with pytest.raises(ReachgateError, match="does not match its checksum"):
        load_summary(copy)
