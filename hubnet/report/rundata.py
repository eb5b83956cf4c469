"""Read a finished run folder back: its summary, its tables and its sites.

The map, the manager report and the workbook are drawn from the files of a
run folder alone (``summary.json``, ``hubs.csv``, ``legs.csv``,
``routes.csv``, ``hierarchy.csv``, ``rank_size.csv`` and ``sites.csv``), so
that ``hubnet map RUN_DIR`` and ``hubnet report RUN_DIR ...`` work on any run
folder, today's or one written by a scheduler last month.

Text columns (site ids, names, tiers, paths) are read as text exactly as
written: an id ``007`` stays ``"007"`` and an id ``NA`` stays ``"NA"``.
Every other column is read as a number when all its cells are numbers or
empty (an empty cell is NaN), so columns added to ``legs.csv`` by later
versions are picked up as numbers or text without code changes here.

:func:`sites_table` builds ``sites.csv`` (id, name, coordinates, whether the
site is a candidate hub) from the validated network, for
:func:`hubnet.api.run_scenario` to add to the run folder.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd

from hubnet.data import NetworkData
from hubnet.errors import InputError, Problem

SITES_FILE = "sites.csv"

#: Columns read as text in every run-folder table, whatever they hold.
TEXT_COLUMNS: frozenset[str] = frozenset(
    {
        "id",
        "name",
        "hub_id",
        "terminal_ids",
        "tier",
        "from_site",
        "to_site",
        "origin",
        "destination",
        "path",
        "vehicle_class",
        "candidate_hub",
    }
)

#: Tables of a run folder by file stem, and whether a run folder must have them.
RUN_TABLES: dict[str, bool] = {
    "hubs": True,
    "legs": True,
    "dispatches": False,
    "routes": True,
    "hierarchy": False,
    "rank_size": False,
    "sites": False,
}


def sites_table(data: NetworkData) -> pd.DataFrame:
    """The sites of a network as written to ``sites.csv``.

    Parameters
    ----------
    data
        The validated network.

    Returns
    -------
    pandas.DataFrame
        Columns ``id``, ``name``, then ``lat`` and ``lon`` (degrees, WGS84)
        for geographic data or ``x`` and ``y`` (the data's planar unit) for
        planar data, then ``candidate_hub`` (``true`` when the model may
        open a hub at the site, else ``false``). Rows in site order.
    """
    geo = data.coordinates == "geographic"
    rows = [
        {
            "id": s.id,
            "name": s.name,
            ("lat" if geo else "x"): s.lat if geo else s.x,
            ("lon" if geo else "y"): s.lon if geo else s.y,
            "candidate_hub": "true" if s.is_candidate else "false",
        }
        for s in data.sites
    ]
    columns = ["id", "name", "lat", "lon"] if geo else ["id", "name", "x", "y"]
    return pd.DataFrame(rows, columns=[*columns, "candidate_hub"])


def read_table(path: str | Path) -> pd.DataFrame:
    """Read one run-folder CSV: text columns as text, the rest as numbers where they are.

    Parameters
    ----------
    path
        The CSV file.

    Returns
    -------
    pandas.DataFrame
        Columns named in :data:`TEXT_COLUMNS` hold ``str`` (empty cells as
        ``""``); any other column whose non-empty cells all parse as numbers
        holds floats (empty cells NaN); a column with other text stays text.

    Raises
    ------
    InputError
        When the file cannot be read as CSV.
    """
    path = Path(path)
    try:
        raw = pd.read_csv(path, dtype=str, keep_default_na=False, na_filter=False)
    except (OSError, ValueError, pd.errors.ParserError) as err:
        raise InputError(Problem(str(path), None, None, f"cannot read the table: {err}")) from err
    for column in raw.columns:
        if column in TEXT_COLUMNS:
            continue
        cells = raw[column]
        numbers = pd.to_numeric(cells.where(cells.str.strip() != ""), errors="coerce")
        filled = cells.str.strip() != ""
        if bool((numbers.notna() | ~filled).all()):
            raw[column] = numbers.astype(float)
    return raw


@dataclass(frozen=True, eq=False)
class RunData:
    """The files of one run folder, read back.

    Attributes
    ----------
    folder
        The run folder.
    summary
        ``summary.json`` as a dict.
    tables
        ``hubs``, ``legs``, ``routes`` always; ``dispatches`` (freight
        runs), ``hierarchy``, ``rank_size`` and ``sites`` when the folder
        has them (an empty table otherwise).
    """

    folder: Path
    summary: Mapping[str, Any]
    tables: Mapping[str, pd.DataFrame] = field(default_factory=dict)

    @property
    def scenario(self) -> str:
        """The scenario's name, or the folder's name when the summary has none."""
        name = self.summary.get("scenario")
        return str(name) if name else self.folder.name

    @property
    def volume_unit(self) -> str:
        """The volume unit of the run (``units`` when not stated)."""
        return str(self.summary.get("volume_unit") or "units")

    def table(self, name: str) -> pd.DataFrame:
        """One table by file stem; an empty frame when the folder has none."""
        return self.tables.get(name, pd.DataFrame())


def read_run(run_dir: str | Path, sites: str | Path | None = None) -> RunData:
    """Read a run folder's summary and tables.

    Parameters
    ----------
    run_dir
        The run folder (written by ``hubnet solve`` or
        :func:`hubnet.api.run_scenario`).
    sites
        A sites file to use instead of the folder's ``sites.csv`` (columns
        ``id``, ``name`` and ``lat``/``lon`` or ``x``/``y``), for run
        folders written before ``sites.csv`` was added.

    Returns
    -------
    RunData
        The summary and every table found.

    Raises
    ------
    InputError
        Naming the file, when the folder, ``summary.json``, ``hubs.csv``,
        ``legs.csv`` or ``routes.csv`` is missing or unreadable.
    """
    folder = Path(run_dir)
    if not folder.is_dir():
        raise InputError(Problem(str(folder), None, None, "no such run folder"))
    summary_path = folder / "summary.json"
    try:
        summary = json.loads(summary_path.read_text(encoding="utf-8"))
    except FileNotFoundError as err:
        raise InputError(
            Problem(str(summary_path), None, None, "missing: this is not a hubnet run folder")
        ) from err
    except (OSError, ValueError) as err:
        raise InputError(Problem(str(summary_path), None, None, f"cannot read: {err}")) from err
    if not isinstance(summary, dict):
        raise InputError(Problem(str(summary_path), None, None, "expected a JSON object"))
    tables: dict[str, pd.DataFrame] = {}
    for name, required in RUN_TABLES.items():
        path = folder / f"{name}.csv"
        if name == "sites" and sites is not None:
            path = Path(sites)
        if path.is_file():
            tables[name] = read_table(path)
        elif required or (name == "sites" and sites is not None):
            raise InputError(Problem(str(path), None, None, "missing from the run folder"))
    return RunData(folder, summary, tables)


def coordinates(sites: pd.DataFrame) -> dict[str, tuple[float, float]]:
    """Map coordinates of every site with them: ``(lat, lon)`` or ``(y, x)``.

    Parameters
    ----------
    sites
        A sites table with ``id`` and ``lat``/``lon`` or ``x``/``y``.

    Returns
    -------
    dict
        Site id to a ``(vertical, horizontal)`` pair as Leaflet takes it;
        sites with a missing or non-finite coordinate are left out.
    """
    if {"lat", "lon"} <= set(sites.columns):
        vertical, horizontal = "lat", "lon"
    elif {"x", "y"} <= set(sites.columns):
        vertical, horizontal = "y", "x"
    else:
        return {}
    out: dict[str, tuple[float, float]] = {}
    for site_id, v, h in zip(sites["id"], sites[vertical], sites[horizontal], strict=True):
        try:
            fv, fh = float(v), float(h)
        except (TypeError, ValueError):
            continue
        if math.isfinite(fv) and math.isfinite(fh):
            out[str(site_id)] = (fv, fh)
    return out


def is_planar(sites: pd.DataFrame) -> bool:
    """True when the sites carry planar ``x``/``y`` rather than ``lat``/``lon``."""
    return not {"lat", "lon"} <= set(sites.columns) and {"x", "y"} <= set(sites.columns)
