"""Drivers' hours: how long a one-way run takes once breaks, relays and crews are counted.

A rule set (:class:`DrivingRules`) holds the few limits that matter for one
day's run: driving before a break, the break's length, daily driving and, in
the US, the on-duty window. Two sets ship with hubnet, read from TOML files
in ``hubnet/rules/``:

``eu``
    Regulation (EC) No 561/2006: 4.5 h of driving, then a 45 min break
    (Art. 7); at most 9 h of driving a day (Art. 6(1)); no duty window.
``us``
    49 CFR 395.3, property-carrying drivers: a 30 min break after 8 h of
    driving (395.3(a)(3)(ii)); at most 11 h of driving (395.3(a)(3)(i));
    no driving after the 14th hour on duty (395.3(a)(2)).

A user can copy one of those files, edit the limits and pass its path
(:func:`load_rules`). :func:`time_leg` times one run;
:func:`time_legs` does the same for a numpy array of runs and gives the
same answers.

Units: hours throughout.

Simplifications, stated so a planner can judge them:

* One run starts with a rested driver (or crew). Weekly limits, rest
  periods and the EU's twice-weekly 10 h extension are not modelled.
* Breaks fall exactly every ``max_driving_before_break_h`` of driving, and
  no break is needed when the driving ends on a limit: a run of 9 h under
  the EU rules has one break, between its two 4.5 h stints.
* A relay splits a long run into the fewest stints one driver each may
  drive, with the driver changes placed where they save the most breaks:
  a fresh driver needs no break, so a 12 h EU run driven as 9 h + 3 h
  stops for one break, where two equal 6 h stints would stop for two. A
  driver change costs the relay time passed by the caller.
* Two drivers on board ("multi-manning" in Regulation (EC) No 561/2006,
  Art. 7, second paragraph, from memory) take their breaks while the other
  drives, so the run has no break stops; it is allowed up to twice the daily
  driving limit. The on-duty window is not applied to a double-manned run
  (the US team-driving sleeper-berth provisions, 49 CFR 395.1(g) from
  memory, are not modelled).
"""

from __future__ import annotations

import difflib
import math
import re
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import cache
from importlib import resources
from pathlib import Path
from types import MappingProxyType
from typing import Any, NamedTuple, overload

import numpy as np
import numpy.typing as npt

from hubnet.errors import InputError, Problem
from hubnet.fleet import LongLegPolicy

__all__ = [
    "BUILTIN_RULES",
    "DrivingRules",
    "LegTiming",
    "LegTimings",
    "load_rules",
    "time_leg",
    "time_legs",
]

#: Names of the bundled rule sets and their files in ``hubnet/rules/``.
BUILTIN_RULES: Mapping[str, str] = MappingProxyType(
    {"eu": "eu_561_2006.toml", "us": "us_49cfr395_3.toml"}
)

#: The limit keys of a rule file, in hours; the duty window is optional.
LIMIT_KEYS: tuple[str, ...] = (
    "max_driving_before_break_h",
    "break_h",
    "max_daily_driving_h",
    "max_duty_window_h",
)
_REQUIRED_LIMITS = LIMIT_KEYS[:3]
_TOP_KEYS: tuple[str, ...] = ("name", "source", *LIMIT_KEYS, "articles")
_POLICIES: tuple[str, ...] = ("relay", "two_drivers", "forbid")

#: Tolerance on ratios of hours, so that a run of exactly 9 h (or 9 h plus
#: rounding noise from distance / speed) counts as exactly two 4.5 h stints.
_EPS = 1e-9


@dataclass(frozen=True, slots=True)
class DrivingRules:
    """Limits on one driver's day that decide how long a run takes.

    Attributes
    ----------
    name
        Short name, for messages (``EU 561/2006``).
    source
        Citation of the rules the limits come from.
    max_driving_before_break_h
        Driving after which a break is due, hours (EU 4.5, Art. 7;
        US 8, 49 CFR 395.3(a)(3)(ii)).
    break_h
        Length of that break, hours (EU 0.75; US 0.5).
    max_daily_driving_h
        Driving one driver may do between daily rests, hours (EU 9,
        Art. 6(1); US 11, 49 CFR 395.3(a)(3)(i)).
    max_duty_window_h
        Hours after coming on duty after which the driver may no longer
        drive (US 14, 49 CFR 395.3(a)(2)); ``None`` for no such window (EU).
    articles
        The provision behind each limit, keyed by the attribute name above,
        for messages. A limit without an entry is cited as the rule set.
    """

    name: str
    source: str
    max_driving_before_break_h: float
    break_h: float
    max_daily_driving_h: float
    max_duty_window_h: float | None = None
    articles: Mapping[str, str] = field(
        default_factory=lambda: MappingProxyType({}), hash=False, compare=True
    )

    def article(self, key: str) -> str:
        """The provision behind limit ``key``, or the rule set's name when none is given."""
        return self.articles.get(key, f"the {self.name} rules")


@dataclass(frozen=True, slots=True)
class LegTiming:
    """How one one-way run is driven, and how long it takes.

    Attributes
    ----------
    drive_h
        Driving time, hours (distance over speed).
    breaks_h
        Total time stopped for breaks, hours.
    relays
        Driver changes on the way (0 with one driver or two on board).
    drivers
        Drivers on board at the same time: 1, or 2 for a double-manned run.
        A relayed run uses ``relays + 1`` drivers, one at a time.
    relay_h
        Time lost at each driver change, hours.
    allowed
        Whether the run can be driven under the rules and the long-leg
        policy. When ``False`` only ``drive_h`` and ``note`` are meaningful
        (``breaks_h`` and ``relays`` are 0, ``drivers`` 1).
    note
        A plain sentence on how the run is driven, or why it is not allowed
        (naming the limit and its provision).
    """

    drive_h: float
    breaks_h: float
    relays: int
    drivers: int
    relay_h: float
    allowed: bool
    note: str

    @property
    def transit_h(self) -> float:
        """Hours from departure to arrival: driving, breaks and driver changes.

        ``math.inf`` when the run is not allowed, so a forbidden run can
        never look fast.
        """
        if not self.allowed:
            return math.inf
        return self.drive_h + self.breaks_h + self.relays * self.relay_h


class LegTimings(NamedTuple):
    """Timing of many runs at once (see :func:`time_legs`); arrays of one shape.

    Attributes
    ----------
    breaks_h
        Total break time per run, hours (0 where not allowed).
    relays
        Driver changes per run (int; 0 where not allowed).
    drivers
        Drivers on board per run (int, 1 or 2).
    allowed
        Whether each run can be driven (bool).
    transit_h
        Driving + breaks + relays x relay time, hours; ``inf`` where not allowed.
    """

    breaks_h: npt.NDArray[np.float64]
    relays: npt.NDArray[np.int64]
    drivers: npt.NDArray[np.int64]
    allowed: npt.NDArray[np.bool_]
    transit_h: npt.NDArray[np.float64]


# --------------------------------------------------------------------------- loading


def load_rules(spec: str | Path) -> DrivingRules:
    """Read a drivers' hours rule set.

    Parameters
    ----------
    spec
        ``"eu"`` or ``"us"`` (case-insensitive) for a bundled rule set, or the
        path of a TOML rule file with the same keys as the bundled files
        (``hubnet/rules/*.toml``): ``name`` and ``source`` (text, optional),
        ``max_driving_before_break_h``, ``break_h``, ``max_daily_driving_h``
        (hours, > 0, required), ``max_duty_window_h`` (hours, > 0, optional)
        and an optional ``[articles]`` table of text keyed by those limits.

    Returns
    -------
    DrivingRules

    Raises
    ------
    InputError
        When the name is neither bundled nor an existing file, the file is not
        valid TOML, or a key is unknown, missing, not a number or not > 0.
        Every problem is reported, each with its line when it can be found.
    """
    if isinstance(spec, str) and spec.strip().lower() in BUILTIN_RULES:
        return _bundled_rules(spec.strip().lower())
    path = Path(spec)
    name = str(spec)
    if not path.is_file():
        hint = ""
        if isinstance(spec, str) and path.suffix.lower() != ".toml":
            close = difflib.get_close_matches(spec.strip().lower(), list(BUILTIN_RULES), n=1)
            hint = f"; did you mean {close[0]!r}?" if close else ""
        raise InputError(
            Problem(
                name,
                None,
                None,
                "drivers' hours rules not found: give 'eu', 'us' or the path of a "
                f"TOML rule file{hint}",
            )
        )
    text = _read_toml_text(path, name)
    return _parse_rules(_parse_toml(text, name), name, text, default_name=path.stem)


@cache
def _bundled_rules(key: str) -> DrivingRules:
    resource = resources.files("hubnet").joinpath("rules", BUILTIN_RULES[key])
    text = resource.read_text(encoding="utf-8")
    name = f"hubnet/rules/{BUILTIN_RULES[key]}"
    return _parse_rules(_parse_toml(text, name), name, text, default_name=key)


def _read_toml_text(path: Path, name: str) -> str:
    try:
        return path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as err:
        raise InputError(Problem(name, None, None, f"cannot read the file: {err}")) from None


def _parse_toml(text: str, name: str) -> dict[str, Any]:
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        m = re.search(r"line (\d+)", str(err))
        line = int(m.group(1)) if m else None
        raise InputError(Problem(name, line, None, f"not valid TOML: {err}")) from None


def _key_line(text: str, table: str | None, key: str) -> int | None:
    """Line (1-based) of ``key = ...`` in ``[table]`` (None: top level) of TOML text."""
    current: str | None = None
    header = re.compile(r"^\s*\[([^\[\]]+)\]\s*(#.*)?$")
    assignment = re.compile(rf"^\s*[\"']?{re.escape(key)}[\"']?\s*=")
    for number, line in enumerate(text.splitlines(), start=1):
        m = header.match(line)
        if m:
            current = m.group(1).strip()
            if table is None and current == key:
                return number
            continue
        if current == table and assignment.match(line):
            return number
    return None


def _unknown_key(key: str, known: tuple[str, ...]) -> str:
    close = difflib.get_close_matches(key, list(known), n=1)
    hint = f"; did you mean {close[0]!r}?" if close else f"; known keys: {', '.join(known)}"
    return f"unknown key {key!r}{hint}"


def _is_number(value: object) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool)


def _parse_rules(
    raw: Mapping[str, Any], file: str, text: str, *, default_name: str
) -> DrivingRules:
    problems: list[Problem] = []

    def problem(table: str | None, key: str, message: str) -> None:
        column = key if table is None else f"{table}.{key}"
        problems.append(Problem(file, _key_line(text, table, key), column, message))

    for key in raw:
        if key not in _TOP_KEYS:
            problem(None, key, _unknown_key(key, _TOP_KEYS))

    texts: dict[str, str] = {}
    for key in ("name", "source"):
        value = raw.get(key)
        if value is None:
            continue
        if not isinstance(value, str) or not value.strip():
            problem(None, key, f"expected non-empty text, got {value!r}")
        else:
            texts[key] = value.strip()

    limits: dict[str, float] = {}
    for key in LIMIT_KEYS:
        if key not in raw:
            if key in _REQUIRED_LIMITS:
                problems.append(
                    Problem(file, None, key, "required key is missing (hours, greater than 0)")
                )
            continue
        value = raw[key]
        if not _is_number(value) or not math.isfinite(value):
            problem(None, key, f"expected a number of hours, got {value!r}")
        elif value <= 0:
            problem(None, key, f"must be greater than 0 hours, got {value!r}")
        else:
            limits[key] = float(value)

    articles: dict[str, str] = {}
    raw_articles = raw.get("articles", {})
    if not isinstance(raw_articles, Mapping):
        problem(None, "articles", "expected a table [articles] of text keyed by limit name")
    else:
        for key, value in raw_articles.items():
            if key not in LIMIT_KEYS:
                problem("articles", key, _unknown_key(key, LIMIT_KEYS))
            elif not isinstance(value, str) or not value.strip():
                problem("articles", key, f"expected non-empty text, got {value!r}")
            else:
                articles[key] = value.strip()

    if problems:
        raise InputError(problems)
    return DrivingRules(
        name=texts.get("name", default_name),
        source=texts.get("source", file),
        max_driving_before_break_h=limits["max_driving_before_break_h"],
        break_h=limits["break_h"],
        max_daily_driving_h=limits["max_daily_driving_h"],
        max_duty_window_h=limits.get("max_duty_window_h"),
        articles=MappingProxyType(articles),
    )


# --------------------------------------------------------------------------- timing


def _breaks_in(stint_h: float, rules: DrivingRules) -> int:
    """Breaks one driver takes in ``stint_h`` hours of driving (none after the last stretch)."""
    return max(0, math.ceil(stint_h / rules.max_driving_before_break_h - _EPS) - 1)


def _one_driver_can(stint_h: float, rules: DrivingRules) -> bool:
    """Whether one driver may drive ``stint_h`` hours, with breaks, in one day."""
    if stint_h / rules.max_daily_driving_h - _EPS > 1.0:
        return False
    window = rules.max_duty_window_h
    if window is None:
        return True
    return stint_h + _breaks_in(stint_h, rules) * rules.break_h <= window + _EPS


def _fmt(hours: float) -> str:
    return f"{hours:.2f}".rstrip("0").rstrip(".") + " h"


def _check_args(rules: DrivingRules, policy: str, relay_h: float) -> None:
    if policy not in _POLICIES:
        raise ValueError(f"long-leg policy must be one of {', '.join(_POLICIES)}, got {policy!r}")
    if not (math.isfinite(relay_h) and relay_h >= 0):
        raise ValueError(f"relay time must be a finite number of hours >= 0, got {relay_h!r}")
    if not isinstance(rules, DrivingRules):
        raise TypeError(f"rules must be DrivingRules, got {type(rules).__name__}")


def _why_one_driver_cannot(drive_h: float, rules: DrivingRules) -> str:
    if drive_h / rules.max_daily_driving_h - _EPS > 1.0:
        return (
            f"{_fmt(drive_h)} of driving is more than the {_fmt(rules.max_daily_driving_h)} "
            f"daily driving limit of {rules.article('max_daily_driving_h')}"
        )
    breaks = _breaks_in(drive_h, rules) * rules.break_h
    window = rules.max_duty_window_h
    return (
        f"{_fmt(drive_h)} of driving and {_fmt(breaks)} of breaks do not fit in the "
        f"{_fmt(window or 0.0)} duty window of {rules.article('max_duty_window_h')}"
    )


def time_leg(
    drive_h: float, rules: DrivingRules, policy: LongLegPolicy, relay_h: float
) -> LegTiming:
    """Time one one-way run under the drivers' hours rules.

    A run one driver may drive in a day (no more than ``max_daily_driving_h``
    of driving and, where the rules have a duty window, driving plus breaks
    within it) takes one driver and ``ceil(drive_h / max_driving_before_break_h)
    - 1`` breaks. A longer run follows ``policy``:

    ``forbid``
        Not allowed; the note names the limit and its provision.
    ``relay``
        Split into the fewest stints one driver each may drive
        (``ceil(drive_h / max_daily_driving_h)`` unless the duty window needs
        more), with ``stints - 1`` driver changes of ``relay_h`` each. The
        stints' lengths are chosen for the fewest breaks in all (each stint
        has its own; a driver change resets the driving before a break), so
        some stints are full days and one takes the rest.
    ``two_drivers``
        Two drivers on board, no break stops; allowed while
        ``drive_h <= 2 * max_daily_driving_h``.

    Parameters
    ----------
    drive_h
        Driving time of the run, hours (>= 0).
    rules
        The drivers' hours limits (:func:`load_rules`).
    policy
        What to do with a run too long for one driver.
    relay_h
        Time lost at each driver change, hours (>= 0).

    Returns
    -------
    LegTiming

    Raises
    ------
    ValueError
        When ``drive_h`` or ``relay_h`` is negative or not finite, or the
        policy is unknown.

    Examples
    --------
    >>> eu = load_rules("eu")
    >>> t = time_leg(12.0, eu, "relay", 0.25)
    >>> t.relays, t.breaks_h, t.transit_h
    (1, 0.75, 13.0)
    """
    _check_args(rules, policy, relay_h)
    if not (math.isfinite(drive_h) and drive_h >= 0):
        raise ValueError(f"driving time must be a finite number of hours >= 0, got {drive_h!r}")
    drive_h = float(drive_h)
    relay_h = float(relay_h)
    if _one_driver_can(drive_h, rules):
        n = _breaks_in(drive_h, rules)
        note = f"one driver, {n} break{'s' if n != 1 else ''}"
        return LegTiming(drive_h, n * rules.break_h, 0, 1, relay_h, True, note)
    why = _why_one_driver_cannot(drive_h, rules)
    if policy == "forbid":
        return LegTiming(drive_h, 0.0, 0, 1, relay_h, False, f"{why}; long legs are forbidden")
    if policy == "two_drivers":
        limit = 2.0 * rules.max_daily_driving_h
        if drive_h / limit - _EPS > 1.0:
            note = (
                f"{_fmt(drive_h)} of driving is more than two drivers may share: "
                f"{_fmt(limit)}, twice the daily driving limit of "
                f"{rules.article('max_daily_driving_h')}"
            )
            return LegTiming(drive_h, 0.0, 0, 1, relay_h, False, note)
        note = f"two drivers on board, breaks taken while the other drives; for one driver, {why}"
        return LegTiming(drive_h, 0.0, 0, 2, relay_h, True, note)
    stints = max(1, math.ceil(drive_h / rules.max_daily_driving_h - _EPS))
    while not _one_driver_can(drive_h / stints, rules):
        stints += 1
    blocks, lengths = _relay_split(drive_h, stints, rules)
    breaks = blocks - stints
    shown = ", ".join(_fmt(t) for t in lengths)
    note = (
        f"relay: {stints} stints ({shown}), {stints - 1} driver "
        f"change{'s' if stints != 2 else ''}, {breaks} break{'s' if breaks != 1 else ''} "
        f"in all; {why}"
    )
    return LegTiming(drive_h, breaks * rules.break_h, stints - 1, 1, relay_h, True, note)


def _stint_cap(blocks: int, rules: DrivingRules) -> float:
    """Longest stint one driver may drive with at most ``blocks - 1`` breaks, hours."""
    best = 0.0
    for b in range(1, blocks + 1):
        cap = min(rules.max_daily_driving_h, b * rules.max_driving_before_break_h)
        if rules.max_duty_window_h is not None:
            cap = min(cap, rules.max_duty_window_h - (b - 1) * rules.break_h)
        best = max(best, cap)
    return best


@cache
def _relay_table(
    rules: DrivingRules, stints: int
) -> tuple[tuple[int, float, tuple[int, ...]], ...]:
    """Ways to share driving between ``stints`` drivers, fewest blocks first.

    A block is a stretch of driving between breaks; a stint of ``b`` blocks
    takes ``b - 1`` breaks and may last up to :func:`_stint_cap`. Each entry
    is (total blocks, longest run those blocks can cover in hours, blocks per
    stint in descending order), keeping for each total the split that
    covers the longest run.
    """
    most = max(1, math.ceil(rules.max_daily_driving_h / rules.max_driving_before_break_h - _EPS))
    caps = [_stint_cap(b, rules) for b in range(most + 1)]
    # best[total] = (cover, how many stints have 1, 2, ... most blocks): a knapsack
    # by dynamic programming over the stints (stints x total x most steps).
    best: dict[int, tuple[float, tuple[int, ...]]] = {0: (0.0, (0,) * most)}
    for _ in range(stints):
        grown: dict[int, tuple[float, tuple[int, ...]]] = {}
        for total, (cover, counts) in best.items():
            for b in range(1, most + 1):
                key, value = total + b, cover + caps[b]
                if key not in grown or value > grown[key][0]:
                    more = counts[: b - 1] + (counts[b - 1] + 1,) + counts[b:]
                    grown[key] = (value, more)
        best = grown
    table = []
    for total, (cover, counts) in sorted(best.items()):
        combo = tuple(b for b in range(most, 0, -1) for _ in range(counts[b - 1]))
        table.append((total, cover, combo))
    return tuple(table)


@overload
def _covers(drive_h: float, cover: float) -> bool: ...
@overload
def _covers(drive_h: npt.NDArray[np.float64], cover: float) -> npt.NDArray[np.bool_]: ...
def _covers(drive_h: float | npt.NDArray[np.float64], cover: float) -> bool | npt.NDArray[np.bool_]:
    """Whether ``cover`` hours hold ``drive_h`` (hours, or an array of them).

    Within the tolerances of the one-driver checks; :func:`time_leg` and
    :func:`time_legs` share it.
    """
    return drive_h <= cover * (1.0 + _EPS) + _EPS


def _relay_split(drive_h: float, stints: int, rules: DrivingRules) -> tuple[int, tuple[float, ...]]:
    """Fewest blocks that cover ``drive_h`` over ``stints`` drivers, and the stints' hours.

    The stints are filled in turn up to their caps, the last taking what is
    left. ``stints`` one-driver stints fit ``drive_h`` (the caller's check),
    so the split with most blocks is the fallback against rounding.
    """
    table = _relay_table(rules, stints)
    total, _, combo = next((e for e in table if _covers(drive_h, e[1])), table[-1])
    left = drive_h
    lengths = []
    for b in combo:
        t = min(_stint_cap(b, rules), left)
        lengths.append(t)
        left = max(0.0, left - t)
    return total, tuple(lengths)


def _breaks_in_array(
    stint_h: npt.NDArray[np.float64], rules: DrivingRules
) -> npt.NDArray[np.int64]:
    n = np.ceil(stint_h / rules.max_driving_before_break_h - _EPS).astype(np.int64) - 1
    return np.maximum(n, 0)


def _one_driver_can_array(
    stint_h: npt.NDArray[np.float64], rules: DrivingRules
) -> npt.NDArray[np.bool_]:
    ok = stint_h / rules.max_daily_driving_h - _EPS <= 1.0
    window = rules.max_duty_window_h
    if window is not None:
        ok &= stint_h + _breaks_in_array(stint_h, rules) * rules.break_h <= window + _EPS
    return ok


def time_legs(
    drive_h: npt.ArrayLike, rules: DrivingRules, policy: LongLegPolicy, relay_h: float
) -> LegTimings:
    """Time many one-way runs at once; element by element the same as :func:`time_leg`.

    Parameters
    ----------
    drive_h
        Driving times, hours (>= 0), any shape.
    rules, policy, relay_h
        As in :func:`time_leg`.

    Returns
    -------
    LegTimings
        Arrays of the shape of ``drive_h``.

    Raises
    ------
    ValueError
        When a driving time is negative or not finite, ``relay_h`` is, or the
        policy is unknown.
    """
    _check_args(rules, policy, relay_h)
    given = np.asarray(drive_h, dtype=np.float64)
    d = given.reshape(-1)
    if not np.all(np.isfinite(d)) or np.any(d < 0):
        raise ValueError("driving times must be finite numbers of hours >= 0")
    one = _one_driver_can_array(d, rules)
    breaks = np.where(one, _breaks_in_array(d, rules) * rules.break_h, 0.0)
    relays = np.zeros(d.shape, dtype=np.int64)
    drivers = np.ones(d.shape, dtype=np.int64)
    allowed = one.copy()
    if policy == "two_drivers":
        two = ~one & (d / (2.0 * rules.max_daily_driving_h) - _EPS <= 1.0)
        drivers[two] = 2
        allowed |= two
    elif policy == "relay":
        stints = np.maximum(1, np.ceil(d / rules.max_daily_driving_h - _EPS).astype(np.int64))
        stints[one] = 1
        todo = ~_one_driver_can_array(d / stints, rules)
        while todo.any():  # only when a duty window is tighter than the daily limit
            stints[todo] += 1
            todo[todo] = ~_one_driver_can_array(d[todo] / stints[todo], rules)
        blocks = stints.copy()  # one-driver rows: unused
        for s in np.unique(stints[~one]):
            rows = ~one & (stints == s)
            table = _relay_table(rules, int(s))
            blocks[rows] = table[-1][0]  # the fallback of _relay_split
            for total, cover, _ in reversed(table):
                fits = rows & _covers(d, cover)
                blocks[fits] = total
        breaks = np.where(one, breaks, (blocks - stints) * rules.break_h)
        relays = stints - 1
        allowed = np.ones(d.shape, dtype=np.bool_)
    transit = np.where(allowed, d + breaks + relays * float(relay_h), np.inf)
    shape = given.shape
    return LegTimings(
        breaks_h=breaks.astype(np.float64).reshape(shape),
        relays=relays.reshape(shape),
        drivers=drivers.reshape(shape),
        allowed=allowed.reshape(shape),
        transit_h=transit.astype(np.float64).reshape(shape),
    )
