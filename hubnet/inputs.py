"""Read and validate the user's data files: the only place hubnet reads them.

:func:`load_network` reads the files a scenario config names, checks every
row and every column, and returns a frozen :class:`~hubnet.data.NetworkData`.
When anything is wrong it raises :class:`~hubnet.errors.InputError` carrying
*every* problem found (at most :data:`MAX_PROBLEMS_PER_COLUMN` per column,
then one "... and N more" line), each naming the file, the spreadsheet row
(header = row 1, first data row = row 2), the column and the offending value::

    demand.csv row 17, column volume: expected a number >= 0, got '-3'

:func:`network_from_frames` runs the same checks on pandas frames already in
memory (notebooks, tests, benchmark adapters); rows are then numbered as if
the frame were saved to CSV with a header. :func:`read_table` is the reader
itself.

File formats
------------
Any table may be CSV (UTF-8, or Windows-1252 as a fallback; comma,
semicolon or tab separated), an Excel workbook (``.xlsx``) or any format
geopandas reads (GeoPackage, GeoJSON, shapefile, ...). Column names are
matched ignoring case and surrounding spaces. Only blank cells count as
empty: text such as ``NA`` or ``nan`` in a numeric column is an error.

In a workbook or GeoPackage holding several sheets or layers, the one named
by ``inputs.sheet`` in the config is read; without it, the sheet named after
the table (``sites``, ``demand``, ``distances``, ``vehicles``) is read, so
one workbook can hold them all. A single-sheet file is read whole.

**Sites** (one row per terminal or candidate hub)

==================  =============  ===========================================
column              unit           meaning
==================  =============  ===========================================
``id``              --             required, unique, non-empty
``name``            --             display name; default: the id
``lat``, ``lon``    degrees        WGS84 latitude in [-90, 90] and longitude
                                   in [-180, 180]
``x``, ``y``        planar unit    instead of lat/lon, for planar benchmark
                                   data; the network is then ``planar``
``can_be_hub``      --             true/false, yes/no or 1/0; default true
``hub_fixed_cost``  currency/day   >= 0; default 0
``handling_cost``   currency/unit  >= 0 per unit sorted; default 0
``sort_capacity``   units/day      > 0; empty means unlimited
``hub_status``      --             ``candidate`` (default), ``open`` (forced
                                   open) or ``closed`` (forced closed)
``region``          --             optional region name, for scaling demand
                                   by region in scenario sweeps
``sort_hours``      hours          freight model: time a unit spends in this
                                   hub's sort, >= 0; empty: ``service``
                                   default
``cutoff``          HH:MM          freight model: time of day (00:00 to
                                   24:00) the terminal's freight leaves;
                                   empty: ``service`` default
``deliver_by``      HH:MM          freight model: time of day freight must
                                   reach this terminal; empty: ``service``
                                   default
==================  =============  ===========================================

Every site needs coordinates of the same kind: lat/lon or x/y. When a GIS
file has neither pair of columns, lat/lon are taken from its point
geometry, reprojected to WGS84 (EPSG:4326); a layer without a CRS is taken
to be in WGS84 already.

**Demand** (one row per OD pair): ``origin`` and ``destination`` (site ids)
and ``volume`` (units/day in the scenario's volume unit, finite, >= 0). Each
OD pair appears once; volume from a site to itself needs
``inputs.allow_same_site_demand = true``. Optional ``max_hours`` (hours,
> 0) overrides the pair's transit allowance in the freight model.

**Distances** (optional, long form, from the user's own routing engine):
``origin``, ``destination``, ``distance_km`` (km, >= 0) and optional
``hours`` (drive time in hours, > 0 between two different sites). Every
ordered pair of distinct sites needs a row; rows from a site to itself are
allowed and ignored (the diagonal is 0).

**Vehicles** (optional, ``inputs.vehicles``; switches on the freight
model), one row per vehicle class:

========================  ==============  =====================================
column                    unit            meaning
========================  ==============  =====================================
``id``                    --              required, unique, non-empty
``name``                  --              display name; default: the id
``payload``               units/vehicle   required, > 0, in the volume unit
``max_kg``, ``max_m3``    kg, m3          optional limits, > 0, used with
                                          ``inputs.kg_per_unit`` /
                                          ``inputs.m3_per_unit``
``cost_per_km``           currency/km     required, >= 0 per vehicle-km
``cost_per_hour``         currency/h      >= 0; default 0
``cost_per_dispatch``     currency        >= 0; default 0
``speed_kmh``             km/h            required, > 0 and <= 150
``tiers``                 --              required: any of ``feeder``,
                                          ``trunk``, ``direct``, separated by
                                          spaces, commas, ``;`` or ``|``
``fuel_l_per_100km``      L/100 km        >= 0; default 0
``fuel``                  --              default ``diesel``; a fuel of the
                                          emission factor table
                                          (:func:`hubnet.emissions.load_fuels`)
========================  ==============  =====================================

At least one class must be allowed on feeder legs and one on trunk legs; a
class on direct legs is optional (without one, no direct lane is offered).

Other columns (a planner's own notes, codes, ...) are allowed and ignored.
An unknown column whose name is close to an optional column that is absent
(``handling_cst``) raises an :class:`InputWarning`, since the value it holds
would otherwise be silently lost.
"""

from __future__ import annotations

import difflib
import math
import os
import re
import sys
import warnings
import zipfile
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal, cast

import numpy as np
import pandas as pd
import pandera.pandas as pa
from pandera.errors import SchemaErrors

from hubnet.config import CLOCK_EXPECT, DistanceMethod, ScenarioConfig, clock_hours, key_line
from hubnet.data import CoordinateSystem, Demand, DistanceMatrix, HubStatus, NetworkData, Site
from hubnet.emissions import FuelFactor
from hubnet.errors import InputError, Problem
from hubnet.fleet import TIERS, Tier, VehicleClass
from hubnet.units import VOLUME_UNITS

__all__ = [
    "DEFAULT_FUEL",
    "MAX_PROBLEMS_PER_COLUMN",
    "MAX_SPEED_KMH",
    "InputWarning",
    "load_network",
    "network_from_frames",
    "read_table",
]

#: Problems listed per file and column before the rest are summed up in one
#: "... and N more problems in this column" line.
MAX_PROBLEMS_PER_COLUMN = 20

#: Missing site pairs of a distance matrix listed by name (the rest are counted).
MAX_MISSING_PAIRS_SHOWN = 10

#: Coordinate reference system of site latitudes and longitudes.
WGS84_CRS = "EPSG:4326"

#: Highest average road speed of a vehicle class, km/h: a larger value is
#: taken for a typing error (a limit of the file format, not of the law).
MAX_SPEED_KMH = 150.0

#: Fuel of a vehicle class whose ``fuel`` cell is empty.
DEFAULT_FUEL = "diesel"

#: What separates the tiers in a ``tiers`` cell ("feeder trunk", "feeder;direct").
_TIER_SEPARATORS = re.compile(r"[\s,;|]+")

_CSV_SUFFIXES = frozenset({".csv", ".txt", ".tsv"})
_EXCEL_SUFFIXES = frozenset({".xlsx", ".xlsm"})
_TRUE_WORDS = ("true", "yes", "1")
_FALSE_WORDS = ("false", "no", "0")
_HUB_STATUSES: tuple[HubStatus, ...] = ("candidate", "open", "closed")
_GEOMETRY_TYPE = "_geometry_type"


class InputWarning(UserWarning):
    """Something in an input file looks unintended but does not stop the run."""


# --------------------------------------------------------------------------
# Collecting problems
# --------------------------------------------------------------------------


class _Problems:
    """Every problem found so far, capped per file and column.

    Problems are listed per file: first those about the file's layout (a
    missing column), then row problems by row, then conclusions about the
    whole table, then the "... and N more" lines.
    """

    def __init__(self, cap: int = MAX_PROBLEMS_PER_COLUMN) -> None:
        self._cap = cap
        self._head: dict[str, list[Problem]] = {}
        self._rows: dict[str, list[Problem]] = {}
        self._tail: dict[str, list[Problem]] = {}
        self._shown: dict[tuple[str, str | None], int] = {}
        self._hidden: dict[tuple[str, str | None], int] = {}
        self._count: dict[str, int] = {}
        self._order: dict[str, dict[str, int]] = {}

    def __bool__(self) -> bool:
        return any(self._count.values())

    def _touch(self, file: str, count: int = 1) -> None:
        for part in (self._head, self._rows, self._tail):
            part.setdefault(file, [])
        self._count[file] = self._count.get(file, 0) + count

    def column_order(self, file: str, columns: Sequence[str]) -> None:
        """Set the order in which a row's problems are listed (the file's columns)."""
        self._order[file] = {c: i for i, c in enumerate(columns)}

    def in_file(self, file: str) -> int:
        """Number of problems found in one file (hidden ones included)."""
        return self._count.get(file, 0)

    def add(
        self,
        file: str,
        row: int | None,
        column: str | None,
        message: str,
        *,
        summary: bool = False,
    ) -> None:
        """Record one problem; ``summary`` ones are listed after the rows."""
        self._touch(file)
        if row is None:
            (self._tail if summary else self._head)[file].append(
                Problem(file, None, column, message)
            )
            return
        key = (file, column)
        if self._shown.get(key, 0) >= self._cap:
            self._hidden[key] = self._hidden.get(key, 0) + 1
            return
        self._shown[key] = self._shown.get(key, 0) + 1
        self._rows[file].append(Problem(file, row, column, message))

    def add_rows(
        self,
        table: _Table,
        column: str,
        positions: np.ndarray,
        message: Callable[[int], str],
    ) -> None:
        """Record one problem per frame position; messages only for those shown."""
        if len(positions) == 0:
            return
        key = (table.file, column)
        room = max(self._cap - self._shown.get(key, 0), 0)
        for pos in positions[:room].tolist():
            self.add(table.file, int(table.rows[pos]), column, message(pos))
        extra = len(positions) - min(room, len(positions))
        if extra:
            self._touch(table.file, extra)
            self._hidden[key] = self._hidden.get(key, 0) + extra

    def problems(self) -> list[Problem]:
        """All problems, in reading order."""
        out: list[Problem] = []
        for file in self._head:
            order = self._order.get(file, {})
            out += self._head[file]
            out += sorted(
                self._rows[file],
                key=lambda p: (p.row or 0, order.get(p.column or "", len(order))),
            )
            out += self._tail[file]
            for (where, column), extra in self._hidden.items():
                if where == file:
                    out.append(
                        Problem(
                            file, None, column, f"... and {extra:,} more problems in this column"
                        )
                    )
        return out


class _Unreadable(Exception):
    """A file cannot be read at all (internal; becomes a Problem)."""

    def __init__(self, message: str, row: int | None = None) -> None:
        super().__init__(message)
        self.message = message
        self.row = row


# --------------------------------------------------------------------------
# Reading
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class _Table:
    """Raw cells of one table.

    Attributes
    ----------
    file
        Name used in messages (the file name, plus the sheet or layer when
        the file holds several).
    frame
        The cells as read, column names stripped and lower-cased, fully
        blank rows dropped, with a fresh 0..n-1 index.
    rows
        Spreadsheet row of each frame row (header = 1).
    """

    file: str
    frame: pd.DataFrame
    rows: np.ndarray


def read_table(
    path: str | Path, sheet: str | None = None, *, table: str | None = None
) -> pd.DataFrame:
    r"""Read one table from CSV, Excel (.xlsx) or a GIS file into a DataFrame.

    Cells are returned as read (CSV cells as text); no validation is done
    beyond the file being readable. Column names are stripped and
    lower-cased. For a GIS layer, point geometries become ``lat`` and ``lon``
    columns in degrees (WGS84) when the layer has neither ``lat``/``lon`` nor
    ``x``/``y`` columns; a ``_geometry_type`` column then gives each row's
    geometry type (empty when it has none).

    Parameters
    ----------
    path
        The file. The format follows the suffix: ``.csv``/``.txt``/``.tsv``,
        ``.xlsx``/``.xlsm``, anything else is handed to geopandas.
    sheet
        Sheet (Excel) or layer (GIS) to read. It must exist.
    table
        When ``sheet`` is not given and the file holds several sheets or
        layers, the one with this name is read (``sites``, ``demand``...).

    Returns
    -------
    pandas.DataFrame
        One row per data row of the file, fully blank rows included so the
        position ``i`` is spreadsheet row ``i + 2``.

    Raises
    ------
    InputError
        When the file is missing, empty or unreadable, or the sheet or layer
        does not exist.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (folder / "sites.csv").write_text("id,lat,lon\nA,52.5,13.4\n")
    >>> read_table(folder / "sites.csv")
      id   lat   lon
    0  A  52.5  13.4
    """
    path = Path(path)
    problems = _Problems()
    found = _read(path, sheet, table, problems)
    if found is None:
        raise InputError(problems.problems())
    return found[1]


def shown_path(path: Path) -> str:
    """A data file as its problems name it.

    Relative to the working folder when it lies under it
    (``demo_regions/iberia/demand.csv``), else the absolute path, so that
    a user with several scenarios can tell which file is meant.
    """
    # abspath, not resolve(): a symlinked file keeps the name the user gave.
    full = os.path.abspath(path)
    try:
        rel = os.path.relpath(full, os.getcwd())
    except (ValueError, OSError):  # another drive on Windows; no working folder
        return full
    return full if rel == os.pardir or rel.startswith(os.pardir + os.sep) else rel


def _read(
    path: Path, sheet: str | None, table: str | None, problems: _Problems
) -> tuple[str, pd.DataFrame] | None:
    """Read a file; on failure record the problem and return None."""
    label = shown_path(path)
    try:
        if not path.exists():
            raise _Unreadable(f"file not found: {path}")
        if path.is_dir():
            raise _Unreadable(f"expected a file, got a folder: {path}")
        suffix = path.suffix.lower()
        if suffix in _CSV_SUFFIXES:
            frame = _read_csv(path)
        elif suffix in _EXCEL_SUFFIXES:
            label, frame = _read_excel(path, sheet, table)
        elif suffix == ".xls":
            raise _Unreadable("old-style .xls workbooks are not read; save it as .xlsx")
        else:
            label, frame = _read_gis(path, sheet, table)
    except _Unreadable as err:
        problems.add(label, err.row, None, err.message)
        return None
    except OSError as err:
        problems.add(label, None, None, f"cannot read the file: {err.strerror or err}")
        return None
    if len(frame.columns) == 0:
        problems.add(label, None, None, "the file is empty: expected a header row of column names")
        return None
    return label, _clean_columns(frame)


#: A number written with a decimal comma: ``40,4168``, ``-3,5``.
_DECIMAL_COMMA = r"^\s*[+-]?\d+,\d+\s*$"
#: A whole number, which reads the same under either decimal mark.
_WHOLE = r"^\s*[+-]?\d+\s*$"


def _decimal_commas(frame: pd.DataFrame) -> pd.DataFrame:
    """Read decimal commas as points in the columns written wholly with them.

    Spreadsheets in locales whose decimal mark is the comma save CSV with
    semicolons between cells and ``40,4168`` in them. A column changes only
    when at least one cell has a decimal comma and every other filled cell is
    a whole number, so text columns and columns already written with points
    stay as they are (their problems are reported as usual).
    """
    out = frame
    for name in frame.columns:
        cells = frame[name]
        if not pd.api.types.is_object_dtype(cells.dtype) and not pd.api.types.is_string_dtype(
            cells.dtype
        ):
            continue
        text = cells.astype(str)
        comma = text.str.match(_DECIMAL_COMMA)
        if not comma.any():
            continue
        fits = comma | text.str.match(_WHOLE) | (text.str.strip() == "")
        if bool(fits.all()):
            if out is frame:
                out = frame.copy()
            out[name] = text.str.replace(",", ".", regex=False)
    return out


def _read_csv(path: Path) -> pd.DataFrame:
    with path.open("rb") as handle:
        start = handle.read(65536)
    if not start.strip():
        raise _Unreadable("the file is empty: expected a header row of column names")
    for encoding in ("utf-8-sig", "cp1252"):
        try:
            first = start.decode(encoding, errors="ignore").splitlines()[0]
            if path.suffix.lower() == ".tsv" or first.count("\t") > first.count(","):
                sep = "\t"
            elif first.count(";") > first.count(","):
                sep = ";"
            else:
                sep = ","
            frame = pd.read_csv(
                path,
                sep=sep,
                dtype=str,
                encoding=encoding,
                na_filter=False,
                keep_default_na=False,
                skip_blank_lines=False,
            )
            return _decimal_commas(frame) if sep == ";" else frame
        except UnicodeDecodeError:
            continue
        except pd.errors.EmptyDataError:
            raise _Unreadable("the file is empty: expected a header row of column names") from None
        except pd.errors.ParserError as err:
            text = str(err).strip()
            m = re.search(r"line (\d+)", text)
            raise _Unreadable(
                f"cannot parse the file as {'tab' if sep == chr(9) else repr(sep)}-separated "
                f"text: {text}",
                row=int(m.group(1)) if m else None,
            ) from None
    raise _Unreadable("cannot decode the text; save the file as UTF-8 CSV")


def _pick(names: Sequence[str], wanted: str | None, table: str | None, kind: str) -> str:
    """Choose a sheet or layer by name (see the module docstring)."""
    folded = {n.casefold(): n for n in names}
    listing = ", ".join(repr(n) for n in names)
    if wanted is not None:
        if wanted in names:
            return wanted
        if wanted.casefold() in folded:
            return folded[wanted.casefold()]
        raise _Unreadable(f"no {kind} named {wanted!r}; the file has {kind}s {listing}")
    if len(names) == 1:
        return names[0]
    if table is not None and table.casefold() in folded:
        return folded[table.casefold()]
    hint = f", or call one {table!r}" if table else ""
    raise _Unreadable(
        f"the file has several {kind}s ({listing}); name the one to read "
        f"with inputs.sheet in the config{hint}"
    )


def _read_excel(path: Path, sheet: str | None, table: str | None) -> tuple[str, pd.DataFrame]:
    try:
        book = pd.ExcelFile(path, engine="openpyxl")
    except (zipfile.BadZipFile, KeyError, ValueError) as err:
        raise _Unreadable(
            f"cannot read the file as an Excel .xlsx workbook ({type(err).__name__}: {err})"
        ) from None
    with book:
        names = [str(n) for n in book.sheet_names]
        name = _pick(names, sheet, table, "sheet")
        frame = pd.read_excel(
            book, sheet_name=name, dtype=object, keep_default_na=False, na_values=[]
        )
    label = shown_path(path) if len(names) == 1 else f"{shown_path(path)} (sheet {name})"
    return label, frame


def _read_gis(path: Path, sheet: str | None, table: str | None) -> tuple[str, pd.DataFrame]:
    import geopandas
    import pyogrio
    from pyogrio.errors import DataLayerError, DataSourceError

    try:
        layers = [str(n) for n in pyogrio.list_layers(path)[:, 0]]
    except (DataSourceError, DataLayerError) as err:
        raise _Unreadable(
            f"cannot read the file ({err}); hubnet reads CSV, Excel .xlsx and GIS "
            "formats such as GeoPackage, GeoJSON and shapefile"
        ) from None
    if not layers:
        raise _Unreadable("the file has no layers")
    name = _pick(layers, sheet, table, "layer")
    label = shown_path(path) if len(layers) == 1 else f"{shown_path(path)} (layer {name})"
    try:
        read = geopandas.read_file(path, layer=name, engine="pyogrio")
    except (DataSourceError, DataLayerError, ValueError) as err:
        raise _Unreadable(f"cannot read layer {name!r}: {err}") from None
    return label, _without_geometry(read)


def _without_geometry(frame: pd.DataFrame) -> pd.DataFrame:
    """A plain DataFrame; a GeoDataFrame's points become lat/lon (WGS84).

    Done only when the table has neither lat/lon nor x/y columns; a
    ``_geometry_type`` column then records each row's geometry type.
    """
    geopandas = sys.modules.get("geopandas")
    if geopandas is None or not isinstance(frame, geopandas.GeoDataFrame):
        return pd.DataFrame(frame)
    import shapely

    geometry = frame.geometry
    plain = pd.DataFrame(frame.drop(columns=geometry.name))
    names = {str(c).strip().lower() for c in plain.columns}
    if not ({"lat", "lon"} & names or {"x", "y"} & names):
        if geometry.crs is not None and not geometry.crs.equals(WGS84_CRS):
            geometry = geometry.to_crs(WGS84_CRS)
        shapes = np.asarray(geometry.values, dtype=object)
        plain["lat"] = shapely.get_y(shapes)
        plain["lon"] = shapely.get_x(shapes)
        plain[_GEOMETRY_TYPE] = geometry.geom_type.to_numpy(dtype=object)
    return plain


def _clean_columns(frame: pd.DataFrame) -> pd.DataFrame:
    """Strip and lower-case column names; keep the first of duplicates."""
    frame = frame.copy(deep=False)
    frame.columns = pd.Index([str(c).strip().lower() for c in frame.columns])
    if frame.columns.has_duplicates:
        frame = frame.loc[:, ~frame.columns.duplicated()]
    return frame


def _table(file: str, frame: pd.DataFrame) -> _Table:
    """Drop fully blank rows, keeping the spreadsheet row of the others."""
    frame = _clean_columns(_without_geometry(frame)).reset_index(drop=True)
    rows = np.arange(len(frame)) + 2
    if len(frame):
        blank = np.ones(len(frame), dtype=bool)
        for column in frame.columns:
            values = frame[column]
            if pd.api.types.is_numeric_dtype(values.dtype):
                blank &= values.isna().to_numpy()
            else:
                blank &= _text(values).isna().to_numpy()
        if blank.any():
            frame = frame.loc[~blank].reset_index(drop=True)
            rows = rows[~blank]
    return _Table(file, frame, rows)


# --------------------------------------------------------------------------
# Cell conversion (vectorised)
# --------------------------------------------------------------------------


def _cell_text(value: Any) -> str | None:
    """One cell as stripped text; None when empty."""
    if value is None or value is pd.NA or value is pd.NaT:
        return None
    if isinstance(value, bool | np.bool_):
        return "true" if value else "false"
    if isinstance(value, float | np.floating):
        if np.isnan(value):
            return None
        number = float(value)
        if np.isfinite(number) and number.is_integer() and abs(number) < 2**53:
            return str(int(number))
        return str(number)
    text = str(value).strip()
    return text or None


def _text(values: pd.Series) -> pd.Series:
    """Cells as stripped text (object dtype), None where empty."""
    dtype = values.dtype
    if pd.api.types.is_string_dtype(dtype) and not pd.api.types.is_object_dtype(dtype):
        stripped = values.str.strip()
        cells = stripped.to_numpy(dtype=object)
        cells[~(stripped.notna() & stripped.ne("")).to_numpy(dtype=bool)] = None
        return _objects(cells)
    if pd.api.types.is_integer_dtype(dtype) and isinstance(dtype, np.dtype):
        return _objects(values.astype(str).to_numpy(dtype=object))
    if pd.api.types.is_float_dtype(dtype) and isinstance(dtype, np.dtype):
        v = values.to_numpy(dtype=float)
        whole = np.isfinite(v) & (np.abs(v) < 2**53)
        whole[whole] = np.floor(v[whole]) == v[whole]
        out = np.empty(len(v), dtype=object)
        out[whole] = v[whole].astype(np.int64).astype(str)
        other = ~whole & ~np.isnan(v)
        out[other] = v[other].astype(str)
        return _objects(out)
    return _objects(np.array([_cell_text(v) for v in values.tolist()], dtype=object))


def _objects(cells: np.ndarray) -> pd.Series:
    """An object-dtype Series (text cells, None where empty), indexed 0..n-1."""
    return pd.Series(cells, dtype=object)


def _got(expectation: str, raw: pd.Series) -> Callable[[int], str]:
    """Message maker: the expectation and the raw cell at a position."""

    def message(pos: int) -> str:
        return f"{expectation}, got {_show(raw.iat[pos])}"

    return message


def _same(message: str) -> Callable[[int], str]:
    """Message maker: the same message for every position."""
    return lambda pos: message


def _numbers(values: pd.Series) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Parse cells as numbers.

    Returns
    -------
    tuple of numpy.ndarray
        The values (float, NaN where empty or not a number), a mask of
        empty cells and a mask of cells that are not numbers.
    """
    dtype = values.dtype
    if pd.api.types.is_numeric_dtype(dtype) and not pd.api.types.is_bool_dtype(dtype):
        v = values.to_numpy(dtype=float, na_value=np.nan)
        return v, np.isnan(v), np.zeros(len(v), dtype=bool)
    text = _text(values)
    empty = text.isna().to_numpy()
    v = pd.to_numeric(text, errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    return v, empty, np.isnan(v) & ~empty


def _show(value: Any) -> str:
    """A cell value quoted for a message."""
    text = _cell_text(value)
    return "an empty cell" if text is None else repr(text)


def _did_you_mean(value: str, known: Sequence[str]) -> str:
    """A '; did you mean ...?' hint, or ''."""
    folded = [k for k in known if k.casefold() == value.casefold()]
    close = folded or difflib.get_close_matches(value, known, n=1, cutoff=0.75)
    return f"; did you mean {close[0]!r}?" if close else ""


# --------------------------------------------------------------------------
# Column rules: parsing by kind, value checks by pandera
# --------------------------------------------------------------------------

_Kind = Literal["text", "number", "flag", "choice"]


def _in_range(low: float, high: float, expect: str) -> pa.Check:
    return pa.Check(lambda s: s.between(low, high), error=f"expected {expect}")


def _at_least(low: float, expect: str) -> pa.Check:
    # Infinite values are left to the finiteness check, so each bad cell
    # gets one message.
    return pa.Check(lambda s: ~np.isfinite(s) | (s >= low), error=f"expected {expect}")


def _above(low: float, expect: str) -> pa.Check:
    return pa.Check(lambda s: ~np.isfinite(s) | (s > low), error=f"expected {expect}")


_FINITE = pa.Check(lambda s: np.isfinite(s), error="expected a finite number")


def _is_clock(value: Any) -> bool:
    """True for an empty cell or a time of day ``HH:MM`` (see :func:`clock_hours`)."""
    if value is None:
        return True
    try:
        clock_hours(str(value))
    except ValueError:
        return False
    return True


_CLOCK_CHECK = pa.Check(lambda s: s.map(_is_clock).astype(bool), error=f"expected {CLOCK_EXPECT}")
_SPEED_EXPECT = f"a speed in km/h above 0 and at most {MAX_SPEED_KMH:g}"
_SPEED_CHECK = pa.Check(
    lambda s: ~np.isfinite(s) | ((s > 0) & (s <= MAX_SPEED_KMH)), error=f"expected {_SPEED_EXPECT}"
)
_TIERS_EXPECT = f"one or more of {', '.join(TIERS)}, separated by spaces, commas, semicolons or '|'"


def _number(
    name: str,
    expect: str,
    low: float,
    *,
    strict: bool = False,
    required: bool = False,
) -> _Column:
    """A finite number column: ``>= low``, or ``> low`` when ``strict``."""
    bound = _above(low, expect) if strict else _at_least(low, expect)
    return _Column(
        name, "number", expect, required=required, filled=required, checks=(bound, _FINITE)
    )


@dataclass(frozen=True)
class _Column:
    """How one column is read and checked.

    Attributes
    ----------
    name
        Column name (lower case).
    kind
        ``text``, ``number``, ``flag`` (true/false words) or ``choice``
        (one of a few words).
    expect
        What a cell should hold, used in messages ("a number >= 0").
    required
        The column must be present.
    filled
        Every row needs a value.
    checks
        pandera checks on the parsed values (numbers as floats, flag and
        choice words lower-cased); empty cells are skipped.
    """

    name: str
    kind: _Kind
    expect: str
    required: bool = False
    filled: bool = False
    checks: tuple[pa.Check, ...] = ()


def _schema(columns: Sequence[_Column]) -> pa.DataFrameSchema:
    return pa.DataFrameSchema(
        {
            c.name: pa.Column(None, list(c.checks), nullable=True, required=False)
            for c in columns
            if c.checks
        },
        strict=False,
    )


_SITE_COLUMNS = (
    _Column("id", "text", "a site id", required=True, filled=True),
    _Column("name", "text", "a name"),
    _Column("region", "text", "a region name"),
    _Column(
        "lat",
        "number",
        "a latitude in degrees within [-90, 90]",
        checks=(_in_range(-90, 90, "a latitude in degrees within [-90, 90]"),),
    ),
    _Column(
        "lon",
        "number",
        "a longitude in degrees within [-180, 180]",
        checks=(_in_range(-180, 180, "a longitude in degrees within [-180, 180]"),),
    ),
    _Column("x", "number", "a planar x coordinate", checks=(_FINITE,)),
    _Column("y", "number", "a planar y coordinate", checks=(_FINITE,)),
    _Column(
        "can_be_hub",
        "flag",
        "true or false (or yes/no, 1/0)",
        checks=(
            pa.Check.isin(
                _TRUE_WORDS + _FALSE_WORDS, error="expected true or false (or yes/no, 1/0)"
            ),
        ),
    ),
    _Column(
        "hub_fixed_cost",
        "number",
        "a cost per day >= 0",
        checks=(_at_least(0, "a cost per day >= 0"), _FINITE),
    ),
    _Column(
        "handling_cost",
        "number",
        "a cost per unit >= 0",
        checks=(_at_least(0, "a cost per unit >= 0"), _FINITE),
    ),
    _Column(
        "sort_capacity",
        "number",
        "units per day > 0, or an empty cell for unlimited",
        checks=(_above(0, "units per day > 0, or an empty cell for unlimited"), _FINITE),
    ),
    _Column(
        "hub_status",
        "choice",
        "candidate, open or closed",
        checks=(pa.Check.isin(_HUB_STATUSES, error="expected candidate, open or closed"),),
    ),
    _number("sort_hours", "hours >= 0, or an empty cell for the scenario's default", 0),
    _Column("cutoff", "text", CLOCK_EXPECT, checks=(_CLOCK_CHECK,)),
    _Column("deliver_by", "text", CLOCK_EXPECT, checks=(_CLOCK_CHECK,)),
)

_DEMAND_COLUMNS = (
    _Column("origin", "text", "a site id", required=True, filled=True),
    _Column("destination", "text", "a site id", required=True, filled=True),
    _Column(
        "volume",
        "number",
        "a number >= 0",
        required=True,
        filled=True,
        checks=(_at_least(0, "a number >= 0"), _FINITE),
    ),
    _number(
        "max_hours", "a transit allowance in hours > 0, or an empty cell for none", 0, strict=True
    ),
)

_DISTANCE_COLUMNS = (
    _Column("origin", "text", "a site id", required=True, filled=True),
    _Column("destination", "text", "a site id", required=True, filled=True),
    _Column(
        "distance_km",
        "number",
        "a distance in km >= 0",
        required=True,
        filled=True,
        checks=(_at_least(0, "a distance in km >= 0"), _FINITE),
    ),
    _Column(
        "hours",
        "number",
        "a drive time in hours > 0",
        checks=(_at_least(0, "a drive time in hours > 0"), _FINITE),
    ),
)

_VEHICLE_COLUMNS = (
    _Column("id", "text", "a vehicle class id", required=True, filled=True),
    _Column("name", "text", "a name"),
    _number("payload", "a payload > 0 (volume units per vehicle)", 0, strict=True, required=True),
    _number("max_kg", "a weight limit in kg > 0, or an empty cell for none", 0, strict=True),
    _number("max_m3", "a cubic limit in m3 > 0, or an empty cell for none", 0, strict=True),
    _number("cost_per_km", "a cost per vehicle-km >= 0", 0, required=True),
    _number("cost_per_hour", "a cost per hour >= 0", 0),
    _number("cost_per_dispatch", "a cost per dispatch >= 0", 0),
    _Column(
        "speed_kmh",
        "number",
        _SPEED_EXPECT,
        required=True,
        filled=True,
        checks=(_SPEED_CHECK, _FINITE),
    ),
    _Column("tiers", "choice", _TIERS_EXPECT, required=True, filled=True),
    _number("fuel_l_per_100km", "litres per 100 km >= 0", 0),
    _Column("fuel", "choice", "a fuel name"),
)

_TableKind = Literal["sites", "demand", "distances", "vehicles"]
_SPECS: dict[_TableKind, tuple[_Column, ...]] = {
    "sites": _SITE_COLUMNS,
    "demand": _DEMAND_COLUMNS,
    "distances": _DISTANCE_COLUMNS,
    "vehicles": _VEHICLE_COLUMNS,
}
_SCHEMAS = {kind: _schema(spec) for kind, spec in _SPECS.items()}


@dataclass
class _Parsed:
    """Parsed columns of one table.

    ``text`` holds text, flag and choice columns (None where empty),
    ``number`` float arrays (NaN where empty or bad); ``empty`` marks empty
    cells and ``bad`` cells with a problem reported.
    """

    table: _Table
    text: dict[str, pd.Series]
    number: dict[str, np.ndarray]
    empty: dict[str, np.ndarray]
    bad: dict[str, np.ndarray]
    missing: list[str]

    def has(self, column: str) -> bool:
        return column in self.empty

    def ok(self, *columns: str) -> bool:
        """True when the columns are present and none of their cells has a problem."""
        return all(c in self.bad and not self.bad[c].any() for c in columns)


def _parse(table: _Table, kind: _TableKind, problems: _Problems) -> _Parsed:
    """Check the columns of a table and parse each known one.

    Records missing required columns, unparseable cells, empty cells in
    columns that need a value, and every pandera check failure.
    """
    spec = _SPECS[kind]
    frame = table.frame
    found = list(frame.columns)
    problems.column_order(table.file, found)
    shown = ", ".join(c for c in found if c != _GEOMETRY_TYPE) or "none"
    ours = {c.name for c in spec}
    extra = [c for c in found if c not in ours and c != _GEOMETRY_TYPE]
    parsed = _Parsed(table, {}, {}, {}, {}, [])
    n = len(frame)
    for column in spec:
        if column.name not in frame.columns:
            if column.required:
                parsed.missing.append(column.name)
                hint = _did_you_mean(column.name, extra)
                problems.add(
                    table.file,
                    None,
                    column.name,
                    f"missing column {column.name!r}; found columns: {shown}{hint}",
                )
            else:
                close = difflib.get_close_matches(column.name, extra, n=1, cutoff=0.8)
                if close:
                    warnings.warn(
                        f"{table.file}: column {close[0]!r} is not used; "
                        f"did you mean {column.name!r}?",
                        InputWarning,
                        stacklevel=5,
                    )
            continue
        raw = frame[column.name]
        if column.kind == "number":
            values, empty, bad = _numbers(raw)
            parsed.number[column.name] = values
            where = np.flatnonzero(bad)
            problems.add_rows(
                table,
                column.name,
                where,
                _got(f"expected {column.expect}", raw),
            )
        else:
            text = _text(raw)
            if column.kind in ("flag", "choice"):
                text = text.str.lower()
            parsed.text[column.name] = text
            empty = text.isna().to_numpy()
            bad = np.zeros(n, dtype=bool)
        if column.filled:
            problems.add_rows(
                table,
                column.name,
                np.flatnonzero(empty),
                _same(f"empty cell; expected {column.expect}"),
            )
            bad = bad | empty
        parsed.empty[column.name] = empty
        parsed.bad[column.name] = bad
    _run_checks(parsed, spec, _SCHEMAS[kind], problems)
    return parsed


def _run_checks(
    parsed: _Parsed, spec: Sequence[_Column], schema: pa.DataFrameSchema, problems: _Problems
) -> None:
    """Run the pandera checks lazily and turn each failure into a Problem."""
    columns: dict[str, Any] = {}
    for column in spec:
        if column.checks and parsed.has(column.name):
            if column.kind == "number":
                columns[column.name] = parsed.number[column.name]
            else:
                columns[column.name] = parsed.text[column.name]
    if not columns:
        return
    frame = pd.DataFrame(columns)
    try:
        schema.validate(frame, lazy=True)
    except SchemaErrors as err:
        cases = err.failure_cases
        cases = cases[cases["index"].notna()]
        table = parsed.table
        for (name, check), group in cases.groupby(["column", "check"], sort=False):
            name = str(name)
            where = np.sort(group["index"].to_numpy(dtype=np.int64))
            raw = table.frame[name]
            problems.add_rows(
                table,
                name,
                where,
                _got(str(check), raw),
            )
            parsed.bad[name][where] = True


# --------------------------------------------------------------------------
# Sites
# --------------------------------------------------------------------------


@dataclass
class _SiteResult:
    ids: list[str] | None
    sites: list[Site] | None
    coordinates: CoordinateSystem


def _duplicates(key: pd.Series) -> tuple[np.ndarray, dict[Any, int]]:
    """Positions of repeated non-empty keys, and the first position of each key."""
    present = key.notna().to_numpy()
    repeated = key.duplicated(keep="first").to_numpy() & present
    if not repeated.any():
        return np.flatnonzero(repeated), {}
    firsts = key[present & ~repeated]
    return np.flatnonzero(repeated), dict(zip(firsts.tolist(), firsts.index.tolist(), strict=True))


def _sites(table: _Table, opts: _Options, problems: _Problems) -> _SiteResult:
    p = _parse(table, "sites", problems)
    file, frame, rows = table.file, table.frame, table.rows
    n = len(frame)
    result = _SiteResult(None, None, "geographic")
    if n == 0:
        problems.add(file, None, None, "the file has no sites: expected one row per site")
        return result
    ids: list[str | None] | None = None
    if "id" in p.text:
        ids = p.text["id"].tolist()
        where, first = _duplicates(p.text["id"])
        problems.add_rows(
            table,
            "id",
            where,
            lambda pos: (
                f"duplicate site id {ids[pos]!r}; it is also on row {rows[first[ids[pos]]]}"
            ),
        )
        result.ids = [i for i in ids if i is not None]

    coordinates = _coordinates(p, problems)
    result.coordinates = coordinates or "geographic"

    # Hub roles.
    if p.has("can_be_hub"):
        word = p.text["can_be_hub"]
        can_be_hub = ~word.isin(_FALSE_WORDS).to_numpy()
    else:
        can_be_hub = np.ones(n, dtype=bool)
    if p.has("hub_status"):
        status = p.text["hub_status"].fillna("candidate")
    else:
        status = pd.Series(["candidate"] * n, dtype=object)
    forced_open = status.eq("open").to_numpy()
    closed = status.eq("closed").to_numpy()
    conflict = forced_open & ~can_be_hub
    problems.add_rows(
        table,
        "hub_status",
        np.flatnonzero(conflict),
        lambda pos: (
            "hub_status is 'open' but can_be_hub is "
            f"{_show(frame['can_be_hub'].iat[pos])}; a site forced open must be allowed to be a hub"
        ),
    )
    roles_ok = (not p.has("can_be_hub") or p.ok("can_be_hub")) and (
        not p.has("hub_status") or p.ok("hub_status")
    )
    if roles_ok and not conflict.any():
        candidates = int((can_be_hub & ~closed).sum())
        opened = int(forced_open.sum())
        if candidates == 0:
            problems.add(
                file,
                None,
                "can_be_hub",
                "no site can be a hub: at least one site needs can_be_hub true "
                "and a hub_status other than closed",
                summary=True,
            )
        elif opts.hubs is not None and opts.hubs > candidates:
            problems.add(
                file,
                None,
                "can_be_hub",
                f"the config asks for {opts.hubs} hubs (model.hubs) but only "
                f"{candidates} site{'s' if candidates != 1 else ''} can be a hub",
                summary=True,
            )
        if opts.hubs is not None and opened > opts.hubs:
            problems.add(
                file,
                None,
                "hub_status",
                f"{opened} sites have hub_status open, but the config asks for exactly "
                f"{opts.hubs} hub{'s' if opts.hubs != 1 else ''} (model.hubs)",
                summary=True,
            )

    if problems.in_file(file) or coordinates is None or result.ids is None:
        return result

    def floats(name: str) -> list[float | None]:
        if name not in p.number:
            return [None] * n
        return [None if np.isnan(v) else v for v in p.number[name].tolist()]

    site_ids: list[str] = result.ids  # no empty ids: checked above
    names: list[str | None] = p.text["name"].tolist() if p.has("name") else [None] * n
    regions: list[str | None] = p.text["region"].tolist() if p.has("region") else [None] * n
    lat, lon, x, y = floats("lat"), floats("lon"), floats("x"), floats("y")
    fixed, handling = floats("hub_fixed_cost"), floats("handling_cost")
    capacity, sort_hours = floats("sort_capacity"), floats("sort_hours")
    cutoff, deliver_by = _clocks(p, "cutoff"), _clocks(p, "deliver_by")
    statuses = cast(list[HubStatus], status.tolist())
    result.sites = [
        Site(
            id=site_ids[i],
            name=names[i] or site_ids[i],
            lat=lat[i],
            lon=lon[i],
            x=x[i],
            y=y[i],
            can_be_hub=bool(can_be_hub[i]),
            hub_fixed_cost=fixed[i] or 0.0,
            handling_cost=handling[i] or 0.0,
            sort_capacity=capacity[i],
            hub_status=statuses[i],
            region=regions[i] or "",
            sort_hours=sort_hours[i],
            cutoff_h=cutoff[i],
            deliver_by_h=deliver_by[i],
        )
        for i in range(n)
    ]
    return result


def _clocks(p: _Parsed, name: str) -> list[float | None]:
    """A checked time-of-day column as hours after midnight (None where empty)."""
    if name not in p.text:
        return [None] * len(p.table.frame)
    return [None if v is None else clock_hours(v) for v in p.text[name].tolist()]


def _coordinates(p: _Parsed, problems: _Problems) -> CoordinateSystem | None:
    """Decide lat/lon or x/y and report rows without coordinates."""
    table = p.table
    file = table.file
    found = ", ".join(c for c in table.frame.columns if c != _GEOMETRY_TYPE)
    pairs = (("lat", "lon"), ("x", "y"))
    broken = False
    for pair in pairs:
        for a, b in (pair, pair[::-1]):
            if p.has(a) and not p.has(b):
                broken = True
                problems.add(
                    file,
                    None,
                    b,
                    f"missing column {b!r}: column {a!r} is there, so {b!r} is needed "
                    f"too; found columns: {found}",
                )
    geo = p.has("lat") and p.has("lon")
    planar = p.has("x") and p.has("y")
    if not geo and not planar:
        if not broken:
            problems.add(
                file,
                None,
                "lat",
                "missing coordinates: expected columns lat and lon (degrees, WGS84) "
                f"or x and y (planar); found columns: {found}",
            )
        return None
    geo_used = geo and bool((~p.empty["lat"] | ~p.empty["lon"]).any())
    system: CoordinateSystem = "geographic" if geo_used or not planar else "planar"
    need, other = (("lat", "lon"), ("x", "y")) if system == "geographic" else pairs[::-1]
    a, b = need
    kinds = {"lat": "lat and lon", "x": "x and y"}
    given_other = np.zeros(len(table.frame), dtype=bool)
    if p.has(other[0]) and p.has(other[1]):
        given_other = ~p.empty[other[0]] & ~p.empty[other[1]]
    shapes: list[Any] | None = None
    if _GEOMETRY_TYPE in table.frame.columns:
        shapes = table.frame[_GEOMETRY_TYPE].tolist()

    def why(pos: int) -> str:
        if given_other[pos]:
            return (
                f"; other sites give {kinds[a]} but this one gives {kinds[other[0]]}: "
                "use one kind of coordinates for every site"
            )
        if shapes is not None:
            shape = shapes[pos]
            if not isinstance(shape, str):
                return "; the row has no geometry either"
            return f"; the row's geometry is a {shape}, expected a point"
        return ""

    both = p.empty[a] & p.empty[b]
    problems.add_rows(
        table,
        a,
        np.flatnonzero(both),
        lambda pos: f"no coordinates: {a} and {b} are empty{why(pos)}",
    )
    for c in need:
        col = next(s for s in _SITE_COLUMNS if s.name == c)
        alone = p.empty[c] & ~both
        problems.add_rows(
            table, c, np.flatnonzero(alone), _same(f"empty cell; expected {col.expect}")
        )
    return system


# --------------------------------------------------------------------------
# Demand and distances
# --------------------------------------------------------------------------


def _unknown_sites(
    p: _Parsed, ids: list[str] | None, sites_file: str, problems: _Problems
) -> np.ndarray:
    """Report origin/destination ids not in the sites table; return the bad mask."""
    n = len(p.table.frame)
    unknown = np.zeros(n, dtype=bool)
    if ids is None:
        return unknown
    known = pd.Index(ids)
    for column in ("origin", "destination"):
        if column not in p.text:
            continue
        values = p.text[column]
        bad = values.notna().to_numpy() & ~values.isin(known).to_numpy()
        problems.add_rows(
            p.table,
            column,
            np.flatnonzero(bad),
            _unknown_message(values.tolist(), ids, sites_file),
        )
        unknown |= bad
    return unknown


def _unknown_message(values: list[Any], ids: list[str], sites_file: str) -> Callable[[int], str]:
    def message(pos: int) -> str:
        value = str(values[pos])
        hint = _did_you_mean(value, ids)
        return f"unknown site {value!r}: not an id in {sites_file}{hint}"

    return message


def _pair_checks(p: _Parsed, allow_same_site: bool, what: str, problems: _Problems) -> None:
    """Report same-site rows (unless allowed) and repeated (origin, destination) pairs."""
    if "origin" not in p.text or "destination" not in p.text:
        return
    o, d = p.text["origin"], p.text["destination"]
    rows = p.table.rows
    if not allow_same_site:
        same = (o.notna() & o.eq(d)).to_numpy()
        problems.add_rows(
            p.table,
            "destination",
            np.flatnonzero(same),
            lambda pos: (
                f"origin and destination are both {o.iat[pos]!r}; demand from a "
                "site to itself needs inputs.allow_same_site_demand = true"
            ),
        )
    key = (o + "\x1f" + d).where(o.notna() & d.notna(), None)
    where, first = _duplicates(key)
    problems.add_rows(
        p.table,
        "destination",
        where,
        lambda pos: (
            f"duplicate {what} {o.iat[pos]!r} -> {d.iat[pos]!r}; it is also on "
            f"row {rows[first[key.iat[pos]]]}; give each pair once"
        ),
    )


def _demand(
    table: _Table, ids: list[str] | None, sites_file: str, opts: _Options, problems: _Problems
) -> list[Demand] | None:
    p = _parse(table, "demand", problems)
    if len(table.frame) == 0:
        problems.add(table.file, None, None, "the file has no demand: expected one row per OD pair")
        return None
    _unknown_sites(p, ids, sites_file, problems)
    _pair_checks(p, opts.allow_same_site_demand, "OD pair", problems)
    if problems.in_file(table.file) or p.missing:
        return None
    n = len(table.frame)
    max_hours = p.number["max_hours"].tolist() if "max_hours" in p.number else [math.nan] * n
    return [
        Demand(o, d, v, None if math.isnan(h) else h)
        for o, d, v, h in zip(
            p.text["origin"].tolist(),
            p.text["destination"].tolist(),
            p.number["volume"].tolist(),
            max_hours,
            strict=True,
        )
    ]


def _distances(
    table: _Table, ids: list[str] | None, sites_file: str, problems: _Problems
) -> DistanceMatrix | None:
    p = _parse(table, "distances", problems)
    file = table.file
    unknown = _unknown_sites(p, ids, sites_file, problems)
    _pair_checks(p, True, "pair", problems)
    if p.missing or "origin" not in p.text or "destination" not in p.text:
        return None
    o, d = p.text["origin"], p.text["destination"]
    off_diagonal = o.ne(d).to_numpy()
    hours: np.ndarray | None = None
    if p.has("hours") and not p.empty["hours"].all():
        hours = p.number["hours"]
        gap = p.empty["hours"] & off_diagonal
        problems.add_rows(
            table,
            "hours",
            np.flatnonzero(gap),
            lambda pos: (
                "empty cell; expected a drive time in hours > 0 (other rows give "
                "hours, so every pair needs them)"
            ),
        )
        zero = (hours == 0) & off_diagonal
        problems.add_rows(
            table,
            "hours",
            np.flatnonzero(zero),
            lambda pos: (
                "expected a drive time in hours > 0 between two different sites, "
                f"got {_show(table.frame['hours'].iat[pos])}"
            ),
        )
    if ids is None:
        return None
    n = len(ids)
    index = pd.Index(ids)
    if index.has_duplicates:
        return None
    i = index.get_indexer(pd.Index(o.fillna("")))
    j = index.get_indexer(pd.Index(d.fillna("")))
    use = (i >= 0) & (j >= 0) & off_diagonal & ~unknown
    given = np.zeros((n, n), dtype=bool)
    given[i[use], j[use]] = True
    np.fill_diagonal(given, True)
    lacking = np.argwhere(~given)
    if len(lacking):
        shown = ", ".join(f"{ids[a]} -> {ids[b]}" for a, b in lacking[:MAX_MISSING_PAIRS_SHOWN])
        more = len(lacking) - MAX_MISSING_PAIRS_SHOWN
        problems.add(
            file,
            None,
            None,
            f"the matrix lacks {len(lacking):,} of the {n * (n - 1):,} ordered pairs of "
            f"different sites: {shown}{f' and {more:,} more' if more > 0 else ''}; "
            "give a row for every (origin, destination) pair",
            summary=True,
        )
    if problems.in_file(file):
        return None
    km = np.zeros((n, n))
    km[i[use], j[use]] = p.number["distance_km"][use]
    matrix_hours = None
    if hours is not None:
        matrix_hours = np.zeros((n, n))
        matrix_hours[i[use], j[use]] = hours[use]
    return DistanceMatrix(km=km, hours=matrix_hours, source="user")


# --------------------------------------------------------------------------
# Vehicle classes
# --------------------------------------------------------------------------

#: Tiers every network uses, with the legs they are (for messages); a class
#: allowed on direct legs is optional (without one no direct lane is offered).
_NEEDED_TIERS: tuple[tuple[Tier, str], ...] = (
    ("feeder", "feeder legs (between a terminal and its hub)"),
    ("trunk", "trunk legs (between two hubs)"),
)


def _known_fuels() -> tuple[str, ...]:
    """Fuel names of the bundled emission factor table (:func:`hubnet.emissions.load_fuels`)."""
    from hubnet.emissions import load_fuels

    return tuple(load_fuels())


def _split_tiers(text: str) -> list[str]:
    """The words of a ``tiers`` cell ("feeder, trunk" -> ["feeder", "trunk"])."""
    return [w for w in _TIER_SEPARATORS.split(text) if w]


def _tier_problem(text: str) -> str | None:
    """What is wrong with a ``tiers`` cell, or None."""
    words = _split_tiers(text)
    if not words:
        return f"expected {_TIERS_EXPECT}, got {text!r}"
    unknown = [w for w in words if w not in TIERS]
    if not unknown:
        return None
    word = unknown[0]
    more = f" (and {', '.join(repr(w) for w in unknown[1:])})" if len(unknown) > 1 else ""
    return f"unknown tier {word!r}{more}; expected {_TIERS_EXPECT}{_did_you_mean(word, TIERS)}"


def _vehicles(table: _Table, opts: _Options, problems: _Problems) -> list[VehicleClass] | None:
    p = _parse(table, "vehicles", problems)
    file, frame, rows = table.file, table.frame, table.rows
    n = len(frame)
    if n == 0:
        problems.add(
            file, None, None, "the file has no vehicle classes: expected one row per class"
        )
        return None
    ids: list[str | None] = p.text["id"].tolist() if "id" in p.text else [None] * n
    if "id" in p.text:
        where, first = _duplicates(p.text["id"])
        problems.add_rows(
            table,
            "id",
            where,
            lambda pos: (
                f"duplicate vehicle class id {ids[pos]!r}; it is also on row "
                f"{rows[first[ids[pos]]]}"
            ),
        )

    tiers: list[frozenset[Tier]] = [frozenset()] * n
    tiers_ok = "tiers" in p.text and p.ok("tiers")
    if "tiers" in p.text:
        cells: list[str | None] = p.text["tiers"].tolist()
        wrong = {
            pos: why
            for pos, cell in enumerate(cells)
            if cell is not None and (why := _tier_problem(cell)) is not None
        }
        problems.add_rows(
            table, "tiers", np.array(sorted(wrong), dtype=np.int64), wrong.__getitem__
        )
        tiers_ok = tiers_ok and not wrong
        tiers = [
            frozenset(cast(list[Tier], _split_tiers(c))) if c is not None else frozenset()
            for c in cells
        ]
    if tiers_ok:
        for tier, legs in _NEEDED_TIERS:
            if not any(tier in t for t in tiers):
                problems.add(
                    file,
                    None,
                    "tiers",
                    f"no vehicle class may run on {legs}: add {tier!r} to the tiers "
                    "of at least one class",
                    summary=True,
                )

    fuels = opts.fuels
    by_name = {f.casefold(): f for f in fuels}
    fuel_cells: list[str | None] = p.text["fuel"].tolist() if "fuel" in p.text else [None] * n
    unknown_fuel = np.array(
        [f is not None and f.casefold() not in by_name for f in fuel_cells], dtype=bool
    )
    problems.add_rows(
        table,
        "fuel",
        np.flatnonzero(unknown_fuel),
        lambda pos: (
            f"unknown fuel {fuel_cells[pos]!r}; the emission factor table has "
            f"{', '.join(fuels)}{_did_you_mean(str(fuel_cells[pos]), fuels)}"
        ),
    )

    if opts.check_unit_sizes:
        for column, key in (("max_kg", "kg_per_unit"), ("max_m3", "m3_per_unit")):
            given = p.has(column) and not p.empty[column].all()
            if given and getattr(opts, key) is None:
                warnings.warn(
                    f"{file}: column {column} is not used: set inputs.{key} in the config "
                    f"to apply the vehicles' {column} limits",
                    InputWarning,
                    stacklevel=4,
                )

    if problems.in_file(file) or p.missing:
        return None

    def floats(name: str) -> list[float | None]:
        if name not in p.number:
            return [None] * n
        return [None if math.isnan(v) else v for v in p.number[name].tolist()]

    names: list[str | None] = p.text["name"].tolist() if p.has("name") else [None] * n
    payload, cost_km, speed = floats("payload"), floats("cost_per_km"), floats("speed_kmh")
    cost_h, cost_dispatch = floats("cost_per_hour"), floats("cost_per_dispatch")
    max_kg, max_m3, fuel_use = floats("max_kg"), floats("max_m3"), floats("fuel_l_per_100km")
    out = []
    for i in range(n):
        class_id, fuel = ids[i], fuel_cells[i]
        assert class_id is not None  # required, filled and checked above
        out.append(
            VehicleClass(
                id=class_id,
                name=names[i] or class_id,
                payload=cast(float, payload[i]),
                cost_per_km=cast(float, cost_km[i]),
                speed_kmh=cast(float, speed[i]),
                tiers=tiers[i],
                cost_per_hour=cost_h[i] or 0.0,
                cost_per_dispatch=cost_dispatch[i] or 0.0,
                max_kg=max_kg[i],
                max_m3=max_m3[i],
                fuel_l_per_100km=fuel_use[i] or 0.0,
                fuel=DEFAULT_FUEL if fuel is None else by_name[fuel.casefold()],
            )
        )
    return out


# --------------------------------------------------------------------------
# Public entry points
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class _Options:
    volume_unit: str = "units"
    allow_same_site_demand: bool = False
    hubs: int | None = None
    method: DistanceMethod | None = None
    distances_file: bool = False
    config_file: str = "config"
    fuels: tuple[str, ...] = (DEFAULT_FUEL,)
    kg_per_unit: float | None = None
    m3_per_unit: float | None = None
    check_unit_sizes: bool = False


def _network(
    sites: _Table | None,
    demand: _Table | None,
    distances: _Table | None,
    opts: _Options,
    problems: _Problems,
    sites_label: str,
    vehicles: _Table | None = None,
    fuels: Mapping[str, FuelFactor] | None = None,
) -> NetworkData:
    """Validate the tables together and build the network, or raise.

    ``fuels``: the scenario's own fuel emission factors (``None``: the
    bundled table), kept on the network for the freight model.
    """
    if opts.volume_unit not in VOLUME_UNITS:
        problems.add(
            opts.config_file,
            None,
            "inputs.volume_unit",
            f"expected one of {', '.join(VOLUME_UNITS)}, got {opts.volume_unit!r}",
        )
    site_result = _sites(sites, opts, problems) if sites is not None else None
    ids = site_result.ids if site_result is not None else None
    flows = _demand(demand, ids, sites_label, opts, problems) if demand is not None else None
    matrix = _distances(distances, ids, sites_label, problems) if distances is not None else None
    classes = _vehicles(vehicles, opts, problems) if vehicles is not None else None
    if opts.method is not None and site_result is not None:
        _check_method(opts, site_result.coordinates, problems)
    if problems:
        raise InputError(problems.problems())
    assert site_result is not None and site_result.sites is not None and flows is not None
    assert distances is None or matrix is not None
    assert vehicles is None or classes is not None
    return NetworkData(
        sites=tuple(site_result.sites),
        demand=tuple(flows),
        volume_unit=opts.volume_unit,
        coordinates=site_result.coordinates,
        distances=matrix,
        allow_same_site_demand=opts.allow_same_site_demand,
        vehicles=tuple(classes or ()),
        fuels=dict(fuels or {}),
    )


def _check_method(opts: _Options, coordinates: CoordinateSystem, problems: _Problems) -> None:
    """Report a distance method that cannot work with these inputs."""
    where = (opts.config_file, None, "distances.method")
    if opts.method == "matrix" and not opts.distances_file:
        problems.add(*where, "method 'matrix' needs a distances file (inputs.distances)")
    elif opts.method == "geodesic" and coordinates == "planar":
        problems.add(
            *where, "method 'geodesic' needs lat and lon, but the sites file gives x and y"
        )
    elif opts.method == "euclidean" and coordinates == "geographic":
        problems.add(
            *where, "method 'euclidean' needs planar x and y, but the sites file gives lat and lon"
        )


def load_network(cfg: ScenarioConfig) -> NetworkData:
    """Read and validate a scenario's sites, demand, optional distance matrix and vehicles.

    File formats, columns and their units are described in the module
    docstring (:mod:`hubnet.inputs`).

    Parameters
    ----------
    cfg
        The scenario; its ``inputs`` name the files, the volume unit and
        the sheet, ``model.hubs`` the number of hubs asked for and
        ``distances.method`` how distances will be obtained.

    Returns
    -------
    NetworkData
        Sites in file order, demand in file order (volumes in units/day of
        ``cfg.inputs.volume_unit``), the user's distance matrix (km,
        hours) in site order when a distances file is given, and the
        vehicle classes in file order when a vehicles file is given.

    Raises
    ------
    InputError
        With every problem found in every file; nothing is returned
        half-checked.
    """
    problems = _Problems()
    files = cfg.inputs

    def table(path: Path | None, name: str) -> _Table | None:
        if path is None:
            return None
        if cfg.source is not None and not os.path.lexists(path):
            # Name the config line that gives the path: that is what to fix.
            problems.add(
                str(cfg.source),
                key_line(cfg.source, "inputs", name),
                f"inputs.{name}",
                f"file not found: {path}",
            )
            return None
        found = _read(path, files.sheet, name, problems)
        return None if found is None else _table(*found)

    sites = table(files.sites, "sites")
    demand = table(files.demand, "demand")
    distances = table(files.distances, "distances")
    vehicles = table(files.vehicles, "vehicles")
    fuel_table = _fuel_table(files.fuels, problems)
    opts = _Options(
        volume_unit=files.volume_unit,
        allow_same_site_demand=files.allow_same_site_demand,
        hubs=cfg.model.hubs,
        method=cfg.distances.method,
        distances_file=files.distances is not None,
        config_file=cfg.source.name if cfg.source is not None else "config",
        fuels=(
            tuple(fuel_table)
            if fuel_table is not None
            else _known_fuels()
            if files.vehicles is not None
            else (DEFAULT_FUEL,)
        ),
        kg_per_unit=cfg.freight.kg_per_unit,
        m3_per_unit=cfg.freight.m3_per_unit,
        check_unit_sizes=True,
    )
    sites_label = sites.file if sites is not None else shown_path(files.sites)
    return _network(sites, demand, distances, opts, problems, sites_label, vehicles, fuel_table)


def _fuel_table(path: Path | None, problems: _Problems) -> dict[str, FuelFactor] | None:
    """The scenario's own fuel emission factors (``inputs.fuels``), or ``None``.

    Its problems (file missing, bad TOML, bad values) join the others.
    """
    if path is None:
        return None
    from hubnet.emissions import load_fuels

    try:
        return load_fuels(path)
    except InputError as err:
        for p in err.problems:
            problems.add(shown_path(path), p.row, p.column, p.message)
        return None


def network_from_frames(
    sites: pd.DataFrame,
    demand: pd.DataFrame,
    distances: pd.DataFrame | None = None,
    *,
    vehicles: pd.DataFrame | None = None,
    volume_unit: str = "units",
    allow_same_site_demand: bool = False,
    hubs: int | None = None,
    names: Mapping[str, str] | None = None,
) -> NetworkData:
    """Build a network from in-memory tables, with the same checks as files.

    The frames use the columns of the file formats (see :mod:`hubnet.inputs`)
    and may hold text (as read from CSV) or typed values. Rows are numbered
    in messages as if the frame were saved to CSV with a header: the first
    row is row 2.

    Parameters
    ----------
    sites, demand, distances
        Site table, demand table (volume in units/day) and optional long-form
        distance table (km, hours).
    vehicles
        Optional vehicle class table (switches on the freight model).
    volume_unit
        The unit of every volume (see :data:`hubnet.units.VOLUME_UNITS`).
    allow_same_site_demand
        Accept volume from a site to itself.
    hubs
        Number of hubs the model will be asked to open, if fixed; checked
        against the number of candidate hubs.
    names
        Names used for the tables in messages, by ``sites``, ``demand``,
        ``distances`` and ``vehicles``; default the table names.

    Returns
    -------
    NetworkData

    Raises
    ------
    InputError
        With every problem found.

    Examples
    --------
    >>> sites = pd.DataFrame({"id": ["A", "B"], "x": [0.0, 3.0], "y": [0.0, 4.0]})
    >>> demand = pd.DataFrame({"origin": ["A"], "destination": ["B"], "volume": [12.0]})
    >>> net = network_from_frames(sites, demand)
    >>> net.coordinates, net.ids, net.demand[0].volume
    ('planar', ('A', 'B'), 12.0)
    """
    label = {
        "sites": "sites",
        "demand": "demand",
        "distances": "distances",
        "vehicles": "vehicles",
        **(names or {}),
    }
    problems = _Problems()
    opts = _Options(
        volume_unit=volume_unit,
        allow_same_site_demand=allow_same_site_demand,
        hubs=hubs,
        fuels=_known_fuels() if vehicles is not None else (DEFAULT_FUEL,),
    )
    return _network(
        _table(label["sites"], sites),
        _table(label["demand"], demand),
        None if distances is None else _table(label["distances"], distances),
        opts,
        problems,
        label["sites"],
        None if vehicles is None else _table(label["vehicles"], vehicles),
    )
