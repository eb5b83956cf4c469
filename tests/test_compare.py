"""``hubnet compare``: two runs of the Iberia demo that differ by a closed hub.

Run A is the demo; run B closes the Sevilla hub (a data edit). The
comparison must name SEV as closed, list every terminal that moved with its
hubs before and after (checked against both runs' hubs.csv), the legs added
and removed (against legs.csv), and say that the settings differ while the
input files are the same.
"""

from __future__ import annotations

import csv
import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from hubnet.cli import app
from hubnet.compare import compare_runs, find_run
from hubnet.errors import EXIT_BAD_INPUT, InputError
from hubnet.jobs import JobResult, run_job

REPO = Path(__file__).resolve().parent.parent
DEMO = REPO / "configs" / "demo.toml"
FAST = {"solver": {"name": "cbc"}}

runner = CliRunner()


@pytest.fixture(scope="module")
def two_runs(tmp_path_factory: pytest.TempPathFactory) -> tuple[JobResult, JobResult, str]:
    root = tmp_path_factory.mktemp("compare")
    db = str(root / "h.sqlite")
    a = run_job(DEMO, root / "base", overrides=FAST, history=db)
    b = run_job(DEMO, root / "no-sev", overrides=FAST, edits={"close_hubs": ["SEV"]}, history=db)
    return a, b, db


def allocation(folder: Path) -> dict[str, str]:
    with open(folder / "hubs.csv", newline="") as fh:
        return {
            t: row["hub_id"] for row in csv.DictReader(fh) for t in row["terminal_ids"].split(";")
        }


def legs(folder: Path) -> set[tuple[str, str, str]]:
    with open(folder / "legs.csv", newline="") as fh:
        return {(r["tier"], r["from_site"], r["to_site"]) for r in csv.DictReader(fh)}


def test_closed_hub_and_moved_terminals(two_runs: tuple[JobResult, JobResult, str]) -> None:
    a, b, _ = two_runs
    assert a.run_folder is not None and b.run_folder is not None
    assert "SEV" in a.record.hubs and "SEV" not in b.record.hubs
    c = compare_runs(find_run(a.run_folder), find_run(b.run_folder))
    assert c.hubs_closed == ("SEV",)
    assert c.hubs_opened == tuple(h for h in b.record.hubs if h not in a.record.hubs)
    before, after = allocation(a.run_folder), allocation(b.run_folder)
    expected = sorted(t for t in before if before[t] != after[t])
    assert [m.terminal for m in c.moved or ()] == expected
    # Every terminal Sevilla served moved, and the moves say where to.
    assert {t for t, h in before.items() if h == "SEV"} <= set(expected)
    for m in c.moved or ():
        assert (m.before, m.after) == ((before[m.terminal],), (after[m.terminal],))
    assert set(c.legs_added or ()) == legs(b.run_folder) - legs(a.run_folder)
    assert set(c.legs_removed or ()) == legs(a.run_folder) - legs(b.run_folder)
    assert any(leg[1] == "SEV" or leg[2] == "SEV" for leg in c.legs_removed or ())
    inputs = {i.name: i.same for i in c.inputs}
    assert inputs["settings (hash)"] is False
    assert inputs["sites file (sha256)"] and inputs["demand file (sha256)"]
    assert [(s.name, s.a, s.b) for s in c.settings] == [("edits.close_hubs", None, ["SEV"])]
    cost = next(f for f in c.figures if f.name == "cost per day")
    assert cost.diff == pytest.approx(b.record.total_cost - a.record.total_cost, abs=1e-6)


def test_cli_compare_names_the_hub_and_the_terminals(
    two_runs: tuple[JobResult, JobResult, str],
) -> None:
    a, b, db = two_runs
    assert a.run_folder is not None and b.run_folder is not None
    before, after = allocation(a.run_folder), allocation(b.run_folder)
    moved = [t for t in sorted(before) if before[t] != after[t]]
    result = runner.invoke(app, ["compare", str(a.run_folder), str(b.run_folder), "--history", db])
    assert result.exit_code == 0, result.output
    assert "hubs closed: SEV" in result.output
    assert f"{len(moved)} terminals changed hub" in result.output
    lines = result.output.splitlines()
    for t in moved:
        assert any(
            line.split("│")[1:4]
            and [x.strip() for x in line.split("│")[1:4]] == [t, before[t], after[t]]
            for line in lines
        ), t
    assert "differs" in result.output  # the settings hash
    assert "setting edits.close_hubs: - -> ['SEV']" in result.output
    # The same by history ids, and as JSON.
    result = runner.invoke(
        app, ["compare", str(a.history_id), str(b.history_id), "--history", db, "--json"]
    )
    data = json.loads(result.output)
    assert data["hubs_closed"] == ["SEV"]
    assert [m["terminal"] for m in data["terminals_moved"]] == moved
    assert data["a"]["history_id"] == a.history_id


def test_compare_from_the_history_alone(
    two_runs: tuple[JobResult, JobResult, str], tmp_path: Path
) -> None:
    """A run folder deleted since: figures and hubs still come from the history."""
    a, b, db = two_runs
    ref_a = find_run(str(a.history_id), db)
    ref_b = find_run(b.run_id, db)
    gone = type(ref_b)(ref_b.label, None, None, None, ref_b.record)
    c = compare_runs(ref_a, gone)
    assert c.hubs_closed == ("SEV",) and c.moved is None
    assert "allocation and legs not compared" in c.notes[0]
    assert next(f for f in c.figures if f.name == "cost per day").b == b.record.total_cost


def test_unknown_runs(tmp_path: Path) -> None:
    with pytest.raises(InputError, match="no such run folder, history id or run id"):
        find_run("42", f"sqlite:///{tmp_path / 'h.sqlite'}")
    with pytest.raises(InputError, match="not a run folder"):
        find_run(tmp_path)
    result = runner.invoke(app, ["compare", "nowhere", "nothing", "--history", "off"])
    assert result.exit_code == EXIT_BAD_INPUT
    assert "no such run folder (and the run history is off)" in result.output


def test_freight_runs_compare_vehicles_transit_and_co2e(
    two_runs: tuple[JobResult, JobResult, str], tmp_path: Path
) -> None:
    # A trial compared two freight runs and got empty collection, transfer and
    # distribution rows and no vehicle, transit or CO2e rows. Each model's
    # figures now show for its own runs, read from each summary.json.
    from freightdata import freight_run

    first = freight_run(tmp_path / "one").folder
    second = freight_run(tmp_path / "two").folder
    c = compare_runs(find_run(first), find_run(second))
    rows = {f.name: f for f in c.figures}
    summary = json.loads((first / "summary.json").read_text(encoding="utf-8"))
    for name, key in (
        ("vehicles per day", "vehicles"),
        ("vehicle-km per day", "vehicle_km"),
        ("average transit h", "avg_transit_h"),
        ("CO2e kg per day", "co2e_kg"),
    ):
        assert rows[name].a == summary[key] and rows[name].b == summary[key], name
    assert rows["  trunk vehicles"].a == summary["costs"]["trunk"]
    assert "  collection" not in rows and "  transfer" not in rows
    # and a classic comparison keeps its own cost parts, without freight rows
    a, b, _ = two_runs
    assert a.run_folder is not None and b.run_folder is not None
    classic = {f.name for f in compare_runs(find_run(a.run_folder), find_run(b.run_folder)).figures}
    assert {"  collection", "  transfer", "  distribution"} <= classic
    assert "vehicles per day" not in classic and "  trunk vehicles" not in classic
