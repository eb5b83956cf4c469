"""Scenario configuration: a TOML file -> a frozen :class:`ScenarioConfig`.

A config names the input files and the model, distance and solver
parameters. Unknown keys are errors (with a did-you-mean), values are
checked for type and range, and every problem is reported at once with the
config file, its line and the key. Scenario overrides are nested mappings
merged on top of the base config before validation.

Example
-------
.. code-block:: toml

    [scenario]
    name = "demo"

    [inputs]
    sites = "sites.csv"
    demand = "demand.csv"
    volume_unit = "pallets"

    [model]
    allocation = "single"
    hubs = 3

    [solver]
    name = "highs"
    time_limit_s = 60

Naming a vehicles table (``inputs.vehicles``) switches on the freight model;
its parameters are in the ``[service]``, ``[hours]`` and ``[freight]``
sections (see :class:`~hubnet.fleet.FreightParams`), which the classic model
ignores.
"""

from __future__ import annotations

import copy
import datetime
import difflib
import re
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Annotated, Any, Literal

from pydantic import (
    BaseModel,
    BeforeValidator,
    ConfigDict,
    Field,
    ValidationError,
    field_validator,
    model_validator,
)

from hubnet.errors import InputError, Problem
from hubnet.fleet import (
    EmissionBasis,
    FreightParams,
    HoursParams,
    LongLegPolicy,
    Objective,
    ServiceParams,
)
from hubnet.units import DEFAULT_CIRCUITY, VOLUME_UNITS

Allocation = Literal["single", "multiple"]
Formulation = Literal["auto", "flow", "benders"]
SolverName = Literal["auto", "highs", "cbc"]
DistanceMethod = Literal["auto", "geodesic", "euclidean", "matrix"]

#: Drivers' hours rule sets built into hubnet (``hours.rules``); any other
#: value is the path of a TOML rule file.
BUILT_IN_HOURS_RULES = ("eu", "us")

#: What a time-of-day value should look like, for messages.
CLOCK_EXPECT = 'a time of day as "HH:MM" from 00:00 to 24:00'

_CLOCK = re.compile(r"^(\d{1,2}):(\d{2})(?::(\d{2}))?$")


def clock_hours(text: str) -> float:
    """Hours after midnight of a time of day written ``HH:MM``.

    ``00:00`` to ``24:00`` (the end of the day, as ISO 8601 allows) are
    accepted; ``HH:MM:SS`` too, as spreadsheets write times that way.

    Parameters
    ----------
    text
        The time of day, e.g. ``"18:30"``.

    Returns
    -------
    float
        Hours after midnight, 0 to 24.

    Raises
    ------
    ValueError
        When the text is not a time of day in that form.

    Examples
    --------
    >>> clock_hours("18:30"), clock_hours("8:00"), clock_hours("24:00")
    (18.5, 8.0, 24.0)
    """
    m = _CLOCK.match(text.strip())
    if m is None:
        raise ValueError(f"expected {CLOCK_EXPECT}")
    hours, minutes, seconds = int(m[1]), int(m[2]), int(m[3] or 0)
    if minutes > 59 or seconds > 59 or hours > 24 or (hours == 24 and (minutes or seconds)):
        raise ValueError(f"expected {CLOCK_EXPECT}")
    return hours + minutes / 60.0 + seconds / 3600.0


# --------------------------------------------------------------------------
# Frozen config objects used by the rest of hubnet
# --------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class InputFiles:
    """Where the scenario's data lives (paths resolved against the config file).

    Attributes
    ----------
    sites, demand
        Site and demand tables (CSV, Excel or any format geopandas reads).
    distances
        Optional distance/time matrix in long form (origin, destination,
        distance_km, optional hours).
    volume_unit
        The one unit all volumes are in.
    allow_same_site_demand
        Allow demand from a site to itself (routed via the site's hub).
    sheet
        Excel sheet or GIS layer name, when the file holds several.
    vehicles
        Optional vehicle class table; when given, the freight model plans
        vehicles on every leg.
    fuels
        Optional fuel emission factor table (TOML, as
        ``hubnet/factors/fuels.toml``) replacing the bundled one; the
        ``fuel`` column of the vehicles table names its fuels.
    """

    sites: Path
    demand: Path
    distances: Path | None = None
    volume_unit: str = "units"
    allow_same_site_demand: bool = False
    sheet: str | None = None
    vehicles: Path | None = None
    fuels: Path | None = None


@dataclass(frozen=True, slots=True)
class DistanceParams:
    """How leg distances are obtained.

    Attributes
    ----------
    method
        ``auto`` (the user matrix when given, else geodesic for lat/lon or
        Euclidean for planar x/y), or one of ``geodesic``, ``euclidean``,
        ``matrix``.
    circuity
        Road distance over geodesic distance (dimensionless, >= 1); not
        applied to a user matrix or to planar benchmark data.
    """

    method: DistanceMethod = "auto"
    circuity: float = DEFAULT_CIRCUITY


@dataclass(frozen=True, slots=True)
class HubModelParams:
    """Parameters of the classic hub location model.

    The cost of sending one unit from ``i`` via hubs ``k`` then ``m`` to
    ``j`` is ``cost_per_unit_km * (collection_factor * d[i,k] +
    transfer_factor * d[k,m] + distribution_factor * d[m,j])`` plus the
    handling cost at each hub passed; each open hub adds its fixed cost.

    Attributes
    ----------
    allocation
        ``single``: every terminal sends and receives through one hub;
        ``multiple``: each flow may use any open hubs.
    hubs
        Exact number of hubs to open (the p of the p-hub median), or
        ``None`` to let hub fixed costs decide.
    capacitated
        Enforce each hub's sort capacity (single allocation only).
    collection_factor, transfer_factor, distribution_factor
        Dimensionless multipliers of distance on feeder legs into a hub,
        trunk legs between hubs and feeder legs out of a hub. A transfer
        factor below 1 models the economies of scale on trunks.
    cost_per_unit_km
        Currency per unit of volume per km.
    formulation
        ``flow`` (the compact flow formulation for either allocation),
        ``benders`` (multiple allocation only: flows projected out, for
        large networks) or ``auto`` (Benders for multiple allocation, flow
        for single).
    """

    allocation: Allocation = "single"
    hubs: int | None = None
    capacitated: bool = False
    collection_factor: float = 1.0
    transfer_factor: float = 0.75
    distribution_factor: float = 1.0
    cost_per_unit_km: float = 1.0
    formulation: Formulation = "auto"


@dataclass(frozen=True, slots=True)
class SolverParams:
    """Solver choice and stopping rules.

    Attributes
    ----------
    name
        ``highs`` (highspy), ``cbc`` (bundled with PuLP), or ``auto``: CBC
        for single allocation and HiGHS for multiple allocation, the
        faster of the two on each formulation in our benchmarks
        (benchmarks/README.md).
    time_limit_s
        Wall-clock limit in seconds, or ``None`` for none.
    gap
        Relative MIP gap at which a plan counts as proven optimal.
    threads
        Solver threads, or ``None`` for the solver's default; also the
        processes a walk over hub sets may be split over (``None``: every
        usable core).
    log
        Show the solver's own log on the terminal.
    """

    name: SolverName = "auto"
    time_limit_s: float | None = None
    gap: float = 1e-6
    threads: int | None = None
    log: bool = False


@dataclass(frozen=True, slots=True)
class ScenarioConfig:
    """A validated scenario: input files plus every parameter.

    Attributes
    ----------
    name, description
        Shown in outputs.
    source
        The config file this came from (``None`` when built in Python).
    freight
        Parameters of the freight model, used when ``inputs.vehicles`` is
        given (its ``kg_per_unit`` and ``m3_per_unit`` come from
        ``[inputs]``, the rest from ``[service]``, ``[hours]`` and
        ``[freight]``).
    """

    name: str
    inputs: InputFiles
    distances: DistanceParams = field(default_factory=DistanceParams)
    model: HubModelParams = field(default_factory=HubModelParams)
    solver: SolverParams = field(default_factory=SolverParams)
    description: str = ""
    source: Path | None = None
    freight: FreightParams = field(default_factory=FreightParams)


# --------------------------------------------------------------------------
# Schema of the TOML file (pydantic at the file boundary)
# --------------------------------------------------------------------------


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class _Scenario(_Strict):
    name: str = Field(min_length=1)
    description: str = ""


class _Inputs(_Strict):
    sites: str = Field(min_length=1)
    demand: str = Field(min_length=1)
    distances: str | None = None
    volume_unit: str = "units"
    allow_same_site_demand: bool = False
    sheet: str | None = None
    vehicles: str | None = Field(default=None, min_length=1)
    fuels: str | None = Field(default=None, min_length=1)
    kg_per_unit: float | None = Field(default=None, gt=0, allow_inf_nan=False)
    m3_per_unit: float | None = Field(default=None, gt=0, allow_inf_nan=False)

    @field_validator("volume_unit")
    @classmethod
    def _unit(cls, value: str) -> str:
        if value not in VOLUME_UNITS:
            raise ValueError(f"expected one of {', '.join(VOLUME_UNITS)}")
        return value


class _Distances(_Strict):
    method: DistanceMethod = "auto"
    circuity: float = Field(default=DEFAULT_CIRCUITY, ge=1.0, le=3.0)


class _Model(_Strict):
    allocation: Allocation = "single"
    hubs: int | None = Field(default=None, ge=1)
    capacitated: bool = False
    collection_factor: float = Field(default=1.0, ge=0)
    transfer_factor: float = Field(default=0.75, ge=0)
    distribution_factor: float = Field(default=1.0, ge=0)
    cost_per_unit_km: float = Field(default=1.0, gt=0)
    formulation: Formulation = "auto"

    @model_validator(mode="after")
    def _capacity_needs_single(self) -> _Model:
        if self.capacitated and self.allocation != "single":
            raise ValueError("capacitated = true needs allocation = 'single'")
        if self.formulation == "benders" and self.allocation != "multiple":
            raise ValueError("formulation = 'benders' needs allocation = 'multiple'")
        return self


class _Solver(_Strict):
    name: SolverName = "auto"
    time_limit_s: float | None = Field(default=None, gt=0)
    gap: float = Field(default=1e-6, ge=0, lt=1)
    threads: int | None = Field(default=None, ge=1)
    log: bool = False


def _clock(value: Any) -> float:
    """A TOML time of day (``"18:00"`` text, or a TOML local time) as hours after midnight."""
    if isinstance(value, datetime.time):
        return value.hour + value.minute / 60.0 + value.second / 3600.0
    if not isinstance(value, str):
        raise ValueError(f'expected {CLOCK_EXPECT}, written as text such as "18:00"')
    return clock_hours(value)


_Clock = Annotated[float, BeforeValidator(_clock)]
_SERVICE = ServiceParams()
_HOURS = HoursParams()
_FREIGHT = FreightParams()


class _Service(_Strict):
    cutoff: _Clock = _SERVICE.cutoff_h
    deliver_by: _Clock = _SERVICE.deliver_by_h
    days: int = Field(default=_SERVICE.days, ge=1)
    sort_hours: float = Field(default=_SERVICE.sort_hours, ge=0, allow_inf_nan=False)


class _Hours(_Strict):
    rules: str = Field(default=_HOURS.rules, min_length=1)
    long_legs: LongLegPolicy = _HOURS.long_legs
    relay_minutes: float = Field(default=_HOURS.relay_minutes, ge=0, allow_inf_nan=False)
    relay_cost: float = Field(default=_HOURS.relay_cost, ge=0, allow_inf_nan=False)
    second_driver_cost_per_hour: float = Field(
        default=_HOURS.second_driver_cost_per_hour, ge=0, allow_inf_nan=False
    )


class _Freight(_Strict):
    round_trips: bool = _FREIGHT.round_trips
    integer_vehicles: bool = _FREIGHT.integer_vehicles
    direct_min_load: float = Field(default=_FREIGHT.direct_min_load, ge=0, allow_inf_nan=False)
    value_of_time: float = Field(default=_FREIGHT.value_of_time, ge=0, allow_inf_nan=False)
    carbon_price_per_t: float = Field(
        default=_FREIGHT.carbon_price_per_t, ge=0, allow_inf_nan=False
    )
    emissions_basis: EmissionBasis = _FREIGHT.emissions_basis
    max_transit_h: float | None = Field(default=_FREIGHT.max_transit_h, gt=0, allow_inf_nan=False)
    minimise: Objective = _FREIGHT.minimise


class _File(_Strict):
    scenario: _Scenario
    inputs: _Inputs
    distances: _Distances = _Distances()
    model: _Model = _Model()
    solver: _Solver = _Solver()
    service: _Service = _Service()
    hours: _Hours = _Hours()
    freight: _Freight = _Freight()


# --------------------------------------------------------------------------
# Loading
# --------------------------------------------------------------------------


def deep_merge(base: Mapping[str, Any], override: Mapping[str, Any]) -> dict[str, Any]:
    """Return ``base`` with ``override`` merged in, recursively for tables."""
    out = copy.deepcopy(dict(base))
    for key, value in override.items():
        if isinstance(value, Mapping) and isinstance(out.get(key), Mapping):
            out[key] = deep_merge(out[key], value)
        else:
            out[key] = copy.deepcopy(value)
    return out


def _known_keys(model: type[BaseModel]) -> list[str]:
    return list(model.model_fields)


def _schema_at(path: tuple[Any, ...]) -> type[BaseModel] | None:
    model: type[BaseModel] = _File
    for part in path:
        field_info = model.model_fields.get(str(part))
        if field_info is None:
            return None
        ann = field_info.annotation
        if isinstance(ann, type) and issubclass(ann, BaseModel):
            model = ann
        else:
            return None
    return model


def _line_of(text: str, loc: tuple[Any, ...]) -> int | None:
    """Best-effort line number of a key in TOML text (1-based), else None."""
    if not loc:
        return None
    lines = text.splitlines()
    section = ".".join(str(p) for p in loc[:-1])
    key = str(loc[-1])
    in_section = section == ""
    header = re.compile(r"^\s*\[([^\]]+)\]\s*$")
    for number, line in enumerate(lines, start=1):
        m = header.match(line)
        if m:
            in_section = m.group(1).strip() == section
            if in_section and section and key == loc[-1] and len(loc) == 1:
                return number
            continue
        if in_section and re.match(rf"^\s*{re.escape(key)}\s*=", line):
            return number
    if len(loc) == 1:  # a whole table
        for number, line in enumerate(lines, start=1):
            m = header.match(line)
            if m and m.group(1).strip() == key:
                return number
    return None


def key_line(path: str | Path, *keys: str) -> int | None:
    r"""Line (1-based) of a key in a TOML config file, for messages; None when not found.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> f = pathlib.Path(tempfile.mkdtemp()) / "c.toml"
    >>> _ = f.write_text('[scenario]\nname = "x"\n[inputs]\nsites = "s.csv"\n')
    >>> key_line(f, "inputs", "sites")
    4
    """
    try:
        text = Path(path).read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError):
        return None
    return _line_of(text, keys)


def _problems_from(err: ValidationError, file: str, text: str) -> list[Problem]:
    problems = []
    for e in err.errors():
        loc = tuple(p for p in e["loc"] if not isinstance(p, int))
        key = ".".join(str(p) for p in loc) or None
        kind = e["type"]
        if kind == "extra_forbidden":
            parent = _schema_at(loc[:-1])
            hint = ""
            if parent is not None:
                close = difflib.get_close_matches(str(loc[-1]), _known_keys(parent), n=1)
                if close:
                    hint = f"; did you mean {close[0]!r}?"
                else:
                    hint = f"; known keys: {', '.join(_known_keys(parent))}"
            message = f"unknown key {str(loc[-1])!r}{hint}"
        elif kind == "missing":
            message = "required key is missing"
        else:
            message = e["msg"].replace("Value error, ", "")
            if not isinstance(e.get("input"), Mapping):  # a whole table: not worth echoing
                message += f", got {e.get('input')!r}"
        problems.append(Problem(file, _line_of(text, loc), key, message))
    return problems


def parse_config(
    raw: Mapping[str, Any],
    *,
    base_dir: Path,
    file: str = "config",
    text: str = "",
    source: Path | None = None,
) -> ScenarioConfig:
    """Validate a config mapping and freeze it.

    Parameters
    ----------
    raw
        The parsed TOML (with any overrides already merged).
    base_dir
        Folder that relative input paths are resolved against.
    file, text
        Name and text of the config file, for error messages.
    source
        The config file path, kept on the result.

    Raises
    ------
    InputError
        With one :class:`~hubnet.errors.Problem` per invalid key or value.
    """
    problems: list[Problem] = []
    spec: _File | None = None
    try:
        spec = _File.model_validate(dict(raw))
    except ValidationError as err:
        problems += _problems_from(err, file, text)
    problems += _freight_problems(raw, base_dir, file, text)
    if problems or spec is None:
        raise InputError(problems)

    def resolve(p: str | None) -> Path | None:
        return None if p is None else _resolve(p, base_dir)

    sites = resolve(spec.inputs.sites)
    demand = resolve(spec.inputs.demand)
    assert sites is not None and demand is not None
    return ScenarioConfig(
        name=spec.scenario.name,
        description=spec.scenario.description,
        source=source,
        inputs=InputFiles(
            sites=sites,
            demand=demand,
            distances=resolve(spec.inputs.distances),
            volume_unit=spec.inputs.volume_unit,
            allow_same_site_demand=spec.inputs.allow_same_site_demand,
            sheet=spec.inputs.sheet,
            vehicles=resolve(spec.inputs.vehicles),
            fuels=resolve(spec.inputs.fuels),
        ),
        distances=DistanceParams(**spec.distances.model_dump()),
        model=HubModelParams(**spec.model.model_dump()),
        solver=SolverParams(**spec.solver.model_dump()),
        freight=_freight_params(spec, base_dir),
    )


def _resolve(p: str, base_dir: Path) -> Path:
    """A path from the config, relative ones taken from the config's folder."""
    path = Path(p).expanduser()
    return path if path.is_absolute() else (base_dir / path)


def _rules_spec(rules: str, base_dir: Path) -> str:
    """``hours.rules`` as kept on :class:`HoursParams`: a built-in name or a resolved path."""
    name = rules.strip()
    if name.lower() in BUILT_IN_HOURS_RULES:
        return name.lower()
    return str(_resolve(name, base_dir))


def _freight_params(spec: _File, base_dir: Path) -> FreightParams:
    """The validated ``[service]``, ``[hours]``, ``[freight]`` sections (and unit sizes)."""
    service, hours, freight = spec.service, spec.hours, spec.freight
    return FreightParams(
        service=ServiceParams(
            cutoff_h=service.cutoff,
            deliver_by_h=service.deliver_by,
            days=service.days,
            sort_hours=service.sort_hours,
        ),
        hours=HoursParams(
            rules=_rules_spec(hours.rules, base_dir),
            long_legs=hours.long_legs,
            relay_minutes=hours.relay_minutes,
            relay_cost=hours.relay_cost,
            second_driver_cost_per_hour=hours.second_driver_cost_per_hour,
        ),
        round_trips=freight.round_trips,
        integer_vehicles=freight.integer_vehicles,
        direct_min_load=freight.direct_min_load,
        value_of_time=freight.value_of_time,
        carbon_price_per_t=freight.carbon_price_per_t,
        emissions_basis=freight.emissions_basis,
        kg_per_unit=spec.inputs.kg_per_unit,
        m3_per_unit=spec.inputs.m3_per_unit,
        max_transit_h=freight.max_transit_h,
        minimise=freight.minimise,
    )


def _freight_problems(
    raw: Mapping[str, Any], base_dir: Path, file: str, text: str
) -> list[Problem]:
    """Checks across keys of the freight model, on the raw mapping.

    They run even when other keys are invalid, so every problem is
    reported at once; values of the wrong type are left to the schema.
    """

    def section(name: str) -> Mapping[str, Any]:
        value = raw.get(name)
        return value if isinstance(value, Mapping) else {}

    problems: list[Problem] = []
    vehicles = section("inputs").get("vehicles")
    if isinstance(vehicles, str) and vehicles and section("model").get("allocation") == "multiple":
        problems.append(
            Problem(
                file,
                _line_of(text, ("model", "allocation")),
                "model.allocation",
                "the freight model plans single allocation (each terminal works with one "
                "hub); set allocation = 'single', or remove inputs.vehicles to plan "
                "multiple allocation with the classic model",
            )
        )
    rules = section("hours").get("rules")
    if isinstance(rules, str) and rules.strip():
        spec = _rules_spec(rules, base_dir)
        where = (file, _line_of(text, ("hours", "rules")), "hours.rules")
        if spec not in BUILT_IN_HOURS_RULES:
            path = Path(spec)
            if not path.exists():
                word = rules.strip().lower()
                close = [r for r in BUILT_IN_HOURS_RULES if sorted(r) == sorted(word)]
                close = close or difflib.get_close_matches(word, BUILT_IN_HOURS_RULES, n=1)
                hint = f"; did you mean {close[0]!r}?" if close and not path.suffix else ""
                problems.append(
                    Problem(
                        *where,
                        f"rule file not found: {path}; expected 'eu', 'us' or the path "
                        f"of a TOML file with the drivers' hours limits{hint}",
                    )
                )
            elif not path.is_file():
                problems.append(Problem(*where, f"expected a rule file, got a folder: {path}"))
            else:
                # The file's own problems name the rule file and its lines.
                from hubnet.hours import load_rules

                try:
                    load_rules(path)
                except InputError as err:
                    problems += err.problems
    return problems


def load_config(path: str | Path, overrides: Mapping[str, Any] | None = None) -> ScenarioConfig:
    """Read a scenario config from a TOML file.

    Parameters
    ----------
    path
        The TOML file. Relative input paths are resolved against its folder.
    overrides
        Nested mapping merged on top of the file before validation, for
        example ``{"model": {"hubs": 4}}``.

    Raises
    ------
    InputError
        When the file is missing, is not valid TOML, or fails validation.
    """
    path = Path(path)
    name = str(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError(Problem(name, None, None, "config file not found")) from None
    except (OSError, UnicodeDecodeError) as err:
        raise InputError(Problem(name, None, None, f"cannot read config file: {err}")) from None
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        m = re.search(r"line (\d+)", str(err))
        line = int(m.group(1)) if m else None
        raise InputError(Problem(name, line, None, f"not valid TOML: {err}")) from None
    if overrides:
        raw = deep_merge(raw, overrides)
    return parse_config(raw, base_dir=path.parent, file=name, text=text, source=path)
