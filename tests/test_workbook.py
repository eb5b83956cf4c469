"""tables.xlsx: every table of the run folder, the same numbers as the CSV files."""

from __future__ import annotations

import json
import math
from pathlib import Path

import pandas as pd
import pytest
from openpyxl import load_workbook
from reportdata import tiny_run

from hubnet.report.tables import COLUMNS
from hubnet.report.workbook import TABLE_SHEETS, column_unit, workbook_from_run


@pytest.fixture(scope="module")
def run_dir(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return tiny_run(tmp_path_factory.mktemp("workbook"), allocation="multiple")


def header_name(cell: str) -> str:
    """``distance_km [km]`` -> ``distance_km``."""
    return cell.split(" [", 1)[0]


#: Columns holding text (ids, names, tiers, paths): read from the CSV as text.
TEXT = {
    "hub_id",
    "name",
    "terminal_ids",
    "tier",
    "from_site",
    "to_site",
    "origin",
    "destination",
    "path",
    "id",
    "candidate_hub",
}


def same(a: object, b: object) -> bool:
    """A CSV value equals a workbook cell (an empty CSV cell is an empty cell)."""
    if isinstance(a, float) and math.isnan(a):
        return b is None or b == ""
    if isinstance(a, str):
        return a == b
    # openpyxl writes numbers with 16 significant digits (Excel shows 15), so
    # a cell equals the CSV's shortest-repr float to within 1e-15, relative.
    return isinstance(b, int | float) and math.isclose(float(a), b, rel_tol=1e-15, abs_tol=0)


def test_sheets_hold_the_csv_numbers(run_dir: Path) -> None:
    wb = load_workbook(run_dir / "tables.xlsx")
    assert wb.sheetnames == ["summary", *TABLE_SHEETS, "columns"]
    for name in TABLE_SHEETS:
        path = run_dir / f"{name}.csv"
        text = {c: str for c in pd.read_csv(path, nrows=0).columns if c in TEXT}
        csv = pd.read_csv(path, dtype=text, keep_default_na=False, na_values=[""])
        rows = list(wb[name].iter_rows(values_only=True))
        assert [header_name(str(c)) for c in rows[0]] == list(csv.columns), name
        assert len(rows) - 1 == len(csv), name
        assert len(csv) > 0, name
        for i, record in enumerate(csv.itertuples(index=False), start=1):
            for j, value in enumerate(record):
                assert same(value, rows[i][j]), (name, i, csv.columns[j], value, rows[i][j])


def test_headers_name_units_frozen_and_readable(run_dir: Path) -> None:
    wb = load_workbook(run_dir / "tables.xlsx")
    legs = wb["legs"]
    headers = [c.value for c in legs[1]]
    assert "distance_km [km]" in headers
    assert "volume_per_day [pallets/day]" in headers
    assert "unit_km_per_day [pallet-km/day]" in headers
    assert "cost_per_day [currency/day]" in headers
    assert "cost_per_unit [currency/pallet]" in headers
    assert "share_of_volume [fraction]" in [c.value for c in wb["hierarchy"][1]]
    for name in TABLE_SHEETS:
        ws = wb[name]
        assert ws.freeze_panes == "A2", name
        for cell in ws[1]:
            width = ws.column_dimensions[cell.column_letter].width
            assert width >= min(len(str(cell.value)) + 2, 60), (name, cell.value, width)
    # every documented column's full meaning is a comment on its header
    comment = next(c for c in legs[1] if str(c.value).startswith("volume_per_day")).comment
    assert comment is not None and "pallets per day" in comment.text
    documented = {(r[0], r[1]) for r in wb["columns"].iter_rows(min_row=2, values_only=True)}
    for table, columns in COLUMNS.items():
        for column in columns:
            assert (table, column) in documented


def test_volumes_show_no_bare_decimal_point(run_dir: Path) -> None:
    # Excel renders "#,##0.##" as "5,734." for a whole number (its number-format
    # rules: optional digits drop, the point stays); whole volumes get "#,##0",
    # the others two decimals.
    ws = load_workbook(run_dir / "tables.xlsx")["legs"]
    headers = [c.value for c in ws[1]]
    col = headers.index("volume_per_day [pallets/day]") + 1
    cells = [row[0] for row in ws.iter_rows(min_row=2, min_col=col, max_col=col)]
    assert cells
    for cell in cells:
        assert "#,##0.##" not in cell.number_format
        whole = float(cell.value).is_integer()
        assert cell.number_format == ("#,##0" if whole else "#,##0.00"), (
            cell.value,
            cell.number_format,
        )


def test_summary_sheet_matches_summary_json(run_dir: Path) -> None:
    summary = json.loads((run_dir / "summary.json").read_text())
    ws = load_workbook(run_dir / "tables.xlsx")["summary"]
    figures = {row[0]: row[1] for row in ws.iter_rows(min_row=2, values_only=True)}
    assert figures["scenario"] == summary["scenario"]
    assert figures["costs.total"] == summary["costs"]["total"]
    assert figures["hub_count"] == summary["hub_count"]
    assert figures["hubs"] == ", ".join(summary["hubs"])
    assert figures["cautions 1"] == summary["cautions"][0]


def test_workbook_rebuilt_from_csv_files_holds_the_same_cells(run_dir: Path) -> None:
    rebuilt = run_dir.parent / "rebuilt.xlsx"
    rebuilt.write_bytes(workbook_from_run(run_dir))
    a, b = load_workbook(run_dir / "tables.xlsx"), load_workbook(rebuilt)
    for name in TABLE_SHEETS:
        assert list(a[name].values) == list(b[name].values), name


@pytest.mark.parametrize(
    ("column", "unit"),
    [
        ("throughput_per_day", "pallets/day"),
        ("avg_volume_per_leg", "pallets/day"),
        ("fixed_cost_per_day", "currency/day"),
        ("avg_distance_km", "km"),
        ("utilisation", "fraction"),
        ("cumulative_share", "fraction"),
        ("rank", ""),  # an ordinal: the header says "rank", not "rank [count]"
        ("hub_id", ""),
        ("lat", "degrees"),
    ],
)
def test_column_units(column: str, unit: str) -> None:
    assert column_unit(column, "pallets") == unit


def test_a_table_longer_than_a_sheet_is_cut_with_a_note(
    run_dir: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    import io

    from hubnet.report import workbook
    from hubnet.report.rundata import read_run

    run = read_run(run_dir)
    routes = len(run.tables["routes"])
    monkeypatch.setattr(workbook, "MAX_SHEET_ROWS", 11)  # header + 10 rows
    wb = load_workbook(io.BytesIO(workbook.workbook_bytes(run.tables, run.summary)))
    assert wb["routes"].max_row == 11
    notes = [r for r in wb["summary"].iter_rows(values_only=True) if r[0] == "note: routes"]
    assert notes and f"{routes:,} rows" in notes[0][1] and "routes.csv has them all" in notes[0][1]
