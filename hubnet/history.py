"""Run history: one row per solve, in an embedded SQLite file or a server database.

Every ``hubnet solve`` and every scenario of a ``hubnet sweep`` adds one row:
the scenario, the hash of its effective settings and of every input file,
the hubnet and solver versions, the solver status, objective, bound and gap,
the headline figures, timings, the run folder and the start and end times.
``hubnet runs`` lists the rows and ``hubnet compare`` reads them.

Where the history lives
-----------------------
By default the SQLite file ``~/.hubnet/history.sqlite``; the environment
variable ``HUBNET_HISTORY`` or the ``--history`` option names another file,
or a SQLAlchemy database URL (``postgresql://user@host/db``,
``sqlite:////abs/path.sqlite``) for a database shared by a cluster.
``HUBNET_HISTORY=off`` turns recording off.

Safety
------
SQLite runs in write-ahead-log mode with full sync, and each row is written
in one transaction, so a process killed at any moment leaves the database
consistent (the row is there in full or not at all). Each run carries a
unique ``run_id``, which the database enforces: recording the same run
twice (a retried task) keeps one row.
"""

from __future__ import annotations

import hashlib
import json
import os
import socket
import time
from collections.abc import Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import asdict, dataclass, field, fields
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from hubnet.config import BUILT_IN_HOURS_RULES, ScenarioConfig
from hubnet.errors import HubnetError

#: Environment variable naming the history file or URL (``off`` disables it).
HISTORY_ENV = "HUBNET_HISTORY"
#: The history file used when neither ``--history`` nor the variable is set.
DEFAULT_HISTORY = Path("~/.hubnet/history.sqlite")
#: Values of ``HUBNET_HISTORY`` / ``--history`` that turn recording off.
DISABLED = ("off", "none", "no", "false", "0")
#: File written into every run folder by :func:`hubnet.jobs.run_job`.
RUN_INFO_FILE = "run.json"
#: Schema version stored in the ``hubnet_meta`` table.
SCHEMA_VERSION = 1
#: SQLite waits this long (ms) for another writer before giving up.
BUSY_TIMEOUT_MS = 60_000


class HistoryError(HubnetError):
    """The run history cannot be opened, read or written."""


# --------------------------------------------------------------------------
# Locations, hashes, versions
# --------------------------------------------------------------------------


def resolve_history(option: str | Path | None = None) -> str | None:
    """Where runs are recorded: a SQLAlchemy URL, or ``None`` when recording is off.

    Parameters
    ----------
    option
        The ``--history`` value (a file path or a URL), or ``None`` to use
        ``HUBNET_HISTORY`` and then ``~/.hubnet/history.sqlite``.

    Examples
    --------
    >>> resolve_history("off") is None
    True
    >>> resolve_history("/tmp/h.sqlite")
    'sqlite:////tmp/h.sqlite'
    """
    value = str(option) if option is not None else os.environ.get(HISTORY_ENV, "")
    if value.strip().lower() in DISABLED:
        return None
    if not value.strip():
        value = str(DEFAULT_HISTORY)
    return history_url(value)


def history_url(location: str | Path) -> str:
    """A SQLAlchemy URL for a file path (SQLite) or a URL given as is."""
    text = str(location)
    if "://" in text:
        return text
    path = Path(text).expanduser().absolute()
    return f"sqlite:///{path}"


def sha256_file(path: str | Path, chunk: int = 1 << 20) -> str:
    """Hex SHA-256 of a file's bytes."""
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        while block := fh.read(chunk):
            digest.update(block)
    return digest.hexdigest()


def input_hashes(config: ScenarioConfig) -> dict[str, dict[str, str]]:
    """SHA-256 of every input file of a scenario, by role.

    Returns
    -------
    dict
        ``{"sites": {"path": ..., "sha256": ...}, "demand": ..., "distances": ...}``
        (``distances`` only when a matrix file is given). A freight scenario
        (``inputs.vehicles`` set) adds ``vehicles``, ``fuels`` when
        ``inputs.fuels`` names a fuel factor table, and ``hours_rules`` when
        ``hours.rules`` names a rule file rather than a built-in rule set. A
        file that cannot be read gets ``sha256 = "unreadable"``.
    """
    files = {"sites": config.inputs.sites, "demand": config.inputs.demand}
    if config.inputs.distances is not None:
        files["distances"] = config.inputs.distances
    if config.inputs.vehicles is not None:
        files["vehicles"] = config.inputs.vehicles
        if config.inputs.fuels is not None:
            files["fuels"] = config.inputs.fuels
        rules = _rules_file(config)
        if rules is not None:
            files["hours_rules"] = rules
    out: dict[str, dict[str, str]] = {}
    for role, path in files.items():
        try:
            digest = sha256_file(path)
        except OSError:
            digest = "unreadable"
        out[role] = {"path": str(Path(path).resolve()), "sha256": digest}
    return out


def _rules_file(config: ScenarioConfig) -> Path | None:
    """The drivers' hours rule file of a config, ``None`` for a built-in rule set."""
    rules = config.freight.hours.rules
    if rules.strip().lower() in BUILT_IN_HOURS_RULES:
        return None
    return Path(rules)


def settings_dict(config: ScenarioConfig, edits: Mapping[str, Any] | None = None) -> dict[str, Any]:
    """The settings that decide a plan, apart from the input files' contents.

    Names, descriptions and file paths are left out (the files are hashed
    separately by :func:`input_hashes`), so two runs of the same settings
    on the same data hash alike wherever their files live. A freight
    scenario (``inputs.vehicles`` set) adds ``freight``: every freight
    parameter (service times, drivers' hours, costs of time and carbon),
    with a rule file's path replaced by ``"file"``.
    """
    from hubnet.report.summary import jsonable

    inp = config.inputs
    settings: dict[str, Any] = {
        "inputs": {
            "volume_unit": inp.volume_unit,
            "allow_same_site_demand": inp.allow_same_site_demand,
            "sheet": inp.sheet,
        },
        "distances": asdict(config.distances),
        "model": asdict(config.model),
        "solver": asdict(config.solver),
        "edits": dict(edits or {}),
    }
    if inp.vehicles is not None:
        freight = asdict(config.freight)
        if _rules_file(config) is not None:
            freight["hours"]["rules"] = "file"
        settings["freight"] = freight
    return jsonable(settings)


def config_hash(config: ScenarioConfig, edits: Mapping[str, Any] | None = None) -> str:
    """Hex SHA-256 of :func:`settings_dict` as canonical JSON."""
    text = json.dumps(settings_dict(config, edits), sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()


def solver_versions() -> dict[str, str]:
    """Versions of the solver packages: ``highspy`` and ``pulp`` (which bundles CBC)."""
    import importlib.metadata

    out: dict[str, str] = {}
    for package in ("highspy", "pulp"):
        try:
            out[package] = importlib.metadata.version(package)
        except importlib.metadata.PackageNotFoundError:
            out[package] = "absent"
    return out


def utc_now() -> str:
    """The current time as ISO 8601 in UTC with milliseconds (sorts as text)."""
    return datetime.now(UTC).isoformat(timespec="milliseconds").replace("+00:00", "Z")


# --------------------------------------------------------------------------
# One run
# --------------------------------------------------------------------------


#: Every status a recorded run can have.
RUN_STATUSES: tuple[str, ...] = ("optimal", "time_limit", "infeasible", "no_solution", "error")


@dataclass(frozen=True)
class RunRecord:
    """One row of the run history.

    Attributes
    ----------
    run_id
        Unique id of the run (also in the run folder's ``run.json``).
    scenario, sweep
        Scenario name, and the sweep it belonged to (``""`` for a single solve).
    status
        ``optimal``, ``time_limit`` (a plan, not proven optimal),
        ``infeasible``, ``no_solution`` or ``error``.
    objective, best_bound, gap
        Solver figures (currency per day; gap as a fraction), when known.
    total_cost
        The re-priced plan's cost, currency per day.
    hub_count, hubs
        Open hubs (ids).
    kpis
        Headline figures: ``costs`` by component, ``total_volume``,
        ``unit_km``, ``legs_by_tier``, ``od_pairs``, ``volume_unit``; for
        a freight run also :data:`FREIGHT_KPIS` (vehicles, vehicle-km per
        day, average and longest transit hours, on-time share, CO2e kg per
        day).
    config_hash, inputs
        Hash of the settings (:func:`config_hash`) and of every input file
        (:func:`input_hashes`).
    hubnet_version, solver, solver_versions
        Software that made the plan.
    build_seconds, solve_seconds, wall_seconds
        Model build (with the starting-plan search), solver and whole-run
        wall times, seconds.
    run_folder
        Absolute path of the run folder (``""`` when none was written).
    started_at, finished_at
        ISO 8601 UTC times.
    host, pid
        Where the run ran.
    error, exit_code
        The error message of a failed run, and the command's exit code.
    id
        Row number in the database (``None`` before recording).
    """

    run_id: str
    scenario: str
    status: str
    sweep: str = ""
    objective: float | None = None
    best_bound: float | None = None
    gap: float | None = None
    total_cost: float | None = None
    hub_count: int | None = None
    hubs: tuple[str, ...] = ()
    kpis: Mapping[str, Any] = field(default_factory=dict)
    config_hash: str = ""
    inputs: Mapping[str, Mapping[str, str]] = field(default_factory=dict)
    hubnet_version: str = ""
    solver: str = ""
    solver_versions: Mapping[str, str] = field(default_factory=dict)
    build_seconds: float | None = None
    solve_seconds: float | None = None
    wall_seconds: float | None = None
    run_folder: str = ""
    started_at: str = ""
    finished_at: str = ""
    host: str = ""
    pid: int | None = None
    error: str = ""
    exit_code: int = 0
    id: int | None = None

    def to_row(self) -> dict[str, Any]:
        """Column values for the ``runs`` table (JSON text for nested values)."""
        row = {f.name: getattr(self, f.name) for f in fields(self) if f.name != "id"}
        row["hubs"] = ";".join(self.hubs)
        for key in ("kpis", "inputs", "solver_versions"):
            row[key] = json.dumps(dict(row[key]), sort_keys=True)
        return row

    @classmethod
    def from_row(cls, row: Mapping[str, Any]) -> RunRecord:
        """Rebuild a record from a database row."""
        values = dict(row)
        values["hubs"] = tuple(h for h in (values.get("hubs") or "").split(";") if h)
        for key in ("kpis", "inputs", "solver_versions"):
            values[key] = json.loads(values.get(key) or "{}")
        names = {f.name for f in fields(cls)}
        return cls(**{k: v for k, v in values.items() if k in names})


def run_info(
    *,
    run_id: str,
    config: ScenarioConfig,
    sweep: str = "",
    overrides: Mapping[str, Any] | None = None,
    edits: Mapping[str, Any] | None = None,
    warm_start: Mapping[str, Any] | None = None,
    started_at: str | None = None,
) -> dict[str, Any]:
    """What went into a run, for its folder's ``run.json``.

    Timings and outcome are not included; they are in ``summary.json``.
    """
    from hubnet.report.summary import hubnet_version, jsonable

    return jsonable(
        {
            "run_id": run_id,
            "scenario": config.name,
            "sweep": sweep,
            "config_hash": config_hash(config, edits),
            "inputs": input_hashes(config),
            "settings": settings_dict(config, edits),
            "overrides": dict(overrides or {}),
            "edits": dict(edits or {}),
            "warm_start": dict(warm_start) if warm_start else None,
            "hubnet_version": hubnet_version(),
            "solver_versions": solver_versions(),
            "started_at": started_at or utc_now(),
            "host": socket.gethostname(),
            "pid": os.getpid(),
        }
    )


#: Key figures of freight runs kept in the history when the summary has them.
FREIGHT_KPIS: tuple[str, ...] = (
    "vehicles",
    "vehicle_km",
    "avg_transit_h",
    "max_transit_h",
    "service_level",
    "co2e_kg",
)


def _kpis(summary: Mapping[str, Any]) -> dict[str, Any]:
    keys = ("costs", "total_volume", "unit_km", "legs_by_tier", "od_pairs", "volume_unit")
    out = {k: summary.get(k) for k in keys}
    out.update({k: summary[k] for k in FREIGHT_KPIS if k in summary})
    return out


def read_json(path: Path) -> dict[str, Any]:
    """Read a JSON object from a file; :class:`HistoryError` naming the file if it fails."""
    try:
        value = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError) as err:
        raise HistoryError(f"{path}: cannot read: {err}") from None
    if not isinstance(value, dict):
        raise HistoryError(f"{path}: expected a JSON object")
    return value


def record_from_folder(folder: str | Path, *, finished_at: str | None = None) -> RunRecord:
    """Build the history row of a completed run from its folder.

    Reads ``run.json`` (what went in) and ``summary.json`` (what came out).

    Raises
    ------
    HistoryError
        When either file is missing or unreadable.
    """
    folder = Path(folder).absolute()
    info = read_json(folder / RUN_INFO_FILE)
    summary = read_json(folder / "summary.json")
    finished = finished_at or utc_now()
    return RunRecord(
        run_id=str(info["run_id"]),
        scenario=str(summary.get("scenario") or info.get("scenario", "")),
        sweep=str(info.get("sweep") or ""),
        status=str(summary.get("status", "error")),
        objective=summary.get("objective"),
        best_bound=summary.get("best_bound"),
        gap=summary.get("gap"),
        total_cost=(summary.get("costs") or {}).get("total"),
        hub_count=summary.get("hub_count"),
        hubs=tuple(summary.get("hubs") or ()),
        kpis=_kpis(summary),
        config_hash=str(info.get("config_hash", "")),
        inputs=info.get("inputs") or {},
        hubnet_version=str(summary.get("hubnet_version", "")),
        solver=str(summary.get("solver", "")),
        solver_versions=info.get("solver_versions") or {},
        build_seconds=_build_and_start(summary),
        solve_seconds=summary.get("solve_seconds"),
        wall_seconds=_seconds_between(str(info.get("started_at", "")), finished),
        run_folder=str(folder),
        started_at=str(info.get("started_at", "")),
        finished_at=finished,
        host=str(info.get("host", "")),
        pid=info.get("pid"),
    )


def failure_record(info: Mapping[str, Any], status: str, error: str, exit_code: int) -> RunRecord:
    """The history row of a run that produced no plan (infeasible, no plan, error)."""
    finished = utc_now()
    return RunRecord(
        run_id=str(info["run_id"]),
        scenario=str(info.get("scenario", "")),
        sweep=str(info.get("sweep") or ""),
        status=status,
        config_hash=str(info.get("config_hash", "")),
        inputs=info.get("inputs") or {},
        hubnet_version=str(info.get("hubnet_version", "")),
        solver_versions=info.get("solver_versions") or {},
        wall_seconds=_seconds_between(str(info.get("started_at", "")), finished),
        started_at=str(info.get("started_at", "")),
        finished_at=finished,
        host=str(info.get("host", "")),
        pid=info.get("pid"),
        error=error,
        exit_code=exit_code,
    )


def _build_and_start(summary: Mapping[str, Any]) -> float | None:
    """Build plus starting-plan seconds of a summary.

    Summaries written before ``start_seconds`` existed have none: their
    build time stands alone.
    """
    build = summary.get("build_seconds")
    if build is None:
        return None
    return float(build) + float(summary.get("start_seconds") or 0.0)


def _seconds_between(start: str, end: str) -> float | None:
    try:
        a = datetime.fromisoformat(start.replace("Z", "+00:00"))
        b = datetime.fromisoformat(end.replace("Z", "+00:00"))
    except ValueError:
        return None
    return round((b - a).total_seconds(), 3)


# --------------------------------------------------------------------------
# The database
# --------------------------------------------------------------------------


def _tables() -> Any:
    import sqlalchemy as sa

    meta = sa.MetaData()
    sa.Table(
        "hubnet_meta",
        meta,
        sa.Column("key", sa.String(64), primary_key=True),
        sa.Column("value", sa.Text, nullable=False),
    )
    sa.Table(
        "runs",
        meta,
        sa.Column("id", sa.Integer, primary_key=True, autoincrement=True),
        sa.Column("run_id", sa.String(100), nullable=False, unique=True),
        sa.Column("scenario", sa.String(200), nullable=False, index=True),
        sa.Column("sweep", sa.String(200), nullable=False, default=""),
        sa.Column("status", sa.String(32), nullable=False, index=True),
        sa.Column("objective", sa.Float),
        sa.Column("best_bound", sa.Float),
        sa.Column("gap", sa.Float),
        sa.Column("total_cost", sa.Float),
        sa.Column("hub_count", sa.Integer),
        sa.Column("hubs", sa.Text, nullable=False, default=""),
        sa.Column("kpis", sa.Text, nullable=False, default="{}"),
        sa.Column("config_hash", sa.String(64), nullable=False, default=""),
        sa.Column("inputs", sa.Text, nullable=False, default="{}"),
        sa.Column("hubnet_version", sa.String(40), nullable=False, default=""),
        sa.Column("solver", sa.String(40), nullable=False, default=""),
        sa.Column("solver_versions", sa.Text, nullable=False, default="{}"),
        sa.Column("build_seconds", sa.Float),
        sa.Column("solve_seconds", sa.Float),
        sa.Column("wall_seconds", sa.Float),
        sa.Column("run_folder", sa.Text, nullable=False, default=""),
        sa.Column("started_at", sa.String(40), nullable=False, default=""),
        sa.Column("finished_at", sa.String(40), nullable=False, default="", index=True),
        sa.Column("host", sa.String(200), nullable=False, default=""),
        sa.Column("pid", sa.Integer),
        sa.Column("error", sa.Text, nullable=False, default=""),
        sa.Column("exit_code", sa.Integer, nullable=False, default=0),
    )
    return meta


class History:
    """The run history database.

    Parameters
    ----------
    location
        A SQLAlchemy URL, or a file path (an SQLite file, created with its
        folder when missing).

    Raises
    ------
    HistoryError
        When SQLAlchemy is missing or the database cannot be opened.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> h = History(pathlib.Path(tempfile.mkdtemp()) / "h.sqlite")
    >>> h.record(RunRecord(run_id="r1", scenario="demo", status="optimal"))
    1
    >>> h.record(RunRecord(run_id="r1", scenario="demo", status="optimal")) is None
    True
    >>> [r.scenario for r in h.runs()]
    ['demo']
    >>> h.close()
    """

    def __init__(self, location: str | Path):
        try:
            import sqlalchemy as sa
        except ImportError as err:  # pragma: no cover - a declared dependency
            raise HistoryError("the run history needs SQLAlchemy: pip install sqlalchemy") from err
        self.url = history_url(location)
        self._sa = sa
        try:
            url = sa.engine.make_url(self.url)
        except sa.exc.ArgumentError as err:
            raise HistoryError(f"run history {self.url!r}: not a database URL: {err}") from None
        self.is_sqlite = url.get_backend_name() == "sqlite"
        kwargs: dict[str, Any] = {}
        if self.is_sqlite:
            database = url.database or ""
            if database and database != ":memory:":
                try:
                    Path(database).expanduser().parent.mkdir(parents=True, exist_ok=True)
                except OSError as err:
                    raise HistoryError(f"run history {self.url!r}: cannot create: {err}") from None
            kwargs["connect_args"] = {"timeout": BUSY_TIMEOUT_MS / 1000}
            kwargs["poolclass"] = sa.pool.NullPool
        try:
            self.engine = sa.create_engine(url, **kwargs)
        except Exception as err:  # a missing driver, a bad option
            raise HistoryError(f"run history {self.url!r}: cannot open: {err}") from None
        if self.is_sqlite:
            sa.event.listen(self.engine, "connect", _sqlite_pragmas)
        self._meta = _tables()
        self._runs = self._meta.tables["runs"]
        self._create()

    # -- setup ---------------------------------------------------------------

    def _create(self) -> None:
        sa = self._sa
        for attempt in range(5):  # two processes may create the tables at once
            try:
                self._meta.create_all(self.engine, checkfirst=True)
                with self.engine.begin() as conn:
                    meta = self._meta.tables["hubnet_meta"]
                    have = conn.execute(
                        sa.select(meta.c.value).where(meta.c.key == "schema_version")
                    ).scalar()
                    if have is None:
                        conn.execute(
                            meta.insert().values(key="schema_version", value=str(SCHEMA_VERSION))
                        )
                    elif int(have) > SCHEMA_VERSION:
                        raise HistoryError(
                            f"run history {self.url!r} has schema version {have}, newer than "
                            f"this hubnet understands ({SCHEMA_VERSION}): upgrade hubnet"
                        )
                return
            except (sa.exc.IntegrityError, sa.exc.OperationalError) as err:
                if attempt == 4:
                    raise HistoryError(f"run history {self.url!r}: cannot set up: {err}") from None
                time.sleep(0.1 * (attempt + 1))

    @contextmanager
    def _begin(self) -> Iterator[Any]:
        sa = self._sa
        try:
            with self.engine.begin() as conn:
                yield conn
        except sa.exc.SQLAlchemyError as err:
            raise HistoryError(f"run history {self.url!r}: {err}") from None

    # -- writing -------------------------------------------------------------

    def record(self, run: RunRecord) -> int | None:
        """Add one run in one transaction.

        Returns
        -------
        int or None
            The new row's id, or ``None`` when a row with the same
            ``run_id`` is already recorded (nothing is changed).
        """
        sa = self._sa
        row = run.to_row()
        try:
            with self.engine.begin() as conn:
                result = conn.execute(self._runs.insert().values(**row))
                key = result.inserted_primary_key
                return int(key[0]) if key else None
        except sa.exc.IntegrityError:
            if self.get_run_id(run.run_id) is not None:
                return None
            raise HistoryError(
                f"run history {self.url!r}: cannot record run {run.run_id}"
            ) from None
        except sa.exc.SQLAlchemyError as err:
            raise HistoryError(f"run history {self.url!r}: cannot record: {err}") from None

    # -- reading -------------------------------------------------------------

    def get(self, row_id: int) -> RunRecord | None:
        """The run with this row id, or ``None``."""
        with self._begin() as conn:
            row = conn.execute(self._runs.select().where(self._runs.c.id == row_id)).mappings()
            found = row.first()
        return RunRecord.from_row(found) if found is not None else None

    def get_run_id(self, run_id: str) -> RunRecord | None:
        """The run with this ``run_id``, or ``None``."""
        with self._begin() as conn:
            row = conn.execute(self._runs.select().where(self._runs.c.run_id == run_id))
            found = row.mappings().first()
        return RunRecord.from_row(found) if found is not None else None

    def runs(
        self,
        *,
        scenario: str | None = None,
        status: str | Sequence[str] | None = None,
        sweep: str | None = None,
        last: int | None = None,
    ) -> list[RunRecord]:
        """Recorded runs, oldest first.

        Parameters
        ----------
        scenario
            Keep this scenario only; ``*`` and ``?`` match any text / one
            character (``close-*``).
        status
            Keep runs with this status (or any of these).
        sweep
            Keep the runs of this sweep.
        last
            Keep only the ``last`` most recent of the matching runs.
        """
        c = self._runs.c
        query = self._runs.select()
        if scenario is not None:
            if "*" in scenario or "?" in scenario:
                pattern = scenario.replace("%", r"\%").replace("_", r"\_")
                pattern = pattern.replace("*", "%").replace("?", "_")
                query = query.where(c.scenario.like(pattern, escape="\\"))
            else:
                query = query.where(c.scenario == scenario)
        if status is not None:
            wanted = [status] if isinstance(status, str) else list(status)
            query = query.where(c.status.in_(wanted))
        if sweep is not None:
            query = query.where(c.sweep == sweep)
        query = query.order_by(c.id.desc())
        if last is not None:
            query = query.limit(last)
        with self._begin() as conn:
            rows = [RunRecord.from_row(r) for r in conn.execute(query).mappings()]
        return rows[::-1]

    def count(self) -> int:
        """Number of recorded runs."""
        sa = self._sa
        with self._begin() as conn:
            return int(conn.execute(sa.select(sa.func.count()).select_from(self._runs)).scalar())

    def close(self) -> None:
        """Release the database connections."""
        self.engine.dispose()

    def __enter__(self) -> History:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def _sqlite_pragmas(dbapi_connection: Any, _record: Any) -> None:
    """WAL journal and full sync on every SQLite connection: safe against a kill."""
    cur = dbapi_connection.cursor()
    cur.execute("PRAGMA journal_mode=WAL")
    cur.execute("PRAGMA synchronous=FULL")
    cur.execute(f"PRAGMA busy_timeout={BUSY_TIMEOUT_MS}")
    cur.close()


def record_run(location: str | Path | None, run: RunRecord) -> int | None:
    """Record one run in the history at ``location`` (a no-op when ``None``)."""
    if location is None:
        return None
    with History(location) as history:
        return history.record(run)
