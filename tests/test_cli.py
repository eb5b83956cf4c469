"""The ``hubnet`` command, end to end: demo run, run-folder safety, bad inputs, exit codes.

Most tests drive :data:`hubnet.cli.app` in-process with typer's ``CliRunner``;
``test_console_script`` runs the installed ``hubnet`` script in a subprocess.

Each malformed-input case copies the Iberia demo into ``tmp_path``, corrupts
one thing, and checks that ``hubnet solve`` and ``hubnet check`` exit with
code 2, print the problem on one line naming the file, the row (or config
line) and the column, and write nothing: no run folder, no temporary folder
left behind, and an earlier run folder replaced with ``--force`` stays
byte for byte as it was.
"""

from __future__ import annotations

import csv
import importlib.metadata
import json
import os
import shutil
import subprocess
import sys
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd
import pytest
from typer.testing import CliRunner, Result

from hubnet.cli import app
from hubnet.errors import (
    EXIT_BAD_INPUT,
    EXIT_INFEASIBLE,
    EXIT_NO_SOLUTION,
    EXIT_OK,
    EXIT_OUTPUT_EXISTS,
)
from hubnet.report.tables import COLUMNS

REPO = Path(__file__).resolve().parent.parent
DEMO_CONFIG = REPO / "configs" / "demo.toml"
IBERIA = REPO / "demo_regions" / "iberia"
RUN_FILES = (
    "summary.json",
    "hubs.csv",
    "legs.csv",
    "routes.csv",
    "hierarchy.csv",
    "rank_size.csv",
)

runner = CliRunner()


def invoke(*args: str | Path) -> Result:
    return runner.invoke(app, [str(a) for a in args])


def snapshot(folder: Path) -> dict[str, tuple[bytes, int]]:
    """Every file under a folder: its bytes and modification time (ns)."""
    return {
        str(p.relative_to(folder)): (p.read_bytes(), p.stat().st_mtime_ns)
        for p in sorted(folder.rglob("*"))
        if p.is_file()
    }


# --------------------------------------------------------------------------
# The demo run
# --------------------------------------------------------------------------


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory: pytest.TempPathFactory) -> tuple[Result, Path]:
    """Solve the demo once for this module: the result and its run folder."""
    out = tmp_path_factory.mktemp("demo") / "run"
    result = invoke("solve", DEMO_CONFIG, "--out", out)
    # Every test that needs an earlier run folder stops here, with the reason.
    assert result.exit_code == EXIT_OK, f"the demo solve failed:\n{result.output}"
    return result, out


def test_demo_solve_writes_the_run_folder(demo_run: tuple[Result, Path]) -> None:
    result, out = demo_run
    assert result.exit_code == EXIT_OK, result.output
    for name in RUN_FILES:
        assert (out / name).is_file(), f"{name} missing"
    assert (out / "config.toml").read_bytes() == DEMO_CONFIG.read_bytes()
    assert f"wrote {out}" in result.stderr

    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert summary["status"] == "optimal"
    assert summary["proven_optimal"] is True
    # the inputs as the checks name them: no '..' step from the config's folder
    sites = Path(summary["inputs"]["sites"])
    assert ".." not in sites.parts and sites.parts[-3:] == ("demo_regions", "iberia", "sites.csv")
    assert summary["gap"] is not None and summary["gap"] <= 1e-6
    assert summary["best_bound"] <= summary["objective"] * (1 + 1e-6)
    assert summary["costs"]["total"] == pytest.approx(summary["objective"], rel=1e-9)
    parts = ("hub_fixed", "handling", "collection", "transfer", "distribution")
    assert sum(summary["costs"][k] for k in parts) == pytest.approx(summary["costs"]["total"])
    assert summary["solver"] in ("highs", "cbc")
    assert summary["volume_unit"] == "pallets"

    # Every table has exactly the documented columns.
    tables = {name: pd.read_csv(out / f"{name}.csv") for name in COLUMNS}
    for name, frame in tables.items():
        assert list(frame.columns) == list(COLUMNS[name]), name

    hubs, routes = tables["hubs"], tables["routes"]
    assert list(hubs["hub_id"]) == summary["hubs"]
    assert summary["hub_count"] == len(hubs) >= 1
    # The demo's demand: every ordered pair of the 24 terminals, 9,324 pallets a day.
    demand = pd.read_csv(IBERIA / "demand.csv")
    assert len(routes) == summary["od_pairs"] == len(demand) == 24 * 23
    assert routes["volume_per_day"].sum() == pytest.approx(demand["volume"].sum())
    assert summary["total_volume"] == pytest.approx(9324)
    # Each route starts at its origin, ends at its destination and sorts at open hubs.
    open_hubs = set(summary["hubs"])
    for row in routes.itertuples():
        stops = row.path.split(" > ")
        assert (stops[0], stops[-1]) == (row.origin, row.destination)
        assert set(stops[1:-1]) <= open_hubs
    levels = list(tables["hierarchy"]["tier"])
    assert "trunk" in levels and "feeder" in levels
    assert list(tables["rank_size"]["rank"]) == list(range(1, len(tables["legs"]) + 1))


def test_second_solve_without_force_exits_5_and_changes_nothing(
    demo_run: tuple[Result, Path],
) -> None:
    _, out = demo_run
    before = snapshot(out)
    siblings = sorted(out.parent.iterdir())
    result = invoke("solve", DEMO_CONFIG, "--out", out)
    assert result.exit_code == EXIT_OUTPUT_EXISTS, result.output
    assert "already exists" in result.stderr
    assert "--force" in result.stderr  # the switch to use, by its name
    assert snapshot(out) == before
    assert sorted(out.parent.iterdir()) == siblings


def test_force_replaces_an_earlier_run_folder(
    demo_run: tuple[Result, Path], tmp_path: Path
) -> None:
    _, first = demo_run
    out = tmp_path / "run"
    shutil.copytree(first, out)
    (out / "my_notes.txt").write_text("from an earlier run\n")
    summary = json.loads((out / "summary.json").read_text())
    summary["objective"] = -1.0
    (out / "summary.json").write_text(json.dumps(summary))

    result = invoke("solve", DEMO_CONFIG, "--out", out, "--force", "--quiet")
    assert result.exit_code == EXIT_OK, result.output
    assert not (out / "my_notes.txt").exists()
    fresh = json.loads((out / "summary.json").read_text())
    assert fresh["objective"] == pytest.approx(
        json.loads((first / "summary.json").read_text())["objective"]
    )
    assert sorted(p.name for p in out.iterdir()) == sorted(p.name for p in first.iterdir())
    assert [p.name for p in tmp_path.iterdir()] == ["run"]  # no temporary or old copy left


def test_check_accepts_the_demo() -> None:
    result = invoke("check", DEMO_CONFIG)
    assert result.exit_code == EXIT_OK, result.output
    assert "24 sites (10 candidate hubs), 552 OD pairs" in result.stderr
    assert "pallets per day" in result.stderr


def test_console_script(demo_run: tuple[Result, Path], tmp_path: Path) -> None:
    """The installed ``hubnet`` script: help, check, a bad input, an existing folder."""
    script = Path(sys.executable).parent / "hubnet"
    exe = str(script) if script.exists() else shutil.which("hubnet")
    assert exe, "the hubnet console script is not installed"

    def run(*args: str | Path) -> subprocess.CompletedProcess[str]:
        return subprocess.run(
            [exe, *map(str, args)], capture_output=True, text=True, timeout=300, check=False
        )

    helped = run("--help")
    assert helped.returncode == 0
    assert "solve" in helped.stdout and "check" in helped.stdout
    version = run("--version")
    assert version.returncode == 0
    assert version.stdout.strip() == f"hubnet {importlib.metadata.version('hubnet')}"

    checked = run("check", DEMO_CONFIG)
    assert checked.returncode == 0, checked.stderr
    assert checked.stderr.startswith("ok: 24 sites")

    folder = demo_folder(tmp_path)
    set_cell(folder / "demand.csv", 4, "volume", "-7")
    out = tmp_path / "runs" / "bad"
    bad = run("solve", folder / "scenario.toml", "--out", out)
    assert bad.returncode == EXIT_BAD_INPUT
    assert "demand.csv row 4, column volume: expected a number >= 0, got '-7'" in bad.stderr
    assert "Traceback" not in bad.stderr
    # Nothing written at all: not even the missing parent folder of --out.
    assert not (tmp_path / "runs").exists(), "a rejected run created the --out parent folder"

    _, existing = demo_run
    before = snapshot(existing)
    again = run("solve", DEMO_CONFIG, "--out", existing)
    assert again.returncode == EXIT_OUTPUT_EXISTS
    assert snapshot(existing) == before


# --------------------------------------------------------------------------
# Helpers for corrupting a copy of the demo
# --------------------------------------------------------------------------


def demo_folder(tmp_path: Path) -> Path:
    """A copy of the demo inputs with its config, ``scenario.toml``, beside them."""
    folder = tmp_path / "scenario"
    folder.mkdir()
    for name in ("sites.csv", "demand.csv"):
        shutil.copy(IBERIA / name, folder / name)
    text = DEMO_CONFIG.read_text(encoding="utf-8").replace("../demo_regions/iberia/", "")
    (folder / "scenario.toml").write_text(text, encoding="utf-8")
    return folder


def read_rows(path: Path) -> tuple[list[str], list[dict[str, str]]]:
    with path.open(newline="", encoding="utf-8") as fh:
        reader = csv.DictReader(fh)
        return list(reader.fieldnames or []), list(reader)


def write_rows(path: Path, header: Sequence[str], rows: list[dict[str, str]]) -> None:
    with path.open("w", newline="", encoding="utf-8") as fh:
        writer = csv.DictWriter(fh, fieldnames=list(header), lineterminator="\n")
        writer.writeheader()
        writer.writerows(rows)


def set_cell(path: Path, row: int, column: str, value: str) -> None:
    """Set one cell; ``row`` is the spreadsheet row (the header is row 1)."""
    header, rows = read_rows(path)
    rows[row - 2][column] = value
    write_rows(path, header, rows)


def cell(path: Path, row: int, column: str) -> str:
    return read_rows(path)[1][row - 2][column]


def rename_column(path: Path, old: str, new: str) -> None:
    header, rows = read_rows(path)
    write_rows(
        path,
        [new if h == old else h for h in header],
        [{(new if k == old else k): v for k, v in r.items()} for r in rows],
    )


def edit_config(folder: Path, old: str, new: str) -> None:
    path = folder / "scenario.toml"
    text = path.read_text(encoding="utf-8")
    assert old in text, old
    path.write_text(text.replace(old, new, 1), encoding="utf-8")


def config_line(folder: Path, starts: str, section: str = "") -> int:
    """Line number (1-based) of the first config line starting with ``starts``.

    With ``section`` (``"[solver]"``), the first such line after that header.
    """
    lines = (folder / "scenario.toml").read_text(encoding="utf-8").splitlines()
    after = lines.index(section) + 1 if section else 0
    return next(i for i, line in enumerate(lines, start=1) if i > after and line.startswith(starts))


def write_distance_matrix(folder: Path, skip: tuple[str, str] | None = None) -> None:
    """A complete long-form matrix (geodesic km x circuity, 1 km/min hours), less ``skip``."""
    from hubnet.api import load_scenario

    km = load_scenario(DEMO_CONFIG).distances.km
    ids = [r["id"] for r in read_rows(folder / "sites.csv")[1]]
    rows = [
        {
            "origin": a,
            "destination": b,
            "distance_km": f"{km[i, j]:.3f}",
            "hours": f"{km[i, j] / 60:.4f}",
        }
        for i, a in enumerate(ids)
        for j, b in enumerate(ids)
        if i != j and (a, b) != skip
    ]
    write_rows(folder / "distances.csv", ["origin", "destination", "distance_km", "hours"], rows)
    edit_config(
        folder, 'demand = "demand.csv"', 'demand = "demand.csv"\ndistances = "distances.csv"'
    )
    edit_config(folder, 'method = "geodesic"', 'method = "matrix"')


# --------------------------------------------------------------------------
# Malformed inputs: exit 2, a message naming file, row and column, nothing written
# --------------------------------------------------------------------------

#: What a case expects: for each problem, text naming where ("sites.csv row 3,
#: column lat") and text saying what; both must be on one line of the output.
Expectation = list[tuple[str, str]]


@dataclass(frozen=True)
class Case:
    """One way to break the demo's inputs.

    ``corrupt`` edits the copied scenario folder and returns the expected
    (where, what) pairs; ``args`` are extra options for ``hubnet solve``
    (cases with options are not run through ``hubnet check``, which has none).
    """

    id: str
    corrupt: Callable[[Path], Expectation]
    args: tuple[str, ...] = field(default=())


def _duplicate_site_id(f: Path) -> Expectation:
    header, rows = read_rows(f / "sites.csv")
    rows.append({**rows[-1], "id": "MAD", "name": "Madrid again"})
    write_rows(f / "sites.csv", header, rows)
    return [
        (
            f"sites.csv row {len(rows) + 1}, column id",
            "duplicate site id 'MAD'; it is also on row 2",
        )
    ]


def _unknown_site_in_demand(f: Path) -> Expectation:
    set_cell(f / "demand.csv", 5, "destination", "ZAX")
    return [("demand.csv row 5, column destination", "unknown site 'ZAX'")]


def _unknown_site_did_you_mean(f: Path) -> Expectation:
    set_cell(f / "demand.csv", 30, "origin", "bcn")
    return [
        ("demand.csv row 30, column origin", "unknown site 'bcn'"),
        ("row 30", "did you mean 'BCN'?"),
    ]


def _negative_volume(f: Path) -> Expectation:
    set_cell(f / "demand.csv", 7, "volume", "-3")
    return [("demand.csv row 7, column volume", "expected a number >= 0, got '-3'")]


def _non_numeric_volume(f: Path) -> Expectation:
    set_cell(f / "demand.csv", 9, "volume", "12 pallets")
    return [("demand.csv row 9, column volume", "got '12 pallets'")]


def _empty_volume(f: Path) -> Expectation:
    set_cell(f / "demand.csv", 11, "volume", "")
    return [("demand.csv row 11, column volume", "empty cell")]


def _latitude_95(f: Path) -> Expectation:
    set_cell(f / "sites.csv", 3, "lat", "95")
    return [("sites.csv row 3, column lat", "within [-90, 90], got '95'")]


def _longitude_200(f: Path) -> Expectation:
    set_cell(f / "sites.csv", 4, "lon", "200")
    return [("sites.csv row 4, column lon", "within [-180, 180], got '200'")]


def _missing_column_lat(f: Path) -> Expectation:
    rename_column(f / "sites.csv", "lat", "latitude")
    return [("sites.csv, column lat", "missing column 'lat'")]


def _missing_column_volume(f: Path) -> Expectation:
    rename_column(f / "demand.csv", "volume", "volumes")
    return [
        ("demand.csv, column volume", "missing column 'volume'"),
        ("", "did you mean 'volumes'?"),
    ]


def _demand_to_itself(f: Path) -> Expectation:
    origin = cell(f / "demand.csv", 5, "origin")
    set_cell(f / "demand.csv", 5, "destination", origin)
    return [("demand.csv row 5, column destination", f"origin and destination are both {origin!r}")]


def _duplicate_od_pair(f: Path) -> Expectation:
    set_cell(f / "demand.csv", 6, "destination", cell(f / "demand.csv", 5, "destination"))
    return [
        ("demand.csv row 6, column destination", "duplicate OD pair"),
        ("row 6", "also on row 5"),
    ]


def _no_candidate_hub(f: Path) -> Expectation:
    header, rows = read_rows(f / "sites.csv")
    write_rows(f / "sites.csv", header, [{**r, "can_be_hub": "false"} for r in rows])
    return [("sites.csv, column can_be_hub", "no site can be a hub")]


def _more_hubs_than_candidates(f: Path) -> Expectation:
    # The number comes from --hubs, so no config line is named.
    return [("scenario.toml, key model.hubs", "50 hubs asked (model.hubs) but only 10 sites")]


def _unknown_config_key(f: Path) -> Expectation:
    edit_config(f, "transfer_factor =", "transfer_facter =")
    line = config_line(f, "transfer_facter")
    return [
        (
            f"scenario.toml line {line}, key model.transfer_facter",
            "unknown key 'transfer_facter'",
        ),
        ("model.transfer_facter", "did you mean 'transfer_factor'?"),
    ]


def _bad_toml(f: Path) -> Expectation:
    edit_config(f, 'allocation = "single"', 'allocation = "single')
    line = config_line(f, "allocation")
    return [(f"scenario.toml line {line}", "not valid TOML")]


def _missing_input_file(f: Path) -> Expectation:
    edit_config(f, 'demand = "demand.csv"', 'demand = "demands.csv"')
    line = config_line(f, "demand =")
    return [(f"scenario.toml line {line}, key inputs.demand", "file not found")]


def _bad_boolean(f: Path) -> Expectation:
    set_cell(f / "sites.csv", 3, "can_be_hub", "maybe")
    return [
        (
            "sites.csv row 3, column can_be_hub",
            "expected true or false (or yes/no, 1/0), got 'maybe'",
        )
    ]


def _matrix_missing_pair(f: Path) -> Expectation:
    write_distance_matrix(f, skip=("MAD", "BCN"))
    return [
        ("distances.csv:", "the matrix lacks 1 of the 552 ordered pairs"),
        ("distances.csv:", "MAD -> BCN"),
    ]


def _matrix_negative_distance(f: Path) -> Expectation:
    write_distance_matrix(f)
    set_cell(f / "distances.csv", 4, "distance_km", "-5")
    return [("distances.csv row 4, column distance_km", "expected a distance in km >= 0, got '-5'")]


def _bad_volume_unit(f: Path) -> Expectation:
    edit_config(f, 'volume_unit = "pallets"', 'volume_unit = "crates"')
    line = config_line(f, "volume_unit")
    return [(f"scenario.toml line {line}, key inputs.volume_unit", "got 'crates'")]


def _negative_fixed_cost(f: Path) -> Expectation:
    set_cell(f / "sites.csv", 3, "hub_fixed_cost", "-26000")
    return [
        ("sites.csv row 3, column hub_fixed_cost", "expected a cost per day >= 0, got '-26000'")
    ]


def _bad_hub_status(f: Path) -> Expectation:
    set_cell(f / "sites.csv", 5, "hub_status", "shut")
    return [
        ("sites.csv row 5, column hub_status", "expected candidate, open or closed, got 'shut'")
    ]


def _zero_sort_capacity(f: Path) -> Expectation:
    set_cell(f / "sites.csv", 2, "sort_capacity", "0")
    return [("sites.csv row 2, column sort_capacity", "got '0'")]


def _forced_open_non_candidate(f: Path) -> Expectation:
    _, rows = read_rows(f / "sites.csv")
    row = next(i for i, r in enumerate(rows, start=2) if r["can_be_hub"] == "false")
    set_cell(f / "sites.csv", row, "hub_status", "open")
    return [(f"sites.csv row {row}, column hub_status", "a site forced open must be allowed")]


def _missing_scenario_name(f: Path) -> Expectation:
    edit_config(f, 'name = "iberia-demo"\n', "")
    return [("scenario.toml, key scenario.name", "required key is missing")]


def _hubs_not_a_number(f: Path) -> Expectation:
    edit_config(f, 'allocation = "single"', 'allocation = "single"\nhubs = "three"')
    line = config_line(f, "hubs =")
    return [(f"scenario.toml line {line}, key model.hubs", "got 'three'")]


def _circuity_below_one(f: Path) -> Expectation:
    edit_config(f, "circuity = 1.2", "circuity = 0.5")
    line = config_line(f, "circuity")
    return [(f"scenario.toml line {line}, key distances.circuity", "got 0.5")]


def _empty_demand(f: Path) -> Expectation:
    (f / "demand.csv").write_text("origin,destination,volume\n", encoding="utf-8")
    return [("demand.csv:", "the file has no demand")]


def _excel_sites_latitude(f: Path) -> Expectation:
    frame = pd.read_csv(f / "sites.csv")  # typed cells: numbers, booleans, blanks
    frame.loc[1, "lat"] = 95.5  # spreadsheet row 3
    frame.to_excel(f / "sites.xlsx", index=False, sheet_name="sites")
    (f / "sites.csv").unlink()
    edit_config(f, 'sites = "sites.csv"', 'sites = "sites.xlsx"')
    return [("sites.xlsx row 3, column lat", "got '95.5'")]


def _unknown_solver(f: Path) -> Expectation:
    line = config_line(f, "name =", section="[solver]")
    return [(f"scenario.toml line {line}, key solver.name", "'gurobi'")]


CASES = [
    Case("duplicate-site-id", _duplicate_site_id),
    Case("unknown-site-in-demand", _unknown_site_in_demand),
    Case("unknown-site-did-you-mean", _unknown_site_did_you_mean),
    Case("negative-volume", _negative_volume),
    Case("non-numeric-volume", _non_numeric_volume),
    Case("empty-volume", _empty_volume),
    Case("latitude-95", _latitude_95),
    Case("longitude-200", _longitude_200),
    Case("missing-column-lat", _missing_column_lat),
    Case("missing-column-volume", _missing_column_volume),
    Case("demand-to-itself", _demand_to_itself),
    Case("duplicate-od-pair", _duplicate_od_pair),
    Case("no-candidate-hub", _no_candidate_hub),
    Case("more-hubs-than-candidates", _more_hubs_than_candidates, ("--hubs", "50")),
    Case("unknown-config-key", _unknown_config_key),
    Case("bad-toml-syntax", _bad_toml),
    Case("missing-input-file", _missing_input_file),
    Case("bad-boolean-can-be-hub", _bad_boolean),
    Case("matrix-missing-pair", _matrix_missing_pair),
    Case("matrix-negative-distance", _matrix_negative_distance),
    Case("bad-volume-unit", _bad_volume_unit),
    Case("negative-hub-fixed-cost", _negative_fixed_cost),
    Case("bad-hub-status", _bad_hub_status),
    Case("zero-sort-capacity", _zero_sort_capacity),
    Case("forced-open-non-candidate", _forced_open_non_candidate),
    Case("missing-scenario-name", _missing_scenario_name),
    Case("hubs-not-a-number", _hubs_not_a_number),
    Case("circuity-below-one", _circuity_below_one),
    Case("empty-demand", _empty_demand),
    Case("excel-sites-latitude", _excel_sites_latitude),
    Case("unknown-solver", _unknown_solver, ("--solver", "gurobi")),
]


def assert_reported(output: str, expected: Expectation) -> None:
    """Each (where, what) pair appears together on one line of the output."""
    lines = output.splitlines()
    for where, what in expected:
        assert any(where in line and what in line for line in lines), (
            f"no line holds both {where!r} and {what!r} in:\n{output}"
        )


def test_at_least_fifteen_distinct_cases() -> None:
    assert len({c.id for c in CASES}) == len(CASES) >= 15


@pytest.mark.parametrize("case", CASES, ids=[c.id for c in CASES])
def test_bad_input_exits_2_and_writes_nothing(
    case: Case, tmp_path: Path, demo_run: tuple[Result, Path]
) -> None:
    folder = demo_folder(tmp_path)
    expected = case.corrupt(folder)
    config = folder / "scenario.toml"

    # hubnet check reports the same problems (it has no options to override the config).
    if not case.args:
        checked = invoke("check", config)
        assert checked.exit_code == EXIT_BAD_INPUT, checked.output
        assert_reported(checked.stderr, expected)

    # hubnet solve into a new folder: exit 2, nothing at all written.
    runs = tmp_path / "runs"
    runs.mkdir()
    result = invoke("solve", config, "--out", runs / "plan", *case.args)
    assert result.exit_code == EXIT_BAD_INPUT, result.output
    assert result.exception is None or isinstance(result.exception, SystemExit)
    assert_reported(result.stderr, expected)
    assert "Traceback" not in result.output
    assert list(runs.iterdir()) == []

    # With --force over an earlier run folder: the folder stays exactly as it was.
    earlier = runs / "earlier"
    shutil.copytree(demo_run[1], earlier)
    before, inode = snapshot(earlier), os.stat(earlier).st_ino
    forced = invoke("solve", config, "--out", earlier, "--force", *case.args)
    assert forced.exit_code == EXIT_BAD_INPUT, forced.output
    assert_reported(forced.stderr, expected)
    assert snapshot(earlier) == before
    assert os.stat(earlier).st_ino == inode
    assert [p.name for p in runs.iterdir()] == ["earlier"]


def test_every_problem_is_reported_at_once(tmp_path: Path) -> None:
    folder = demo_folder(tmp_path)
    expected = _negative_volume(folder) + _latitude_95(folder) + _bad_boolean(folder)
    expected += _unknown_site_in_demand(folder)
    result = invoke("solve", folder / "scenario.toml", "--out", tmp_path / "out")
    assert result.exit_code == EXIT_BAD_INPUT
    assert_reported(result.stderr, expected)
    assert "4 problems in the input" in result.stderr
    assert not (tmp_path / "out").exists()


def test_matrix_control_a_complete_matrix_is_accepted(tmp_path: Path) -> None:
    """The matrix cases fail for the reason given, not for the matrix itself."""
    folder = demo_folder(tmp_path)
    write_distance_matrix(folder)
    result = invoke("check", folder / "scenario.toml")
    assert result.exit_code == EXIT_OK, result.output
    assert "distances: user" in result.stderr


# --------------------------------------------------------------------------
# Infeasible and time-limited runs
# --------------------------------------------------------------------------


def test_capacities_far_below_volume_exit_3(tmp_path: Path, demo_run: tuple[Result, Path]) -> None:
    folder = demo_folder(tmp_path)
    header, rows = read_rows(folder / "sites.csv")
    # 50 pallets a day at each candidate hub; the terminals ship 9,324.
    rows = [{**r, "sort_capacity": "50" if r["sort_capacity"] else ""} for r in rows]
    write_rows(folder / "sites.csv", header, rows)
    edit_config(folder, 'allocation = "single"', 'allocation = "single"\ncapacitated = true')
    assert invoke("check", folder / "scenario.toml").exit_code == EXIT_OK

    out = tmp_path / "runs" / "plan"
    result = invoke("solve", folder / "scenario.toml", "--out", out)
    assert result.exit_code == EXIT_INFEASIBLE, result.output
    assert "sort capacities" in result.stderr
    assert not out.parent.exists() or list(out.parent.iterdir()) == []

    earlier = tmp_path / "earlier"
    shutil.copytree(demo_run[1], earlier)
    before = snapshot(earlier)
    forced = invoke("solve", folder / "scenario.toml", "--out", earlier, "--force")
    assert forced.exit_code == EXIT_INFEASIBLE
    assert snapshot(earlier) == before


def test_tiny_time_limit_is_reported_honestly(tmp_path: Path) -> None:
    """A 0.01 s limit: either a plan marked time_limit (exit 0) or no plan (exit 4).

    Which one depends on the solver and the starting plan, so both are
    accepted; each must be stated honestly, and with no plan nothing is written.
    """
    out = tmp_path / "plan"
    result = invoke("solve", DEMO_CONFIG, "--out", out, "--time-limit", "0.01")
    assert result.exit_code in (EXIT_OK, EXIT_NO_SOLUTION), result.output
    if result.exit_code == EXIT_NO_SOLUTION:
        assert "time limit" in result.stderr
        assert not out.exists()
        assert list(tmp_path.iterdir()) == []
        return
    summary = json.loads((out / "summary.json").read_text())
    assert summary["status"] in ("time_limit", "optimal")
    assert summary["solver_options"]["time_limit_s"] == 0.01
    if summary["status"] == "time_limit":
        assert summary["proven_optimal"] is False
    else:
        assert summary["gap"] is not None and summary["gap"] <= 1e-6
    if summary["best_bound"] is not None:
        assert summary["best_bound"] <= summary["objective"] * (1 + 1e-9)
    else:
        # No bound: the last line must not claim a gap of 0 %.
        assert summary["gap"] is None
        assert "no bound proven" in result.stderr
        assert "gap 0.0000 %" not in result.stderr


#: Sort capacities (pallets a day) under which only BCN and VAL together can
#: hold the demo's volume; every other candidate hub gets OTHER_CAPACITY.
ONE_PAIR_FITS = {"MAD": "1800", "BCN": "5000", "VAL": "5000"}
OTHER_CAPACITY = "1000"


def test_no_plan_when_the_time_limit_runs_out_exits_4_and_writes_nothing(
    tmp_path: Path, demo_run: tuple[Result, Path]
) -> None:
    """A real solve that has no plan when its time limit runs out: exit 4, nothing written.

    The demo with 2 hubs and sort capacities (on the volume a hub's terminals
    send, its own included: README, ``sort_capacity``) that only one pair of
    hubs can meet. The terminals send 9,324 pallets a day. BCN and VAL sort
    5,000 each: 10,000 >= 9,324. MAD sorts 1,800 and each other candidate
    1,000, so any other pair holds at most 5,000 + 1,800 = 6,800 < 9,324.

    Why no plan exists when a 0.01 s limit runs out:

    - no starting plan: the local search (``hubnet.heuristics.starting_plan``)
      starts from a greedy pair chosen without the capacities, MAD (the best
      single hub) and LIS; every pair one swap away keeps MAD or LIS and
      holds at most 6,800, so it stops with no plan, whatever its budget
      (measured: None in 0.01 s with a 60 s budget);
    - sort capacities rule out the path relaxation and the hub-set search,
      so the flow model goes to HiGHS with what is left of the limit, at
      least 0.01 s (``hubnet.solve._left``);
    - HiGHS's first plan on this model comes from rounding its root LP, 0.3 s
      into its run (measured three times on 2 busy cores: 30 times the 0.01 s
      it gets); with 0.01 s it stops before the root LP (0 LP iterations).

    The same folder with the config's 60 s limit finds the plan (BCN, VAL)
    with HiGHS alone, so exit 4 is about time, not a plan that cannot exist
    (that is exit 3).
    """
    folder = demo_folder(tmp_path)
    header, rows = read_rows(folder / "sites.csv")
    rows = [
        {**r, "sort_capacity": ONE_PAIR_FITS.get(r["id"], OTHER_CAPACITY)}
        if r["sort_capacity"]
        else r
        for r in rows
    ]
    write_rows(folder / "sites.csv", header, rows)
    edit_config(
        folder, 'allocation = "single"', 'allocation = "single"\nhubs = 2\ncapacitated = true'
    )
    config = folder / "scenario.toml"

    out = tmp_path / "runs" / "plan"
    result = invoke("solve", config, "--out", out, "--solver", "highs", "--time-limit", "0.01")
    assert result.exit_code == EXIT_NO_SOLUTION, result.output
    # The message names the limit, on the error line, and no traceback.
    assert "error: no plan found within the time limit of 0.01 s" in result.stderr
    assert "Traceback" not in result.output
    # No starting plan: the path described above, not a plan cut short.
    assert "starting plan" not in result.stderr
    # Nothing written: no run folder, no temporary folder beside it.
    assert not out.exists()
    assert not out.parent.exists(), "a run with no plan created the --out parent folder"
    assert [p.name for p in tmp_path.iterdir()] == ["scenario"]

    # An earlier run folder, with --force, is left exactly as it was.
    earlier = tmp_path / "earlier"
    shutil.copytree(demo_run[1], earlier)
    before = snapshot(earlier)
    forced = invoke(
        "solve", config, "--out", earlier, "--force", "--solver", "highs", "--time-limit", "0.01"
    )
    assert forced.exit_code == EXIT_NO_SOLUTION, forced.output
    assert snapshot(earlier) == before

    # Control: the same scenario with the config's limit (60 s) has a plan.
    solved = invoke("solve", config, "--out", out, "--solver", "highs")
    assert solved.exit_code == EXIT_OK, solved.output
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert summary["status"] == "optimal"
    assert sorted(summary["hubs"]) == ["BCN", "VAL"]


@pytest.mark.parametrize("command", ["solve", "sweep", "frontier", "report", "map"])
def test_help_shows_no_type_beside_on_off_switches(command: str) -> None:
    # A switch such as --force takes no value: its help line must not show
    # a value type (new-user trial: "--force <bool>" read as "--force true").
    result = CliRunner().invoke(app, [command, "--help"], env={"COLUMNS": "100"})
    assert result.exit_code == 0, result.output
    switches = [ln for ln in result.output.splitlines() if "--force" in ln or "--verbose" in ln]
    assert switches and not any("<bool>" in ln for ln in switches), switches
