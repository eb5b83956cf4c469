"""The files hubnet adds to every run folder beyond the summary and the CSV tables.

:func:`extra_run_files` renders, in memory, ``sites.csv`` (the sites with
their coordinates, so the map can be redrawn from the folder alone),
``map.html`` (the route map, :mod:`hubnet.report.maps`) and ``tables.xlsx``
(the workbook, :mod:`hubnet.report.workbook`). :func:`hubnet.api.run_scenario`
passes them to :func:`hubnet.runfolder.write_run`, which writes them with
the other files in one atomic step.
"""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import Path
from typing import Any

from hubnet.data import NetworkData
from hubnet.report.maps import DEFAULT_TILES, MAP_FILE, map_html
from hubnet.report.rundata import SITES_FILE, RunData, sites_table
from hubnet.report.tables import all_tables
from hubnet.report.workbook import WORKBOOK_FILE, workbook_bytes
from hubnet.solution import Solution


def extra_run_files(
    sol: Solution,
    data: NetworkData,
    summary: Mapping[str, Any],
    *,
    folder: str | Path = "run",
    tiles: str = DEFAULT_TILES,
) -> dict[str, bytes]:
    """``sites.csv``, ``map.html`` and ``tables.xlsx`` of a run, as bytes.

    Parameters
    ----------
    sol
        The plan.
    data
        The network it was solved on (for site names and coordinates).
    summary
        The summary written as ``summary.json``.
    folder
        The run folder's path (named on the map only when the summary has
        no scenario name).
    tiles
        Base map of ``map.html``: ``outline``, ``light``, ``osm`` or ``none``.

    Returns
    -------
    dict
        File name to content, for ``write_run(..., extra_files=...)``.
    """
    tables = dict(all_tables(sol))
    tables["sites"] = sites_table(data)
    run = RunData(Path(folder), summary, tables)
    return {
        SITES_FILE: tables["sites"].to_csv(index=False, lineterminator="\n").encode(),
        MAP_FILE: map_html(run, tiles=tiles).encode(),
        WORKBOOK_FILE: workbook_bytes(tables, summary),
    }
