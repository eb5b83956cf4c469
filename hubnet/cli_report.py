"""The ``hubnet map`` and ``hubnet report`` commands: draw run folders for people.

Both read finished run folders only (they never solve) and call
:mod:`hubnet.report.maps` and :mod:`hubnet.report.html`. They are
registered on the ``hubnet`` command in :mod:`hubnet.cli`.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from hubnet.cli_common import err_console, fail, switch
from hubnet.errors import EXIT_BAD_INPUT, HubnetError

_err = err_console
_fail = fail

_TILES_HELP = (
    "Base map under the network: outline (country outlines inside the page: works "
    "offline, asks no server), light (a plain grey tile map from a tile server), osm "
    "(OpenStreetMap's own servers, which refuse pages opened from a file) or none."
)


def _check_tiles(tiles: str) -> str:
    from hubnet.report.maps import TILES

    if tiles not in TILES:
        raise typer.BadParameter(
            f"expected one of {', '.join(TILES)}, got {tiles!r}", param_hint="--tiles"
        )
    return tiles


def map_command(
    run_dir: Annotated[Path, typer.Argument(help="Run folder (written by hubnet solve).")],
    out: Annotated[
        Path | None,
        typer.Option(
            "--out",
            "-o",
            help="HTML file to write; by default map.html in the run folder (replaced).",
        ),
    ] = None,
    tiles: Annotated[str, typer.Option("--tiles", help=_TILES_HELP)] = "outline",
    sites: Annotated[
        Path | None,
        typer.Option(
            "--sites",
            help="Sites file (id, name, lat, lon) for run folders without sites.csv.",
        ),
    ] = None,
    force: Annotated[bool, switch("--force", help="Replace the --out file if it exists.")] = False,
    verbose: Annotated[bool, switch("--verbose", "-v", help="Show tracebacks.")] = False,
) -> None:
    """Draw a run folder's route map as one HTML file (works offline; tile base maps aside)."""
    from hubnet.report.maps import write_map

    _check_tiles(tiles)
    try:
        path = write_map(run_dir, out, tiles=tiles, sites=sites, force=force)
    except (HubnetError, OSError) as err:
        _fail(err, verbose)
        return
    _err.print(f"wrote {path}")


def report_command(
    run_dirs: Annotated[
        list[Path],
        typer.Argument(
            help="Run folders; the others are compared with the first. A frontier folder "
            "(hubnet frontier) stands for its efficient points."
        ),
    ],
    out: Annotated[Path, typer.Option("--out", "-o", help="HTML file to write.")] = Path(
        "report.html"
    ),
    tiles: Annotated[str, typer.Option("--tiles", help=_TILES_HELP)] = "outline",
    force: Annotated[bool, switch("--force", help="Replace the --out file if it exists.")] = False,
    verbose: Annotated[bool, switch("--verbose", "-v", help="Show tracebacks.")] = False,
) -> None:
    """Write one HTML page comparing run folders side by side, with maps and cautions."""
    from hubnet.frontier import report_run_dirs
    from hubnet.report.html import write_report

    _check_tiles(tiles)
    if not run_dirs:
        _err.print("[bold red]error:[/bold red] give at least one run folder", markup=True)
        raise typer.Exit(EXIT_BAD_INPUT)
    try:
        run_dirs = report_run_dirs(run_dirs)  # a frontier folder: its efficient points
        path = write_report(run_dirs, out, tiles=tiles, force=force)
    except (HubnetError, OSError) as err:
        _fail(err, verbose)
        return
    _err.print(f"wrote {path} ({len(run_dirs)} run{'s' if len(run_dirs) != 1 else ''})")
