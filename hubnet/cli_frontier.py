"""The ``hubnet frontier`` command: the cost–time frontier of a freight scenario.

It calls :func:`hubnet.frontier.trace_frontier` and prints one line as each
point starts and one with its result (the solver's own lines too, prefixed
with the point's folder), then the table of points on standard output.
Registered on ``hubnet`` in :mod:`hubnet.cli`.

Exit codes (:mod:`hubnet.errors`): 0 when the frontier folder is written,
also when some points have no plan (their rows say why); 2 for a bad
config or inputs, or a scenario without vehicle classes; 5 when the folder
exists and ``--force`` was not given; when no point has a plan, the code
of the cheapest point's failure (3 infeasible, 4 no plan within the time
limit), and nothing is written.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from pathlib import Path
from typing import Annotated, Any

import typer
from rich.console import Console
from rich.markup import escape
from rich.table import Table

from hubnet.cli_common import err_console, fail, switch
from hubnet.errors import EXIT_OK, HubnetError
from hubnet.frontier import DEFAULT_POINTS, MIN_POINTS, Frontier

_err = err_console
_out = Console(highlight=False, soft_wrap=True)
if not _out.is_terminal:  # a pipe or a log: wide tables rather than wrapped cells
    _out = Console(highlight=False, soft_wrap=True, width=200)


def _progress(quiet: bool) -> Callable[[str], None]:
    start = time.perf_counter()

    def say(message: str) -> None:
        if not quiet:
            stamp = f"[dim]{time.perf_counter() - start:7.1f} s[/dim]"
            _err.print(f"{stamp}  {escape(message)}", markup=True)

    return say


def _num(x: float | None, digits: int = 2) -> str:
    return "" if x is None else f"{x:,.{digits}f}"


def _table(frontier: Frontier) -> Table:
    table = Table(
        title=f"cost–time frontier: {frontier.folder}",
        title_justify="left",
    )
    for name, justify in (
        ("point", "right"),
        ("kind", "left"),
        ("cap h", "right"),
        ("cost per day", "right"),
        ("avg transit h", "right"),
        ("max transit h", "right"),
        ("vehicles", "right"),
        ("hubs", "left"),
        ("status", "left"),
        ("efficient", "left"),
    ):
        table.add_column(name, justify=justify)  # type: ignore[arg-type]
    for p in frontier.points:
        table.add_row(
            str(p.point),
            p.kind,
            _num(p.cap_h, 3),
            _num(p.total_cost),
            _num(p.avg_transit_h, 3),
            _num(p.max_transit_h, 2),
            _num(p.vehicles, 0),
            " ".join(p.hubs),
            p.status,
            "yes" if p.efficient else (f"no: {p.note}" if p.note else "no"),
        )
    return table


def frontier_command(
    config: Annotated[Path, typer.Argument(help="Freight scenario config (TOML).")],
    out: Annotated[
        Path,
        typer.Option(
            "--out",
            "-o",
            help="Frontier folder to write: point-01 ... run folders, frontier.csv, frontier.png.",
        ),
    ],
    points: Annotated[
        int,
        typer.Option(
            "--points",
            "-n",
            min=MIN_POINTS,
            help=f"Points in total, the cheapest and the fastest plan included "
            f"(at least {MIN_POINTS}).",
        ),
    ] = DEFAULT_POINTS,
    force: Annotated[
        bool, switch("--force", help="Replace the frontier folder if it exists.")
    ] = False,
    time_limit: Annotated[
        float | None,
        typer.Option(
            "--time-limit", min=0.0, help="Override solver.time_limit_s (s), for each point."
        ),
    ] = None,
    quiet: Annotated[
        bool, switch("--quiet", "-q", help="Print only errors and the table.")
    ] = False,
    verbose: Annotated[
        bool,
        switch("--verbose", "-v", help="Show tracebacks and the solver log."),
    ] = False,
) -> None:
    """Trace the cost–time frontier: the cheapest plan, the fastest, and plans between.

    The plans between have least cost under caps on the volume-weighted
    average transit time, evenly spaced between the two ends. Each point is
    a full run folder; frontier.csv lists them (efficient true/false) and
    frontier.png draws cost per day against average transit time. Needs
    the freight model (inputs.vehicles).
    """
    from hubnet.frontier import trace_frontier

    overrides: dict[str, Any] = {}
    if time_limit is not None:
        overrides["solver"] = {"time_limit_s": time_limit}
    if verbose:
        overrides.setdefault("solver", {})["log"] = True
    say = _progress(quiet)
    try:
        frontier = trace_frontier(
            config, out, points=points, force=force, progress=say, overrides=overrides
        )
    except HubnetError as err:
        fail(err, verbose)
    except KeyboardInterrupt:
        _err.print("interrupted: nothing was written")
        raise typer.Exit(130) from None
    _out.print(_table(frontier))
    failed = frontier.failed
    if failed:
        _err.print(
            f"[bold yellow]warning:[/bold yellow] {len(failed)} of {len(frontier.points)} "
            "points have no plan (see the status and note columns of frontier.csv)",
            markup=True,
        )
    if not quiet:
        _err.print(
            f"{len(frontier.efficient)} efficient points in {frontier.seconds:.1f} s; "
            f"wrote {frontier.folder}"
        )
    raise typer.Exit(EXIT_OK)
