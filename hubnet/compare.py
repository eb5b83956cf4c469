"""What changed between two runs: figures, hubs, allocation, legs and inputs.

A run is named by its run folder, or by its row id or run id in the run
history. :func:`compare_runs` reads both runs' ``summary.json``,
``hubs.csv``, ``legs.csv`` and ``run.json`` (falling back to the history row
for the figures when a run folder is gone) and reports:

- headline figures side by side, with the difference and the change in %;
- hubs opened and closed (in B and not in A, and the other way round);
- terminals whose hub changed (single allocation: the hub each terminal is
  allocated to; multiple allocation: the set of hubs its volume is first
  sorted at), from the ``terminal_ids`` column of ``hubs.csv``;
- legs added and removed (tier, from, to), from ``legs.csv``;
- which inputs differ: the hash of the settings, the settings that differ,
  and the SHA-256 of every input file, plus the software versions.
"""

from __future__ import annotations

import csv
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from hubnet.errors import InputError, Problem
from hubnet.history import RUN_INFO_FILE, History, RunRecord, read_json


@dataclass(frozen=True)
class RunRef:
    """One side of a comparison, as found.

    Attributes
    ----------
    label
        How the user named it.
    folder
        The run folder, when it exists.
    summary
        Its ``summary.json`` (``None`` when the folder is gone).
    info
        Its ``run.json`` (``None`` for a folder written without one).
    record
        Its history row, when recorded.
    """

    label: str
    folder: Path | None
    summary: Mapping[str, Any] | None
    info: Mapping[str, Any] | None
    record: RunRecord | None

    @property
    def scenario(self) -> str:
        """Scenario name."""
        if self.summary is not None:
            return str(self.summary.get("scenario", ""))
        return self.record.scenario if self.record is not None else ""

    @property
    def hubs(self) -> tuple[str, ...]:
        """Open hubs."""
        if self.summary is not None:
            return tuple(self.summary.get("hubs") or ())
        return tuple(self.record.hubs) if self.record is not None else ()


def find_run(ref: str | Path, history: str | None = None) -> RunRef:
    """Find a run by run folder, history row id or run id.

    Raises
    ------
    InputError
        When ``ref`` is none of these.
    """
    text = str(ref)
    path = Path(text)
    if path.is_dir():
        folder = path.absolute()
        if not (folder / "summary.json").is_file():
            raise InputError(Problem(text, None, None, "not a run folder (no summary.json)"))
        summary = read_json(folder / "summary.json")
        info = read_json(folder / RUN_INFO_FILE) if (folder / RUN_INFO_FILE).is_file() else None
        record = None
        if history is not None and info is not None and info.get("run_id"):
            with History(history) as h:
                record = h.get_run_id(str(info["run_id"]))
        return RunRef(text, folder, summary, info, record)
    if history is None:
        raise InputError(
            Problem(text, None, None, "no such run folder (and the run history is off)")
        )
    with History(history) as h:
        record = h.get(int(text)) if text.isdigit() else h.get_run_id(text)
    if record is None:
        raise InputError(Problem(text, None, None, "no such run folder, history id or run id"))
    kept = Path(record.run_folder) if record.run_folder else None
    if kept is not None and (kept / "summary.json").is_file():
        summary = read_json(kept / "summary.json")
        info = read_json(kept / RUN_INFO_FILE) if (kept / RUN_INFO_FILE).is_file() else None
        if info is None or info.get("run_id") == record.run_id:  # not replaced since
            return RunRef(text, kept, summary, info, record)
    return RunRef(text, None, None, None, record)


@dataclass(frozen=True)
class FigureChange:
    """One figure in both runs, its difference (B - A) and change in % of A."""

    name: str
    a: Any
    b: Any
    diff: float | None = None
    pct: float | None = None


@dataclass(frozen=True)
class TerminalMove:
    """A terminal whose hub (or set of hubs) changed."""

    terminal: str
    before: tuple[str, ...]
    after: tuple[str, ...]


@dataclass(frozen=True)
class InputChange:
    """One input of the two runs: a file's hash, the settings hash, a version."""

    name: str
    a: str
    b: str

    @property
    def same(self) -> bool:
        """True when both runs had the same."""
        return self.a == self.b


@dataclass(frozen=True)
class RunComparison:
    """The differences between run A and run B (see the module docstring)."""

    a: RunRef
    b: RunRef
    figures: tuple[FigureChange, ...]
    hubs_opened: tuple[str, ...]
    hubs_closed: tuple[str, ...]
    hubs_kept: tuple[str, ...]
    moved: tuple[TerminalMove, ...] | None
    legs_added: tuple[tuple[str, str, str], ...] | None
    legs_removed: tuple[tuple[str, str, str], ...] | None
    inputs: tuple[InputChange, ...]
    settings: tuple[FigureChange, ...] = field(default_factory=tuple)
    notes: tuple[str, ...] = ()

    def to_json(self) -> dict[str, Any]:
        """The comparison as JSON-ready data."""
        return {
            "a": _side_json(self.a),
            "b": _side_json(self.b),
            "figures": [vars(f) for f in self.figures],
            "hubs_opened": list(self.hubs_opened),
            "hubs_closed": list(self.hubs_closed),
            "hubs_kept": list(self.hubs_kept),
            "terminals_moved": None
            if self.moved is None
            else [
                {"terminal": m.terminal, "before": list(m.before), "after": list(m.after)}
                for m in self.moved
            ],
            "legs_added": None if self.legs_added is None else [list(x) for x in self.legs_added],
            "legs_removed": None
            if self.legs_removed is None
            else [list(x) for x in self.legs_removed],
            "inputs": [{"name": i.name, "a": i.a, "b": i.b, "same": i.same} for i in self.inputs],
            "settings_changed": [vars(s) for s in self.settings],
            "notes": list(self.notes),
        }


def _side_json(ref: RunRef) -> dict[str, Any]:
    return {
        "label": ref.label,
        "scenario": ref.scenario,
        "run_folder": str(ref.folder) if ref.folder else None,
        "run_id": (ref.info or {}).get("run_id") or (ref.record.run_id if ref.record else None),
        "history_id": ref.record.id if ref.record else None,
    }


#: Figures compared, as (name shown, path in summary.json, shown always).
#: A figure not shown always (the classic model's cost parts, the freight
#: model's figures: each model leaves the other's out) is shown only when a
#: side has it.
FIGURES: tuple[tuple[str, tuple[str, ...], bool], ...] = (
    ("status", ("status",), True),
    ("cost per day", ("costs", "total"), True),
    ("  hub fixed", ("costs", "hub_fixed"), True),
    ("  handling", ("costs", "handling"), True),
    ("  collection", ("costs", "collection"), False),
    ("  transfer", ("costs", "transfer"), False),
    ("  distribution", ("costs", "distribution"), False),
    ("  feeder vehicles", ("costs", "feeder"), False),
    ("  trunk vehicles", ("costs", "trunk"), False),
    ("  direct vehicles", ("costs", "direct"), False),
    ("  value of time", ("costs", "time"), False),
    ("  carbon price", ("costs", "carbon_in_vehicles"), False),
    ("objective", ("objective",), True),
    ("best bound", ("best_bound",), True),
    ("gap", ("gap",), True),
    ("hubs", ("hub_count",), True),
    ("volume per day", ("total_volume",), True),
    ("unit-km per day", ("unit_km",), True),
    ("trunk legs", ("legs_by_tier", "trunk"), True),
    ("feeder legs", ("legs_by_tier", "feeder"), True),
    ("direct legs", ("legs_by_tier", "direct"), True),
    ("vehicles per day", ("vehicles",), False),
    ("vehicle-km per day", ("vehicle_km",), False),
    ("average transit h", ("avg_transit_h",), False),
    ("longest transit h", ("max_transit_h",), False),
    ("CO2e kg per day", ("co2e_kg",), False),
    ("solve seconds", ("solve_seconds",), True),
)


def _summary_of(ref: RunRef) -> dict[str, Any]:
    if ref.summary is not None:
        return dict(ref.summary)
    rec = ref.record
    if rec is None:
        return {}
    return {
        "status": rec.status,
        "objective": rec.objective,
        "best_bound": rec.best_bound,
        "gap": rec.gap,
        "hub_count": rec.hub_count,
        "solve_seconds": rec.solve_seconds,
        **dict(rec.kpis),
    }


def _get(d: Mapping[str, Any], path: tuple[str, ...]) -> Any:
    value: Any = d
    for key in path:
        if not isinstance(value, Mapping):
            return None
        value = value.get(key)
    return value


def _change(name: str, a: Any, b: Any) -> FigureChange:
    numeric = (int, float)
    if (
        isinstance(a, numeric)
        and isinstance(b, numeric)
        and not isinstance(a, bool)
        and not isinstance(b, bool)
    ):
        diff = b - a
        pct = 100.0 * diff / abs(a) if a else None
        return FigureChange(name, a, b, round(diff, 6), None if pct is None else round(pct, 4))
    return FigureChange(name, a, b)


def _allocation(folder: Path | None) -> dict[str, tuple[str, ...]] | None:
    """Terminal -> hubs, from hubs.csv's terminal_ids column."""
    if folder is None or not (folder / "hubs.csv").is_file():
        return None
    out: dict[str, set[str]] = {}
    with open(folder / "hubs.csv", encoding="utf-8", newline="") as fh:
        for row in csv.DictReader(fh):
            hub = row.get("hub_id", "")
            for term in (row.get("terminal_ids") or "").split(";"):
                if term:
                    out.setdefault(term, set()).add(hub)
    return {t: tuple(sorted(h)) for t, h in out.items()}


def _legs(folder: Path | None) -> set[tuple[str, str, str]] | None:
    if folder is None or not (folder / "legs.csv").is_file():
        return None
    with open(folder / "legs.csv", encoding="utf-8", newline="") as fh:
        return {(r["tier"], r["from_site"], r["to_site"]) for r in csv.DictReader(fh)}


def _flat(d: Mapping[str, Any], prefix: str = "") -> dict[str, Any]:
    out: dict[str, Any] = {}
    for k, v in d.items():
        key = f"{prefix}{k}"
        if isinstance(v, Mapping):
            out.update(_flat(v, key + "."))  # an empty table adds nothing
        else:
            out[key] = v
    return out


def _inputs_of(ref: RunRef) -> tuple[str, dict[str, str], dict[str, Any], dict[str, str]]:
    """Settings hash, file hashes by role, settings, versions (from run.json or history)."""
    info = ref.info
    rec = ref.record
    if info is not None:
        files = {k: str(v.get("sha256", "")) for k, v in (info.get("inputs") or {}).items()}
        versions = {"hubnet": str(info.get("hubnet_version", ""))}
        versions.update({k: str(v) for k, v in (info.get("solver_versions") or {}).items()})
        return str(info.get("config_hash", "")), files, dict(info.get("settings") or {}), versions
    if rec is not None:
        files = {k: str(v.get("sha256", "")) for k, v in rec.inputs.items()}
        versions = {"hubnet": rec.hubnet_version, **dict(rec.solver_versions)}
        return rec.config_hash, files, {}, versions
    return "", {}, {}, {}


def compare_runs(a: RunRef, b: RunRef) -> RunComparison:
    r"""Compare run A (before) with run B (after).

    Examples
    --------
    >>> import tempfile, json, pathlib
    >>> root = pathlib.Path(tempfile.mkdtemp())
    >>> for name, hubs, rows in [("a", ["H1", "H2"], "H1,T1;H1\nH2,T2;H2\n"),
    ...                          ("b", ["H1"], "H1,T1;T2;H1\n")]:
    ...     (root / name).mkdir()
    ...     _ = (root / name / "summary.json").write_text(json.dumps({"hubs": hubs}))
    ...     _ = (root / name / "hubs.csv").write_text("hub_id,terminal_ids\n" + rows)
    >>> c = compare_runs(find_run(root / "a"), find_run(root / "b"))
    >>> c.hubs_closed, [(m.terminal, m.before, m.after) for m in c.moved]
    (('H2',), [('H2', ('H2',), ()), ('T2', ('H2',), ('H1',))])
    """
    sa, sb = _summary_of(a), _summary_of(b)
    figures = tuple(
        _change(name, _get(sa, p), _get(sb, p))
        for name, p, always in FIGURES
        if always or _get(sa, p) is not None or _get(sb, p) is not None
    )
    ha, hb = a.hubs, b.hubs
    opened = tuple(h for h in hb if h not in ha)
    closed = tuple(h for h in ha if h not in hb)
    kept = tuple(h for h in ha if h in hb)
    notes: list[str] = []

    alloc_a, alloc_b = _allocation(a.folder), _allocation(b.folder)
    moved: tuple[TerminalMove, ...] | None = None
    if alloc_a is not None and alloc_b is not None:
        terms = sorted(set(alloc_a) | set(alloc_b))
        moved = tuple(
            TerminalMove(t, alloc_a.get(t, ()), alloc_b.get(t, ()))
            for t in terms
            if alloc_a.get(t, ()) != alloc_b.get(t, ())
        )
    else:
        notes.append("allocation and legs not compared: a run folder (hubs.csv) is missing")

    legs_a, legs_b = _legs(a.folder), _legs(b.folder)
    added = removed = None
    if legs_a is not None and legs_b is not None:
        added = tuple(sorted(legs_b - legs_a))
        removed = tuple(sorted(legs_a - legs_b))

    hash_a, files_a, set_a, ver_a = _inputs_of(a)
    hash_b, files_b, set_b, ver_b = _inputs_of(b)
    inputs: list[InputChange] = []
    if hash_a or hash_b:
        inputs.append(InputChange("settings (hash)", hash_a, hash_b))
    for role in sorted(set(files_a) | set(files_b)):
        inputs.append(
            InputChange(f"{role} file (sha256)", files_a.get(role, ""), files_b.get(role, ""))
        )
    for name in sorted(set(ver_a) | set(ver_b)):
        inputs.append(InputChange(f"{name} version", ver_a.get(name, ""), ver_b.get(name, "")))
    if not inputs:
        notes.append("inputs not compared: neither run has a run.json or a history row")
    flat_a, flat_b = _flat(set_a), _flat(set_b)
    settings = tuple(
        FigureChange(k, flat_a.get(k), flat_b.get(k))
        for k in sorted(set(flat_a) | set(flat_b))
        if flat_a.get(k) != flat_b.get(k)
    )
    return RunComparison(
        a=a,
        b=b,
        figures=figures,
        hubs_opened=opened,
        hubs_closed=closed,
        hubs_kept=kept,
        moved=moved,
        legs_added=added,
        legs_removed=removed,
        inputs=tuple(inputs),
        settings=settings,
        notes=tuple(notes),
    )
