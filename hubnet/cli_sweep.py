"""The ``hubnet sweep``, ``hubnet runs`` and ``hubnet compare`` commands.

Also the options ``hubnet solve`` takes for unattended runs (``--log-file``,
``--log-format``, ``--warm-start``, ``--history``) and :func:`solve_job`,
which ``hubnet solve`` calls: the run goes through
:func:`hubnet.jobs.run_job` (folder lock, run history) and its events go to
the log file. The commands are registered on ``hubnet`` in :mod:`hubnet.cli`.

Exit codes (besides those of :mod:`hubnet.errors`): ``hubnet sweep`` exits
with :data:`hubnet.sweep.EXIT_SCENARIOS_FAILED` (6) when some scenarios have
no plan and the others were written.
"""

from __future__ import annotations

import json
import time
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any

import typer
from rich.console import Console
from rich.markup import escape
from rich.table import Table

from hubnet.cli_common import err_console, fail, switch
from hubnet.errors import EXIT_ERROR, HubnetError

if TYPE_CHECKING:
    from hubnet.compare import RunComparison
    from hubnet.solution import Solution
    from hubnet.sweep import SweepReport, SweepState

_err = err_console
_fail = fail
_out = Console(highlight=False, soft_wrap=True)
if not _out.is_terminal:  # a pipe or a log: wide tables rather than wrapped cells
    _out = Console(highlight=False, soft_wrap=True, width=200)

_HISTORY_HELP = (
    "Run history: an SQLite file or a database URL; 'off' records nothing. "
    "Default: $HUBNET_HISTORY, else ~/.hubnet/history.sqlite."
)

#: ``hubnet solve --log-file``.
LogFileOption = Annotated[
    Path | None,
    typer.Option(
        "--log-file",
        help="Append the run's messages to this file (also with --quiet), for schedulers.",
    ),
]
#: ``hubnet solve --log-format``.
LogFormatOption = Annotated[
    str,
    typer.Option("--log-format", help="Log file format: plain (text lines) or json (JSON lines)."),
]
#: ``hubnet solve --warm-start``.
WarmStartOption = Annotated[
    Path | None,
    typer.Option(
        "--warm-start",
        help="Start the solver from the hubs of an earlier run folder (its summary.json).",
    ),
]
#: ``--history`` of solve, sweep, runs and compare.
HistoryOption = Annotated[str | None, typer.Option("--history", help=_HISTORY_HELP)]


# --------------------------------------------------------------------------
# hubnet solve, unattended
# --------------------------------------------------------------------------


def solve_job(
    config: Path,
    out: Path,
    *,
    force: bool,
    overrides: Mapping[str, Any],
    say: Callable[[str], None],
    log_file: Path | None = None,
    log_format: str = "plain",
    warm_start: Path | None = None,
    history: str | None = None,
) -> tuple[Solution, Path]:
    """What ``hubnet solve`` runs: a locked, recorded run with an optional log file.

    Raises
    ------
    HubnetError
        As :func:`hubnet.jobs.run_job`; the error is written to the log first.
    """
    from hubnet.history import resolve_history
    from hubnet.jobs import JobLog, run_job, warm_start_hubs

    with JobLog(log_file, log_format) as log:
        log.event("start", f"hubnet solve {config} --out {out}", config=str(config), out=str(out))
        try:
            where = resolve_history(history)
            start = warm_start_hubs(warm_start) if warm_start is not None else None
            result = run_job(
                config,
                out,
                overrides=overrides,
                force=force,
                progress=log.tee(say),
                start_hubs=start,
                warm_start_from=warm_start,
                history=where,
            )
        except HubnetError as err:
            log.event("error", str(err), level="error", exit_code=err.exit_code)
            raise
        except KeyboardInterrupt:
            log.event("interrupted", "interrupted: nothing was written", level="error")
            raise
        except Exception as err:
            log.event("error", f"{type(err).__name__}: {err}", level="error", exit_code=EXIT_ERROR)
            raise
        rec = result.record
        log.event(
            "finished",
            f"{rec.status}: {len(rec.hubs)} hubs, cost {rec.total_cost}",
            status=rec.status,
            objective=rec.objective,
            best_bound=rec.best_bound,
            gap=rec.gap,
            hubs=list(rec.hubs),
            run_folder=str(result.run_folder),
            run_id=result.run_id,
            history_id=result.history_id,
            exit_code=0,
        )
    assert result.solution is not None and result.run_folder is not None
    return result.solution, result.run_folder


# --------------------------------------------------------------------------
# hubnet sweep
# --------------------------------------------------------------------------


class _SweepDisplay:
    """Live progress of a sweep on stderr: a bar on a terminal, one line per scenario."""

    def __init__(self, total: int, quiet: bool):
        from rich.progress import BarColumn, Progress, TextColumn

        self.quiet = quiet
        self.progress = Progress(
            TextColumn("[bold]sweep[/bold]"),
            BarColumn(),
            TextColumn("{task.fields[done]} done, {task.fields[running]} running, "),
            TextColumn("{task.fields[failed]} failed, {task.fields[queued]} queued"),
            TextColumn("[dim]{task.fields[elapsed]}[/dim]"),
            console=_err,
            disable=quiet or not _err.is_terminal,
            transient=False,
        )
        self.task = self.progress.add_task(
            "sweep", total=total, done=0, running=0, failed=0, queued=total, elapsed="0.0 s"
        )
        self._seen: set[str] = set()

    def __enter__(self) -> _SweepDisplay:
        self.progress.start()
        return self

    def __exit__(self, *exc: object) -> None:
        self.progress.stop()

    def update(self, state: SweepState) -> None:
        self.progress.update(
            self.task,
            completed=state.done + state.failed,
            done=state.done,
            running=len(state.running),
            failed=state.failed,
            queued=state.queued,
            elapsed=f"{state.elapsed:.1f} s",
        )
        o = state.last
        if self.quiet or o is None or o.name in self._seen:
            return
        self._seen.add(o.name)
        stamp = f"[dim]{state.elapsed:7.1f} s[/dim]  "
        if o.ok:
            cost = f"{o.total_cost:,.2f}" if o.total_cost is not None else "?"
            again = " (complete before: not solved again)" if o.reused else ""
            self.progress.console.print(
                f"{stamp}[green]done[/green] {escape(o.name)}: {o.status}, {len(o.hubs)} hubs, "
                f"cost {cost}{again}"
            )
        else:
            first = o.error.splitlines()[0] if o.error else ""
            self.progress.console.print(
                f"{stamp}[red]failed[/red] {escape(o.name)}: {o.status}: {escape(first)}"
            )


def _money(x: float | None) -> str:
    return "" if x is None else f"{x:,.2f}"


#: Columns of the sweep table: name, alignment, and the order in which they
#: give way on a narrow terminal (0: always shown; higher goes first).
_REPORT_COLUMNS: tuple[tuple[str, str, int], ...] = (
    ("scenario", "left", 0),
    ("status", "left", 0),
    ("hubs", "right", 2),
    ("open hubs", "left", 0),
    ("cost per day", "right", 0),
    ("vs first", "right", 4),
    ("vs first %", "right", 0),
    ("gap %", "right", 1),
    ("solve s", "right", 3),
)


def _report_table(report: SweepReport, width: int = 200) -> Table:
    """The sweep's comparison table, fitted to ``width`` characters.

    Figures are never cut short: on a narrow terminal the less needed
    columns are left out (a caption says which, and that sweep.csv has them
    all), and scenario names and hub lists wrap within their cells.
    """
    rows = []
    for row in report.rows():
        gap = row["gap"]
        pct = row["cost_change_pct"]
        rows.append(
            (
                row["scenario"],
                row["status"] + (f" x{row['attempts']}" if row["attempts"] > 1 else ""),
                "" if row["hub_count"] is None else str(row["hub_count"]),
                row["hubs"].replace(";", " "),
                _money(row["cost_per_day"]),
                "" if row["cost_change"] is None else f"{row['cost_change']:+,.2f}",
                "" if pct is None else f"{pct:+.2f}",
                "" if gap is None else f"{100 * gap:.4f}",
                "" if row["solve_seconds"] is None else f"{row['solve_seconds']:.1f}",
            )
        )
    wrapping = {"scenario": 12, "open hubs": 12}  # narrowest these may wrap to
    need = []
    for c, (name, _justify, _rank) in enumerate(_REPORT_COLUMNS):
        widest = max([len(name)] + [len(r[c]) for r in rows])
        need.append(min(widest, wrapping.get(name, widest)) + 3)  # padding and border
    shown = list(range(len(_REPORT_COLUMNS)))
    for rank in sorted({r for _n, _j, r in _REPORT_COLUMNS if r}, reverse=True):
        if sum(need[c] for c in shown) + 1 <= width:
            break
        shown = [c for c in shown if _REPORT_COLUMNS[c][2] != rank]
    left_out = [_REPORT_COLUMNS[c][0] for c in range(len(_REPORT_COLUMNS)) if c not in shown]
    table = Table(
        title=f"sweep {report.sweep}: {len(report.outcomes)} scenarios",
        title_justify="left",
        caption=(
            f"left out for the terminal's width: {', '.join(left_out)} (all in sweep.csv)"
            if left_out
            else None
        ),
        caption_justify="left",
    )
    for c in shown:
        name, justify, _rank = _REPORT_COLUMNS[c]
        if name in wrapping:
            table.add_column(name, justify=justify, overflow="fold")  # type: ignore[arg-type]
        else:
            table.add_column(name, justify=justify, no_wrap=True, min_width=need[c] - 3)  # type: ignore[arg-type]
    for r in rows:
        table.add_row(*(escape(r[c]) for c in shown))
    return table


def sweep_command(
    sweep_file: Annotated[
        Path, typer.Argument(help="Sweep file (TOML): base config and scenarios.")
    ],
    out: Annotated[
        Path | None,
        typer.Option("--out", "-o", help="Folder for the run folders; default runs/<sweep name>."),
    ] = None,
    workers: Annotated[
        int | None,
        typer.Option(
            "--workers",
            "-w",
            min=0,
            help="Worker processes of the local Dask cluster (default: one per CPU); "
            "0 runs the scenarios one after another in this process.",
        ),
    ] = None,
    scheduler: Annotated[
        str | None,
        typer.Option(
            "--scheduler",
            help="Address of an existing Dask scheduler (tcp://host:8786) instead of a "
            "local cluster; its workers must see the files and the history.",
        ),
    ] = None,
    history: HistoryOption = None,
    force: Annotated[bool, switch("--force", help="Replace run folders that exist.")] = False,
    resume: Annotated[
        bool,
        switch("--resume", help="Keep complete run folders; solve only the others."),
    ] = False,
    in_order: Annotated[
        bool,
        switch(
            "--in-order",
            help="Start the scenarios in the sweep file's order; by default the ones the "
            "run history says took longest start first, which shortens the sweep.",
        ),
    ] = False,
    quiet: Annotated[
        bool, switch("--quiet", "-q", help="Print only errors and the table.")
    ] = False,
    verbose: Annotated[bool, switch("--verbose", "-v", help="Show tracebacks.")] = False,
) -> None:
    """Solve every scenario of a sweep file in parallel and compare them.

    Every scenario is checked before any is solved. Each is solved into its
    own run folder and recorded in the run history; one failing never stops
    the others. The comparison table is printed and written to sweep.csv and
    sweep.json in the --out folder. Exit code 6 when some scenarios failed.
    """
    from hubnet.history import resolve_history
    from hubnet.scenarios import check_sweep, load_sweep
    from hubnet.sweep import ClusterStart, plan_tasks, run_sweep

    if force and resume:
        raise typer.BadParameter("give --force or --resume, not both", param_hint="--resume")
    t0 = time.perf_counter()
    starting: ClusterStart | None = None
    try:
        where = resolve_history(history)
        try:
            sweep = load_sweep(sweep_file)
        except HubnetError:
            load_sweep(sweep_file, check=True)  # every problem, of form and of data, at once
            raise
        folder = out if out is not None else Path("runs") / sweep.name
        plan_tasks(sweep, folder, history=where, force=force, resume=resume)  # folders free?
        if scheduler is None and workers != 0:
            starting = ClusterStart(workers)  # starts while the scenarios are checked
        check_sweep(sweep)
    except BaseException as err:
        if starting is not None:
            starting.close()
        if not isinstance(err, HubnetError):
            raise
        _fail(err, verbose)
        return
    if not quiet:
        _err.print(
            f"[dim]{time.perf_counter() - t0:7.1f} s[/dim]  checked {len(sweep.scenarios)} "
            f"scenarios of {sweep.name}; solving them into {folder}"
        )
    display = _SweepDisplay(len(sweep.scenarios), quiet)
    try:
        with display:
            report = run_sweep(
                sweep,
                folder,
                workers=workers,
                scheduler=scheduler,
                history=where,
                force=force,
                resume=resume,
                checked=True,
                on_update=display.update,
                client=starting.client() if starting is not None else None,
                longest=not in_order,
            )
    except HubnetError as err:
        _fail(err, verbose)
        return
    except KeyboardInterrupt:
        _err.print("interrupted: finished run folders are kept; carry on with --resume")
        raise typer.Exit(130) from None
    finally:
        if starting is not None:
            starting.close()
    _out.print(_report_table(report, _out.width))
    if not quiet:
        failed = len(report.failed)
        _err.print(
            f"{len(report.outcomes) - failed} scenarios solved, {failed} failed, in "
            f"{report.seconds:.1f} s on {report.workers}; wrote {folder / 'sweep.csv'}"
        )
    raise typer.Exit(report.exit_code)


# --------------------------------------------------------------------------
# hubnet runs
# --------------------------------------------------------------------------


def runs_command(
    scenario: Annotated[
        str | None,
        typer.Option("--scenario", "-s", help="Only this scenario ('*' matches any text)."),
    ] = None,
    status: Annotated[
        str | None,
        typer.Option(
            "--status",
            help="Only runs with this status: optimal, time_limit, infeasible, no_solution, error.",
        ),
    ] = None,
    sweep: Annotated[
        str | None, typer.Option("--sweep", help="Only the runs of this sweep.")
    ] = None,
    last: Annotated[int, typer.Option("--last", "-n", min=1, help="Show the N latest runs.")] = 20,
    history: HistoryOption = None,
    as_json: Annotated[bool, switch("--json", help="Print JSON lines instead of a table.")] = False,
    verbose: Annotated[bool, switch("--verbose", "-v", help="Show tracebacks.")] = False,
) -> None:
    """List recorded runs, latest last: status, cost, hubs, gap, time and run folder."""
    from dataclasses import asdict

    from hubnet.history import RUN_STATUSES, History, resolve_history

    if status is not None and status not in RUN_STATUSES:
        raise typer.BadParameter(
            f"{status!r} is not a run status; use one of {', '.join(RUN_STATUSES)}",
            param_hint="--status",
        )
    where = resolve_history(history)
    if where is None:
        _err.print("the run history is off (--history off or HUBNET_HISTORY=off)")
        raise typer.Exit(0)
    try:
        with History(where) as h:
            rows = h.runs(scenario=scenario, status=status, sweep=sweep, last=last)
    except HubnetError as err:
        _fail(err, verbose)
        return
    if as_json:
        for r in rows:
            _out.print(json.dumps(asdict(r), default=str, ensure_ascii=False), markup=False)
        raise typer.Exit(0)
    table = Table(title=f"{len(rows)} runs ({where})", title_justify="left")
    for name, justify in (
        ("id", "right"),
        ("finished (UTC)", "left"),
        ("scenario", "left"),
        ("sweep", "left"),
        ("status", "left"),
        ("cost per day", "right"),
        ("hubs", "left"),
        ("gap %", "right"),
        ("solve s", "right"),
        ("run folder", "left"),
    ):
        table.add_column(name, justify=justify, overflow="fold")  # type: ignore[arg-type]
    for r in rows:
        table.add_row(
            str(r.id),
            r.finished_at.replace("T", " ")[:19],
            escape(r.scenario),
            escape(r.sweep),
            r.status,
            _money(r.total_cost),
            escape(" ".join(r.hubs)),
            "" if r.gap is None else f"{100 * r.gap:.4f}",
            "" if r.solve_seconds is None else f"{r.solve_seconds:.1f}",
            escape(r.run_folder or (r.error.splitlines()[0][:60] if r.error else "")),
        )
    _out.print(table)


# --------------------------------------------------------------------------
# hubnet compare
# --------------------------------------------------------------------------


def _show(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return f"{value:,.4f}".rstrip("0").rstrip(".") if abs(value) < 1 else f"{value:,.2f}"
    if isinstance(value, int) and not isinstance(value, bool):
        return f"{value:,}"
    return str(value)


def _print_comparison(c: RunComparison, max_legs: int) -> None:
    a, b = c.a, c.b
    _out.print(f"[bold]A[/bold] {escape(a.label)} (scenario {escape(a.scenario)})")
    _out.print(f"[bold]B[/bold] {escape(b.label)} (scenario {escape(b.scenario)})")
    figures = Table(title="figures", title_justify="left")
    for name in ("figure", "A", "B", "B - A", "change %"):
        figures.add_column(name, justify="left" if name == "figure" else "right")
    for f in c.figures:
        if f.a is None and f.b is None:
            continue
        figures.add_row(
            f.name,
            _show(f.a),
            _show(f.b),
            "" if f.diff is None else f"{f.diff:+,.2f}" if abs(f.diff) >= 1 else f"{f.diff:+.6g}",
            "" if f.pct is None else f"{f.pct:+.2f}",
        )
    _out.print(figures)
    _out.print(f"hubs opened: {', '.join(c.hubs_opened) or 'none'}", markup=False)
    _out.print(f"hubs closed: {', '.join(c.hubs_closed) or 'none'}", markup=False)
    _out.print(f"hubs kept: {', '.join(c.hubs_kept) or 'none'}", markup=False)
    if c.moved is not None:
        if c.moved:
            moves = Table(title=f"{len(c.moved)} terminals changed hub", title_justify="left")
            for name in ("terminal", "hub in A", "hub in B"):
                moves.add_column(name)
            for m in c.moved:
                moves.add_row(
                    escape(m.terminal),
                    escape(" ".join(m.before) or "-"),
                    escape(" ".join(m.after) or "-"),
                )
            _out.print(moves)
        else:
            _out.print("terminals that changed hub: none")
    if c.legs_added is not None and c.legs_removed is not None:
        for word, legs in (("added", c.legs_added), ("removed", c.legs_removed)):
            shown = ", ".join(f"{t} {o}>{d}" for t, o, d in legs[:max_legs])
            more = f", ... ({len(legs) - max_legs} more)" if len(legs) > max_legs else ""
            _out.print(
                f"legs {word}: {len(legs)}" + (f": {shown}{more}" if legs else ""), markup=False
            )
    if c.inputs:
        inputs = Table(title="inputs", title_justify="left")
        for name in ("input", "same", "A", "B"):
            inputs.add_column(name)
        for i in c.inputs:
            short_a, short_b = (i.a[:12], i.b[:12]) if len(i.a) == 64 else (i.a, i.b)
            inputs.add_row(i.name, "yes" if i.same else "[bold]differs[/bold]", short_a, short_b)
        _out.print(inputs)
    for s in c.settings:
        _out.print(f"setting {s.name}: {_show(s.a) or '-'} -> {_show(s.b) or '-'}", markup=False)
    for note in c.notes:
        _out.print(f"[dim]note: {escape(note)}[/dim]")


def compare_command(
    run_a: Annotated[str, typer.Argument(help="Run A: a run folder, a history id or a run id.")],
    run_b: Annotated[str, typer.Argument(help="Run B, compared with A.")],
    history: HistoryOption = None,
    as_json: Annotated[bool, switch("--json", help="Print JSON instead of tables.")] = False,
    max_legs: Annotated[
        int, typer.Option("--max-legs", min=0, help="Legs listed per change (added, removed).")
    ] = 20,
    verbose: Annotated[bool, switch("--verbose", "-v", help="Show tracebacks.")] = False,
) -> None:
    """Say what changed between two runs: figures, hubs, terminals, legs and inputs."""
    from hubnet.compare import compare_runs, find_run
    from hubnet.history import resolve_history

    try:
        where = resolve_history(history)
        c = compare_runs(find_run(run_a, where), find_run(run_b, where))
    except HubnetError as err:
        _fail(err, verbose)
        return
    if as_json:
        _out.print(json.dumps(c.to_json(), indent=2, default=str, ensure_ascii=False), markup=False)
        return
    _print_comparison(c, max_legs)
