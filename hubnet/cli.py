"""The ``hubnet`` command: a thin layer over :mod:`hubnet.api`.

Each command reads, calls the library, prints one line per step and exits
with a documented code (see :mod:`hubnet.errors`). A :class:`HubnetError`
prints as a short message; the traceback appears only with ``--verbose``.
"""

from __future__ import annotations

import sys
import time
from collections.abc import Callable
from pathlib import Path
from typing import Annotated

import typer
from rich.markup import escape

from hubnet.cli_common import err_console, fail, switch
from hubnet.cli_frontier import frontier_command
from hubnet.cli_report import map_command, report_command
from hubnet.cli_sweep import (
    HistoryOption,
    LogFileOption,
    LogFormatOption,
    WarmStartOption,
    compare_command,
    runs_command,
    solve_job,
    sweep_command,
)
from hubnet.errors import EXIT_BAD_INPUT, EXIT_OK, HubnetError

app = typer.Typer(
    add_completion=False,
    no_args_is_help=True,
    help="Design hub-and-spoke freight networks: pick hubs, route every flow, write the plan.",
)


def _show_version(value: bool) -> None:
    if value:
        from hubnet.report.summary import hubnet_version

        typer.echo(f"hubnet {hubnet_version()}")
        raise typer.Exit(EXIT_OK)


@app.callback()
def _root(
    version: Annotated[
        bool,
        typer.Option(
            "--version",
            callback=_show_version,
            is_eager=True,
            metavar="",
            help="Print hubnet's version and exit.",
        ),
    ] = False,
) -> None:
    """Design hub-and-spoke freight networks: pick hubs, route every flow, write the plan."""


# soft_wrap: never break a line at the terminal width, so every problem stays on
# one line (file, row, column, message) for grep and for a scheduler's log.
_err = err_console
_fail = fail


def _progress(quiet: bool) -> Callable[[str], None]:
    start = time.perf_counter()

    def say(message: str) -> None:
        if not quiet:
            _err.print(f"[dim]{time.perf_counter() - start:7.1f} s[/dim]  {escape(message)}")

    return say


@app.command()
def solve(
    config: Annotated[Path, typer.Argument(help="Scenario config (TOML).")],
    out: Annotated[Path, typer.Option("--out", "-o", help="Run folder to write.")] = Path(
        "runs/latest"
    ),
    force: Annotated[bool, switch("--force", help="Replace the run folder if it exists.")] = False,
    hubs: Annotated[
        int | None, typer.Option("--hubs", help="Override model.hubs (number of hubs).")
    ] = None,
    solver: Annotated[
        str | None, typer.Option("--solver", help="Override solver.name: auto, highs or cbc.")
    ] = None,
    time_limit: Annotated[
        float | None, typer.Option("--time-limit", help="Override solver.time_limit_s (s).")
    ] = None,
    gap: Annotated[
        float | None, typer.Option("--gap", help="Override solver.gap (relative).")
    ] = None,
    threads: Annotated[
        int | None, typer.Option("--threads", help="Override solver.threads.")
    ] = None,
    log_file: LogFileOption = None,
    log_format: LogFormatOption = "plain",
    warm_start: WarmStartOption = None,
    history: HistoryOption = None,
    quiet: Annotated[bool, switch("--quiet", "-q", help="Print only errors.")] = False,
    verbose: Annotated[
        bool,
        switch("--verbose", "-v", help="Show tracebacks and the solver log."),
    ] = False,
) -> None:
    """Solve a scenario and write its run folder (summary.json and tables).

    The run folder is locked while the run writes it, and the run is
    recorded in the run history (see hubnet runs).
    """
    overrides: dict[str, dict[str, object]] = {}
    if hubs is not None:
        overrides.setdefault("model", {})["hubs"] = hubs
    for key, value in (
        ("name", solver),
        ("time_limit_s", time_limit),
        ("gap", gap),
        ("threads", threads),
    ):
        if value is not None:
            overrides.setdefault("solver", {})[key] = value
    if verbose:
        overrides.setdefault("solver", {})["log"] = True
    say = _progress(quiet)
    try:
        sol, path = solve_job(
            config,
            out,
            force=force,
            overrides=overrides,
            say=say,
            log_file=log_file,
            log_format=log_format,
            warm_start=warm_start,
            history=history,
        )
    except HubnetError as err:
        _fail(err, verbose)
        return
    except KeyboardInterrupt:
        _err.print("interrupted: nothing was written")
        raise typer.Exit(130) from None
    stats = sol.stats
    if not quiet:
        _err.print(
            f"[bold]{stats.status}[/bold]: {len(sol.hubs)} hubs ({', '.join(sol.hub_ids)}), "
            f"cost {sol.costs['total']:,.2f} per day, "
            + (f"gap {100 * stats.gap:.4f} %" if stats.gap is not None else "no bound proven")
            + (
                " (proven within solver.gap)"
                if stats.status == "optimal" and (stats.gap or 0.0) > 1e-6
                else " (not proven optimal)"
                if stats.status == "time_limit"
                else ""
            )
        )
        _err.print(f"wrote {path}")
    raise typer.Exit(EXIT_OK)


@app.command()
def check(
    config: Annotated[Path, typer.Argument(help="Scenario config (TOML).")],
    verbose: Annotated[bool, switch("--verbose", "-v")] = False,
) -> None:
    """Validate a scenario's config and input files without solving."""
    from hubnet.api import load_scenario

    try:
        sc = load_scenario(config)
    except HubnetError as err:
        _fail(err, verbose)
        return
    data = sc.data
    cand = int(data.candidates().sum())
    total = sum(d.volume for d in data.demand)
    _err.print(
        f"ok: {data.n} sites ({cand} candidate hubs), {len(data.demand)} OD pairs, "
        f"{total:,.10g} {data.volume_unit} per day; distances: {sc.distances.source}"
    )


app.command("map")(map_command)
app.command("report")(report_command)
app.command("sweep")(sweep_command)
app.command("runs")(runs_command)
app.command("compare")(compare_command)
app.command("frontier")(frontier_command)


def main() -> None:
    """Console-script entry point."""
    try:
        app()
    except SystemExit as exc:  # typer raises SystemExit on --help and bad options
        code = exc.code if isinstance(exc.code, int) else (0 if exc.code is None else 1)
        if code == 2 and not isinstance(exc.code, int):
            code = EXIT_BAD_INPUT
        sys.exit(code)


if __name__ == "__main__":
    main()
