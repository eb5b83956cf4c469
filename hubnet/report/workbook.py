"""One Excel workbook with every table of a run (``tables.xlsx``), via openpyxl.

Sheets: ``summary`` (the key figures of ``summary.json``, one per row),
then one sheet per table (``hubs``, ``legs``, ``dispatches`` for freight
runs, ``routes``, ``hierarchy``, ``rank_size``, and ``sites`` when known),
then ``columns`` (what every
column means). On every table sheet the header row names each column with
its unit (``distance_km [km]``, ``volume_per_day [pallets/day]``), a
comment on each header cell holds the column's full description from
:data:`hubnet.report.tables.COLUMNS`, the header row is frozen and has a
filter, and columns are wide enough to read.

Cells hold the numbers of the CSV files, to the 16 significant digits
openpyxl writes (Excel shows at most 15); display formats only change how
Excel shows them. An empty CSV cell (NaN) is an empty cell.
"""

from __future__ import annotations

import io
import math
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import pandas as pd

from hubnet.report.fmt import singular
from hubnet.report.rundata import read_run
from hubnet.report.tables import column_doc

WORKBOOK_FILE = "tables.xlsx"

#: Sheet order after ``summary``.
TABLE_SHEETS: tuple[str, ...] = ("hubs", "legs", "routes", "hierarchy", "rank_size", "sites")
#: Sheets of freight runs only, each placed after the sheet named beside it.
FREIGHT_SHEETS: dict[str, str] = {"dispatches": "legs"}


def sheet_order(tables: Mapping[str, object]) -> list[str]:
    """The table sheets a workbook of these tables has, in order.

    :data:`TABLE_SHEETS` that are given, with each of :data:`FREIGHT_SHEETS`
    that is given after its neighbour (``dispatches`` after ``legs``).
    """
    order: list[str] = []
    for name in TABLE_SHEETS:
        order.append(name)
        order += [extra for extra, after in FREIGHT_SHEETS.items() if after == name]
    return [name for name in order if name in tables]


#: Columns of sites.csv (not a table of :data:`COLUMNS`: it comes from the inputs).
SITES_COLUMNS: dict[str, str] = {
    "id": "Site id.",
    "name": "Site name.",
    "lat": "Latitude, degrees (WGS84); for sites given as latitude and longitude.",
    "lon": "Longitude, degrees (WGS84); for sites given as latitude and longitude.",
    "x": "Planar x coordinate, in the data's own length unit; for planar sites (not lat/lon).",
    "y": "Planar y coordinate, in the data's own length unit; for planar sites (not lat/lon).",
    "candidate_hub": "true when the model could open a hub at the site.",
}

_MONEY = "#,##0.00"
#: Volumes: "#,##0.##" would leave a bare decimal point after whole numbers
#: in Excel ("5,734."), so whole volumes get _WHOLE and the others two decimals.
_VOLUME = "#,##0.00"
_WHOLE = "#,##0"
_KM = "#,##0.0"
_FRACTION = "0.0%"
_COUNT = "0"

#: Widest column, in characters.
MAX_WIDTH = 60
#: Rows a sheet can hold (Excel's limit), the header row included.
MAX_SHEET_ROWS = 1_048_576


def column_unit(column: str, volume_unit: str = "units") -> str:
    """The unit of a table column as shown in a header, ``""`` when it has none.

    Parameters
    ----------
    column
        A column name of any run table.
    volume_unit
        The run's volume unit.

    Examples
    --------
    >>> column_unit("volume_per_day", "pallets"), column_unit("cost_per_unit", "pallets")
    ('pallets/day', 'currency/pallet')
    >>> column_unit("unit_km_per_day", "pallets"), column_unit("share_of_cost")
    ('pallet-km/day', 'fraction')

    Columns of freight runs:

    >>> column_unit("vehicle_km"), column_unit("co2e_wtw_kg"), column_unit("dispatches_artic")
    ('vehicle-km/day', 'kg CO2e/day', 'runs/day')
    >>> column_unit("capacity", "pallets"), column_unit("payload", "pallets")
    ('pallets/day', 'pallets/vehicle')
    """
    one = singular(volume_unit)
    if column == "unit_km_per_day":
        return f"{one}-km/day"
    if column in ("lat", "lon"):
        return "degrees"
    if column.startswith(("share_", "cumulative_share")) or column in (
        "utilisation",
        "fill_rate",
        "fill",
    ):
        return "fraction"
    freight = _freight_unit(column, volume_unit)
    if freight:
        return freight
    if "cost" in column:
        if column.endswith("_per_day") or column == "cost":
            return "currency/day"
        if column.endswith("_per_unit"):
            return f"currency/{one}"
    if column.endswith(("_km", "distance_km")):
        return "km"
    if column.endswith("_h"):
        return "h"
    if column.endswith("_per_day") or column == "avg_volume_per_leg":
        return f"{volume_unit}/day"
    if column in ("legs", "terminal_count", "hub_count"):
        return "count"
    return ""


def _freight_unit(column: str, volume_unit: str) -> str:
    """The unit of a column only freight runs have, ``""`` for any other column."""
    if column == "vehicle_km":
        return "vehicle-km/day"
    if column.startswith("co2e_") and column.endswith("_kg"):
        return "kg CO2e/day"
    if column == "dispatches" or column.startswith("dispatches_"):
        return "runs/day"
    if column in ("capacity", "volume"):
        return f"{volume_unit}/day"
    if column == "payload":
        return f"{volume_unit}/vehicle"
    if column == "avg_load":
        return f"{volume_unit}/run"
    if column == "avg_speed_kmh":
        return "km/h"
    if column == "driving_h":
        return "vehicle-h/day"
    if column in ("relays", "drivers"):
        return "count"
    return ""


def _number_format(column: str, unit: str) -> str | None:
    if unit == "fraction":
        return _FRACTION
    if unit.startswith("currency"):
        return _MONEY
    if unit == "km" or unit.endswith("-km/day"):
        return _KM
    if unit.endswith("/day"):
        return _VOLUME
    if unit == "count":
        return _COUNT
    return None


def _cell(value: Any) -> Any:
    """A value as openpyxl stores it: NaN and None become an empty cell."""
    if value is None:
        return None
    if isinstance(value, float) and math.isnan(value):
        return None
    if hasattr(value, "item"):  # numpy scalar
        return _cell(value.item())
    return value


def _flatten(summary: Mapping[str, Any], prefix: str = "") -> list[tuple[str, Any]]:
    """Summary keys as ``a.b`` paths with plain values; lists joined by ``, ``."""
    rows: list[tuple[str, Any]] = []
    for key, value in summary.items():
        name = f"{prefix}{key}"
        if isinstance(value, Mapping):
            rows += _flatten(value, f"{name}.")
        elif isinstance(value, list) and key == "cautions":
            rows += [(f"{name} {i}", str(v)) for i, v in enumerate(value, start=1)]
        elif isinstance(value, list):
            rows.append((name, ", ".join(str(v) for v in value)))
        else:
            rows.append((name, value))
    return rows


def _doc(table: str, column: str, volume_unit: str) -> str:
    if table == "sites":
        return SITES_COLUMNS.get(column, "")
    try:
        return column_doc(table, column, volume_unit)
    except KeyError:
        return ""


def workbook_bytes(
    tables: Mapping[str, pd.DataFrame],
    summary: Mapping[str, Any],
) -> bytes:
    """Build the workbook of a run in memory.

    Parameters
    ----------
    tables
        The run's tables by name (``hubs``, ``legs``, ``routes``,
        ``hierarchy``, ``rank_size``, optionally ``sites`` and, for a
        freight run, ``dispatches``); tables not given are left out.
    summary
        The run's summary (``summary.json`` content).

    Returns
    -------
    bytes
        The ``.xlsx`` file.
    """
    from openpyxl import Workbook
    from openpyxl.comments import Comment
    from openpyxl.styles import Alignment, Font, PatternFill
    from openpyxl.utils import get_column_letter

    volume_unit = str(summary.get("volume_unit") or "units")
    bold = Font(bold=True)
    head_fill = PatternFill("solid", fgColor="E8EDF3")
    wb = Workbook()
    ws = summary_ws = wb.active
    ws.title = "summary"
    ws.append(["figure", "value"])
    for key, value in _flatten(summary):
        ws.append([key, _cell(value)])
    for cell in ws[1]:
        cell.font, cell.fill = bold, head_fill
    ws.freeze_panes = "A2"
    ws.column_dimensions["A"].width = 30
    ws.column_dimensions["B"].width = 90
    for row in ws.iter_rows(min_row=2, min_col=2, max_col=2):
        row[0].alignment = Alignment(wrap_text=True, vertical="top")

    docs: list[tuple[str, str, str, str]] = []
    for name in sheet_order(tables):
        frame = tables[name]
        if len(frame) > MAX_SHEET_ROWS - 1:
            # Excel cannot open a longer sheet: keep the rows that fit and say so.
            summary_ws.append(
                [
                    f"note: {name}",
                    f"{len(frame):,} rows, more than a sheet holds: the {name} sheet has the "
                    f"first {MAX_SHEET_ROWS - 1:,}; {name}.csv has them all",
                ]
            )
            frame = frame.iloc[: MAX_SHEET_ROWS - 1]
        ws = wb.create_sheet(name)
        units = [column_unit(str(c), volume_unit) for c in frame.columns]
        ws.append(
            [f"{c} [{u}]" if u else str(c) for c, u in zip(frame.columns, units, strict=True)]
        )
        for row in frame.itertuples(index=False):
            ws.append([_cell(v) for v in row])
        widths = [len(str(c.value)) for c in ws[1]]
        for j, (column, unit) in enumerate(zip(frame.columns, units, strict=True), start=1):
            head = ws.cell(row=1, column=j)
            head.font, head.fill = bold, head_fill
            head.alignment = Alignment(wrap_text=False, vertical="top")
            doc = _doc(name, str(column), volume_unit)
            docs.append((name, str(column), unit, doc))
            if doc:
                head.comment = Comment(doc, "hubnet", width=300, height=110)
            fmt = _number_format(str(column), unit)
            letter = get_column_letter(j)
            longest = widths[j - 1]
            for (cell,) in ws.iter_rows(min_row=2, min_col=j, max_col=j):
                if fmt is not None and isinstance(cell.value, int | float):
                    whole = fmt == _VOLUME and float(cell.value).is_integer()
                    cell.number_format = _WHOLE if whole else fmt
                    longest = max(longest, len(f"{cell.value:,.2f}"))
                elif cell.value is not None:
                    longest = max(longest, len(str(cell.value)))
            ws.column_dimensions[letter].width = min(MAX_WIDTH, longest + 2)
        ws.freeze_panes = "A2"
        if ws.max_row > 1:
            ws.auto_filter.ref = ws.dimensions

    ws = wb.create_sheet("columns")
    ws.append(["sheet", "column", "unit", "meaning"])
    for row in docs:
        ws.append(list(row))
    for cell in ws[1]:
        cell.font, cell.fill = bold, head_fill
    ws.freeze_panes = "A2"
    for letter, width in zip("ABCD", (12, 26, 18, 100), strict=True):
        ws.column_dimensions[letter].width = width
    buffer = io.BytesIO()
    wb.save(buffer)
    return buffer.getvalue()


def workbook_from_run(run_dir: str | Path) -> bytes:
    """The workbook of a run folder, built from its CSV files and summary."""
    run = read_run(run_dir)
    return workbook_bytes(run.tables, run.summary)
