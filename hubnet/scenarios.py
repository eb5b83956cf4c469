"""Scenario studies: a base config plus named what-ifs, read from a sweep file.

A sweep file is a small TOML file of our own format. It names a base config
and the scenarios to run against it; each scenario is a set of changes:

- **config keys**, as in a config file (``[scenarios.NAME.model]`` with
  ``hubs = 3``, or the dotted form ``"model.hubs" = 3``): number of hubs,
  allocation rule, cost per unit-km, solver options, another input file,
  and for the freight model the ``[service]``, ``[hours]`` and
  ``[freight]`` keys (default cut-off and deadline, drivers' hours,
  carbon price...);
- **data edits**, applied in memory to the validated network (never by
  writing changed input files): demand scaled as a whole, by site, by
  origin, by destination or by OD pair; hub fixed, handling and transport
  costs scaled or set; sort capacities; hubs closed, forced open, or sites
  added as candidate hubs; and for the freight model: vehicle classes
  removed or added, their costs per vehicle-km (fuel price) and per hour
  (driver wage) scaled, a site's cut-off, delivery deadline or sort time
  and an OD pair's transit allowance set.

A ``[grid]`` table expands into one scenario per combination of values.

.. code-block:: toml

    [sweep]
    base = "demo.toml"            # relative to this file
    name = "iberia-what-ifs"      # optional; default the file name
    description = "Hub closures and growth"

    [defaults]                    # optional: applies to every scenario
    "solver.time_limit_s" = 120

    [scenarios.as-planned]        # an empty table: the base config as is

    [scenarios.growth-10]
    description = "10 % more volume everywhere"
    demand_scale = 1.1

    [scenarios.madrid-up]
    demand_scale_by_site = { MAD = 1.25 }        # volume from and to MAD
    demand_scale_by_pair = { "MAD>BCN" = 1.5 }   # one OD pair

    [scenarios.close-sev]
    close_hubs = ["SEV"]

    [scenarios.vigo-hub]
    add_candidates = { VIG = { hub_fixed_cost = 20000, handling_cost = 2.8 } }
    open_hubs = ["VIG"]

    [scenarios.fuel-up]
    transport_cost_scale = 1.08   # cost per unit-km x 1.08

    [scenarios.multiple]
    model = { allocation = "multiple" }

    [grid]
    "model.hubs" = [2, 3, 4]      # scenarios hubs-2, hubs-3, hubs-4

On a freight base (a config with ``inputs.vehicles``, here
``national_small.toml``), scenarios may also change the fleet, its costs
and the deadlines; these edits are an error on a classic base, and
``transport_cost_scale`` is one on a freight base (the freight model prices
vehicles, not unit-km):

.. code-block:: toml

    [scenarios.fuel-and-wages]
    vehicle_km_cost_scale = 1.12                   # every class's cost per km
    vehicle_hour_cost_scale_by_class = { A40 = 1.05 }

    [scenarios.road-trains]                        # one class out, one in
    remove_vehicle_classes = ["R75"]

    [scenarios.road-trains.add_vehicle_classes.T60]
    payload = 52                                   # fields as in vehicles.csv
    cost_per_km = 1.05
    cost_per_hour = 40
    speed_kmh = 70
    tiers = ["trunk"]                              # or "trunk direct"
    fuel_l_per_100km = 45

    [scenarios.later-cutoff]
    cutoff = { PAR = "20:30" }                     # as the sites file's cutoff column
    deliver_by = { LYO = "06:30" }
    max_hours = { "PAR>MAR" = 30 }                 # as the demand file's max_hours

    [scenarios.carbon-80]
    freight = { carbon_price_per_t = 80 }          # also [service] and [hours] keys

Scenario names become run folder names: letters, digits, ``.``, ``_`` and
``-`` only. The first scenario is the reference the comparison table
measures the others against.

Every scenario is checked before any is solved (:func:`check_sweep`), with
messages naming the sweep file, its line and the key, as for config files.
The format is versioned (``[sweep] format = 1``). Keys added since (the
freight what-ifs) do not change the meaning of the others; the number
changes only when the meaning of a key does.
"""

from __future__ import annotations

import copy
import dataclasses
import datetime
import difflib
import functools
import itertools
import math
import re
import tomllib
from collections.abc import Callable, Collection, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Annotated, Any

from pydantic import BaseModel, BeforeValidator, ConfigDict, Field, ValidationError
from pydantic_core import PydanticCustomError

from hubnet.config import (
    BUILT_IN_HOURS_RULES,
    CLOCK_EXPECT,
    ScenarioConfig,
    clock_hours,
    load_config,
)
from hubnet.data import NetworkData
from hubnet.errors import InputError, Problem
from hubnet.fleet import TIERS, Tier, VehicleClass

#: Config sections a scenario may change (``[scenario]`` is set by hubnet).
CONFIG_SECTIONS: tuple[str, ...] = (
    "inputs",
    "distances",
    "model",
    "solver",
    "service",
    "hours",
    "freight",
)
#: The one sweep file format version this hubnet reads.
SWEEP_FORMAT = 1
#: Input keys holding file paths: resolved against the sweep file's folder.
_PATH_KEYS = ("sites", "demand", "distances", "vehicles")
_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]{0,79}$")

Locate = Callable[[str], int | None]


# --------------------------------------------------------------------------
# Data edits
# --------------------------------------------------------------------------


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class NewCandidate(_Strict):
    """Hub figures of a site added as a candidate hub (currency per day, per unit)."""

    hub_fixed_cost: float = Field(ge=0)
    handling_cost: float = Field(default=0.0, ge=0)
    sort_capacity: float | None = Field(default=None, gt=0)


#: Error type of a check whose message quotes the wrong value (not echoed again).
_NAMED = "hubnet_value_named"


def _named(message: str) -> PydanticCustomError:
    """A validation error whose message already names the value."""
    return PydanticCustomError(_NAMED, "{message}", {"message": message})


def _tiers(value: Any) -> tuple[Tier, ...]:
    """The ``tiers`` of an added vehicle class: a list, or text as in vehicles.csv."""
    from hubnet.inputs import _split_tiers, _tier_problem

    if isinstance(value, str):
        why = _tier_problem(value)
        if why is not None:
            raise _named(why)
        words = _split_tiers(value)
    elif isinstance(value, list | tuple) and value and all(isinstance(v, str) for v in value):
        words = [w for v in value for w in _split_tiers(v)]
        why = _tier_problem(" ".join(words))
        if why is not None:
            raise _named(why)
    else:
        raise ValueError(
            'expected a list of tiers such as ["feeder", "trunk"] (any of '
            f"{', '.join(TIERS)}), or text as in vehicles.csv"
        )
    return tuple(t for t in TIERS if t in words)


def _speed(value: Any) -> Any:
    """Check a speed as vehicles.csv does (numbers only; the type is left to pydantic)."""
    from hubnet.inputs import MAX_SPEED_KMH

    if isinstance(value, int | float) and not isinstance(value, bool):
        if not (math.isfinite(value) and 0 < value <= MAX_SPEED_KMH):
            raise ValueError(f"expected a speed in km/h above 0 and at most {MAX_SPEED_KMH:g}")
    return value


def _fuel(value: Any) -> Any:
    """A fuel of the bundled emission factor table, spelt as the table spells it."""
    from hubnet.emissions import load_fuels

    if not isinstance(value, str):
        return value  # pydantic reports the type
    fuels = list(load_fuels())
    by_name = {f.casefold(): f for f in fuels}
    found = by_name.get(value.strip().casefold())
    if found is None:
        raise _named(
            f"unknown fuel {value!r}; the emission factor table has {', '.join(fuels)}"
            f"{_hint(value, fuels)}"
        )
    return found


class NewVehicleClass(_Strict):
    """A vehicle class added by a scenario; fields, units and checks as in vehicles.csv.

    Attributes
    ----------
    name
        Display name; default the class id (the key it is given under).
    payload
        Volume units one vehicle carries, > 0.
    cost_per_km, cost_per_hour, cost_per_dispatch
        Currency per vehicle-km, per hour on the road, per dispatch, >= 0.
    speed_kmh
        Average road speed, km/h, above 0 and at most 150.
    tiers
        Any of ``feeder``, ``trunk``, ``direct``: a list, or text as in the
        ``tiers`` column (``"feeder trunk"``).
    max_kg, max_m3
        Optional weight (kg) and cubic (m3) limits, > 0.
    fuel_l_per_100km
        Litres per 100 vehicle-km, >= 0.
    fuel
        A fuel of the emission factor table (default ``diesel``).
    """

    name: str | None = Field(default=None, min_length=1)
    payload: float = Field(gt=0, allow_inf_nan=False)
    cost_per_km: float = Field(ge=0, allow_inf_nan=False)
    speed_kmh: Annotated[float, BeforeValidator(_speed)]
    tiers: Annotated[tuple[Tier, ...], BeforeValidator(_tiers)]
    cost_per_hour: float = Field(default=0.0, ge=0, allow_inf_nan=False)
    cost_per_dispatch: float = Field(default=0.0, ge=0, allow_inf_nan=False)
    max_kg: float | None = Field(default=None, gt=0, allow_inf_nan=False)
    max_m3: float | None = Field(default=None, gt=0, allow_inf_nan=False)
    fuel_l_per_100km: float = Field(default=0.0, ge=0, allow_inf_nan=False)
    fuel: Annotated[str, BeforeValidator(_fuel)] = "diesel"

    def vehicle_class(self, class_id: str) -> VehicleClass:
        """The class as the freight model takes it."""
        return VehicleClass(
            id=class_id,
            name=self.name or class_id,
            payload=self.payload,
            cost_per_km=self.cost_per_km,
            speed_kmh=self.speed_kmh,
            tiers=frozenset(self.tiers),
            cost_per_hour=self.cost_per_hour,
            cost_per_dispatch=self.cost_per_dispatch,
            max_kg=self.max_kg,
            max_m3=self.max_m3,
            fuel_l_per_100km=self.fuel_l_per_100km,
            fuel=self.fuel,
        )


def _clock_text(value: Any) -> str:
    """A time of day as in the sites file's cutoff and deliver_by columns, as ``HH:MM``.

    Text is checked and kept in a standard form (so run records show it as
    written); a TOML local time (``20:30:00`` unquoted) becomes text.
    """
    if isinstance(value, datetime.time):
        value = value.strftime("%H:%M:%S" if value.second else "%H:%M")
    if not isinstance(value, str):
        raise ValueError(f'expected {CLOCK_EXPECT}, written as text such as "18:00"')
    hours = clock_hours(value)
    minutes, seconds = divmod(round(hours * 3600), 60)
    text = f"{minutes // 60:02d}:{minutes % 60:02d}"
    return text + (f":{seconds:02d}" if seconds else "")


def _clocks(value: Any) -> Any:
    """Site id to time of day; a single time is pointed to the service defaults."""
    if isinstance(value, str | datetime.time):
        raise ValueError(
            'expected a table of site ids and times, such as { PAR = "20:00" }; the '
            "default of every site without its own time is a config key of [service]"
        )
    return value


class DataEdits(_Strict):
    """Changes a scenario makes to the validated network, all optional.

    Attributes
    ----------
    demand_scale
        Factor on every OD volume.
    demand_scale_by_site
        Factor per site id on the volume it sends and receives (a pair
        between two listed sites gets both factors).
    demand_scale_by_origin, demand_scale_by_destination
        Factor per site id on the volume it sends, or receives.
    demand_scale_by_pair
        Factor per OD pair written ``"ORIGIN>DESTINATION"``.
    demand_scale_by_region
        Factor per region (the sites file's ``region`` column) on the volume
        its sites send and receive; a pair within one region gets the factor
        once, a pair between two listed regions gets both.
    transport_cost_scale
        Factor on ``model.cost_per_unit_km`` (fuel price, driver wages).
    hub_fixed_cost_scale, handling_cost_scale, sort_capacity_scale
        Factors on every candidate hub's fixed cost, handling cost and sort
        capacity (an unlimited capacity stays unlimited).
    hub_fixed_cost, handling_cost, sort_capacity
        New values per candidate hub id (after the factors).
    close_hubs
        Candidate hubs that may not open.
    open_hubs
        Candidate hubs forced open.
    add_candidates
        Sites that become candidate hubs, with their hub figures.

    The freight model's edits (the network must have vehicle classes):

    remove_vehicle_classes
        Vehicle class ids taken out of the fleet. Classes allowed on feeder
        and on trunk legs must remain.
    add_vehicle_classes
        New vehicle classes by id (:class:`NewVehicleClass`). An id also
        removed is replaced by the new class.
    vehicle_km_cost_scale, vehicle_km_cost_scale_by_class
        Factor on every class's cost per vehicle-km (fuel price), and per
        class id; both multiply, added classes included.
    vehicle_hour_cost_scale, vehicle_hour_cost_scale_by_class
        The same on the cost per hour on the road (driver wage). The second
        driver's cost and the relay cost are ``[hours]`` config keys.
    cutoff, deliver_by
        New collection cut-off and delivery deadline per site id (times of
        day ``"HH:MM"``, as in the sites file).
    sort_hours
        New sort time per candidate hub id, hours >= 0.
    max_hours
        New transit allowance per OD pair ``"ORIGIN>DESTINATION"``, hours
        > 0 (as the demand file's ``max_hours``).

    Factors are dimensionless and applied in the order listed; every
    factor on demand multiplies.
    """

    demand_scale: float | None = Field(default=None, gt=0)
    demand_scale_by_site: dict[str, float] = Field(default_factory=dict)
    demand_scale_by_origin: dict[str, float] = Field(default_factory=dict)
    demand_scale_by_destination: dict[str, float] = Field(default_factory=dict)
    demand_scale_by_pair: dict[str, float] = Field(default_factory=dict)
    demand_scale_by_region: dict[str, float] = Field(default_factory=dict)
    transport_cost_scale: float | None = Field(default=None, gt=0)
    hub_fixed_cost_scale: float | None = Field(default=None, ge=0)
    handling_cost_scale: float | None = Field(default=None, ge=0)
    sort_capacity_scale: float | None = Field(default=None, gt=0)
    hub_fixed_cost: dict[str, float] = Field(default_factory=dict)
    handling_cost: dict[str, float] = Field(default_factory=dict)
    sort_capacity: dict[str, float] = Field(default_factory=dict)
    close_hubs: list[str] = Field(default_factory=list)
    open_hubs: list[str] = Field(default_factory=list)
    add_candidates: dict[str, NewCandidate] = Field(default_factory=dict)
    remove_vehicle_classes: list[str] = Field(default_factory=list)
    add_vehicle_classes: dict[str, NewVehicleClass] = Field(default_factory=dict)
    vehicle_km_cost_scale: float | None = Field(default=None, ge=0, allow_inf_nan=False)
    vehicle_km_cost_scale_by_class: dict[str, float] = Field(default_factory=dict)
    vehicle_hour_cost_scale: float | None = Field(default=None, ge=0, allow_inf_nan=False)
    vehicle_hour_cost_scale_by_class: dict[str, float] = Field(default_factory=dict)
    cutoff: Annotated[
        dict[str, Annotated[str, BeforeValidator(_clock_text)]], BeforeValidator(_clocks)
    ] = Field(default_factory=dict)
    deliver_by: Annotated[
        dict[str, Annotated[str, BeforeValidator(_clock_text)]], BeforeValidator(_clocks)
    ] = Field(default_factory=dict)
    sort_hours: dict[str, float] = Field(default_factory=dict)
    max_hours: dict[str, float] = Field(default_factory=dict)

    def as_dict(self) -> dict[str, Any]:
        """The edits given, as plain data (for run records and hashing)."""
        return self.model_dump(exclude_defaults=True)

    @property
    def is_empty(self) -> bool:
        """True when the scenario changes no data."""
        return not self.as_dict()


EDIT_KEYS: tuple[str, ...] = tuple(DataEdits.model_fields)
#: Edits holding tables of figures per new site or class (for messages).
_NESTED: dict[str, type[BaseModel]] = {
    "add_candidates": NewCandidate,
    "add_vehicle_classes": NewVehicleClass,
}
#: Edits of the freight model: they need a network with vehicle classes.
FREIGHT_EDIT_KEYS: tuple[str, ...] = (
    "remove_vehicle_classes",
    "add_vehicle_classes",
    "vehicle_km_cost_scale",
    "vehicle_km_cost_scale_by_class",
    "vehicle_hour_cost_scale",
    "vehicle_hour_cost_scale_by_class",
    "cutoff",
    "deliver_by",
    "sort_hours",
    "max_hours",
)


def parse_edits(
    raw: Mapping[str, Any],
    *,
    file: str = "scenario",
    locate: Locate | None = None,
    prefix: str = "",
) -> DataEdits:
    """Validate data edits given as a mapping.

    Parameters
    ----------
    raw
        Edit name to value, as in a sweep file.
    file, locate, prefix
        For messages: the file, a function giving the line of an edit
        name, and the key prefix shown (``scenarios.NAME.``).

    Raises
    ------
    InputError
        One problem per invalid edit.
    """
    try:
        edits = DataEdits.model_validate(dict(raw))
    except ValidationError as err:
        problems = []
        for e in err.errors():
            loc = [str(p) for p in e["loc"]]
            key = loc[0] if loc else ""
            if e["type"] == "extra_forbidden" and len(loc) == 1:
                message = f"unknown key {key!r}{_hint(key, (*EDIT_KEYS, *CONFIG_SECTIONS))}"
            elif e["type"] == "extra_forbidden" and len(loc) == 3 and key in _NESTED:
                known = tuple(_NESTED[key].model_fields)
                hint = _hint(loc[2], known) or f"; known keys: {', '.join(known)}"
                message = f"{loc[1]}: unknown key {loc[2]!r}{hint}"
            elif e["type"] == "missing" and len(loc) > 1:
                message = f"{'.'.join(loc[1:])}: required key is missing"
            else:
                message = e["msg"].replace("Value error, ", "")
                if not isinstance(e.get("input"), Mapping) and e["type"] != _NAMED:
                    message += f", got {e.get('input')!r}"
                if len(loc) > 1:
                    message = f"{'.'.join(loc[1:])}: {message}"
            line = locate(key) if locate else None
            problems.append(Problem(file, line, prefix + key, message))
        raise InputError(problems) from None
    problems = []
    for key in (
        "demand_scale_by_site",
        "demand_scale_by_origin",
        "demand_scale_by_destination",
        "demand_scale_by_pair",
        "demand_scale_by_region",
        "hub_fixed_cost",
        "handling_cost",
        "vehicle_km_cost_scale_by_class",
        "vehicle_hour_cost_scale_by_class",
        "sort_hours",
    ):
        for site, value in getattr(edits, key).items():
            if not (math.isfinite(value) and value >= 0):
                problems.append(
                    Problem(
                        file,
                        locate(key) if locate else None,
                        prefix + key,
                        f"{site}: expected a number >= 0, got {value!r}",
                    )
                )
    for key in ("sort_capacity", "max_hours"):
        for site, value in getattr(edits, key).items():
            if not value > 0 or (key == "max_hours" and not math.isfinite(value)):
                problems.append(
                    Problem(
                        file,
                        locate(key) if locate else None,
                        prefix + key,
                        f"{site}: expected a number > 0, got {value!r}",
                    )
                )
    if problems:
        raise InputError(problems)
    return edits


def _hint(word: str, known: Sequence[str]) -> str:
    close = difflib.get_close_matches(word, list(known), n=1)
    return f"; did you mean {close[0]!r}?" if close else ""


def apply_config_edits(config: ScenarioConfig, edits: DataEdits) -> ScenarioConfig:
    """Apply the edits that change config values (``transport_cost_scale``)."""
    if edits.transport_cost_scale is None:
        return config
    model = dataclasses.replace(
        config.model, cost_per_unit_km=config.model.cost_per_unit_km * edits.transport_cost_scale
    )
    return dataclasses.replace(config, model=model)


def apply_data_edits(
    data: NetworkData,
    edits: DataEdits,
    *,
    file: str = "scenario",
    locate: Locate | None = None,
    prefix: str = "",
) -> NetworkData:
    """Return the network with a scenario's data edits applied.

    The network is changed with :func:`dataclasses.replace` only; input
    files are never touched.

    Parameters
    ----------
    data
        The validated network.
    edits
        The changes.
    file, locate, prefix
        For messages, as in :func:`parse_edits`.

    Returns
    -------
    NetworkData
        A new network (``data`` itself when there is nothing to change).

    Raises
    ------
    InputError
        When an edit names an unknown site, an OD pair without demand, or a
        site that cannot take the change (closing a site that is not a
        candidate hub, forcing one open and closed, ...).

    Examples
    --------
    >>> from hubnet.data import Demand, NetworkData, Site
    >>> net = NetworkData(
    ...     sites=(Site("A", "A", x=0, y=0), Site("B", "B", x=1, y=0)),
    ...     demand=(Demand("A", "B", 10.0), Demand("B", "A", 4.0)),
    ...     coordinates="planar",
    ... )
    >>> new = apply_data_edits(net, DataEdits(demand_scale=1.5, close_hubs=["B"]))
    >>> [d.volume for d in new.demand], new.sites[1].hub_status
    ([15.0, 6.0], 'closed')
    """
    if edits.is_empty:
        return data
    problems: list[Problem] = []
    ids = data.ids
    known = set(ids)

    def bad(key: str, message: str) -> None:
        problems.append(Problem(file, locate(key) if locate else None, prefix + key, message))

    def check_sites(key: str, names: Sequence[str]) -> None:
        for name in names:
            if name not in known:
                bad(key, f"unknown site {name!r}{_hint(name, ids)}")

    for key in (
        "demand_scale_by_site",
        "demand_scale_by_origin",
        "demand_scale_by_destination",
        "hub_fixed_cost",
        "handling_cost",
        "sort_capacity",
        "close_hubs",
        "open_hubs",
        "add_candidates",
        "cutoff",
        "deliver_by",
        "sort_hours",
    ):
        check_sites(key, list(getattr(edits, key)))

    # The freight model's edits need vehicle classes.
    freight_keys = [k for k in FREIGHT_EDIT_KEYS if getattr(edits, k) not in (None, [], {})]
    if not data.vehicles:
        for key in freight_keys:
            bad(
                key,
                "the base has no vehicle classes (its config names no inputs.vehicles "
                "file): this edit changes the freight model only",
            )
    elif edits.transport_cost_scale is not None:
        bad(
            "transport_cost_scale",
            "the freight model prices vehicles, not unit-km (model.cost_per_unit_km is not "
            "used): scale vehicle costs with vehicle_km_cost_scale or vehicle_hour_cost_scale",
        )
    use_freight = bool(data.vehicles)

    # Demand.
    have = {(d.origin, d.destination) for d in data.demand}

    def od_pairs(key: str, values: Mapping[str, float]) -> dict[tuple[str, str], float]:
        out: dict[tuple[str, str], float] = {}
        for text, value in values.items():
            parts = [p.strip() for p in text.split(">")]
            if len(parts) != 2 or not all(parts):
                bad(key, f"{text!r}: write an OD pair as 'ORIGIN>DESTINATION'")
                continue
            origin, destination = parts
            check_sites(key, parts)
            if {origin, destination} <= known and (origin, destination) not in have:
                bad(key, f"{text!r}: there is no demand from {origin} to {destination}")
            out[(origin, destination)] = value
        return out

    pairs = od_pairs("demand_scale_by_pair", edits.demand_scale_by_pair)
    max_hours = od_pairs("max_hours", edits.max_hours) if use_freight else {}
    region_of = {site.id: site.region for site in data.sites}
    known_regions = sorted({r for r in region_of.values() if r})
    for name in edits.demand_scale_by_region:
        if name not in known_regions:
            where = (
                f"{_hint(name, known_regions)}"
                if known_regions
                else "; the sites file has no region column"
            )
            bad("demand_scale_by_region", f"unknown region {name!r}{where}")
    demand = []
    for d in data.demand:
        f = edits.demand_scale if edits.demand_scale is not None else 1.0
        r_from, r_to = region_of.get(d.origin, ""), region_of.get(d.destination, "")
        f *= edits.demand_scale_by_region.get(r_from, 1.0) if r_from else 1.0
        if r_to and r_to != r_from:
            f *= edits.demand_scale_by_region.get(r_to, 1.0)
        f *= edits.demand_scale_by_site.get(d.origin, 1.0)
        f *= edits.demand_scale_by_site.get(d.destination, 1.0)
        f *= edits.demand_scale_by_origin.get(d.origin, 1.0)
        f *= edits.demand_scale_by_destination.get(d.destination, 1.0)
        f *= pairs.get((d.origin, d.destination), 1.0)
        new_d = d if f == 1.0 else dataclasses.replace(d, volume=d.volume * f)
        if (d.origin, d.destination) in max_hours:
            new_d = dataclasses.replace(new_d, max_hours=max_hours[(d.origin, d.destination)])
        demand.append(new_d)

    # Sites.
    both = sorted(set(edits.close_hubs) & set(edits.open_hubs))
    if both:
        bad("open_hubs", f"{', '.join(both)} both forced open and closed")
    sites = []
    for s in data.sites:
        site = s
        if s.id in edits.add_candidates:
            if s.is_candidate:
                bad("add_candidates", f"site {s.id!r} is already a candidate hub")
            new = edits.add_candidates[s.id]
            site = dataclasses.replace(
                site,
                can_be_hub=True,
                hub_status="candidate",
                hub_fixed_cost=new.hub_fixed_cost,
                handling_cost=new.handling_cost,
                sort_capacity=new.sort_capacity,
            )
        changes: dict[str, Any] = {}
        if site.is_candidate:
            if edits.hub_fixed_cost_scale is not None:
                changes["hub_fixed_cost"] = site.hub_fixed_cost * edits.hub_fixed_cost_scale
            if edits.handling_cost_scale is not None:
                changes["handling_cost"] = site.handling_cost * edits.handling_cost_scale
            if edits.sort_capacity_scale is not None and site.sort_capacity is not None:
                changes["sort_capacity"] = site.sort_capacity * edits.sort_capacity_scale
        for key, column in (
            ("hub_fixed_cost", "hub_fixed_cost"),
            ("handling_cost", "handling_cost"),
            ("sort_capacity", "sort_capacity"),
        ):
            values: Mapping[str, float] = getattr(edits, key)
            if s.id in values:
                if not site.is_candidate:
                    bad(key, f"site {s.id!r} is not a candidate hub (add it with add_candidates)")
                changes[column] = values[s.id]
        if use_freight:
            if s.id in edits.cutoff:
                changes["cutoff_h"] = clock_hours(edits.cutoff[s.id])
            if s.id in edits.deliver_by:
                changes["deliver_by_h"] = clock_hours(edits.deliver_by[s.id])
            if s.id in edits.sort_hours:
                if not site.is_candidate:
                    bad(
                        "sort_hours",
                        f"site {s.id!r} is not a candidate hub (add it with add_candidates)",
                    )
                changes["sort_hours"] = edits.sort_hours[s.id]
        if s.id in edits.close_hubs:
            if not site.is_candidate:
                bad("close_hubs", f"site {s.id!r} is not a candidate hub: nothing to close")
            changes["hub_status"] = "closed"
        if s.id in edits.open_hubs:
            if not site.is_candidate:
                bad(
                    "open_hubs",
                    f"site {s.id!r} is not a candidate hub (add it with add_candidates)",
                )
            changes["hub_status"] = "open"
        sites.append(dataclasses.replace(site, **changes) if changes else site)
    vehicles = _edit_vehicles(data.vehicles, edits, bad) if use_freight else data.vehicles
    if problems:
        raise InputError(problems)
    return dataclasses.replace(
        data, sites=tuple(sites), demand=tuple(demand), vehicles=tuple(vehicles)
    )


def _edit_vehicles(
    classes: Sequence[VehicleClass], edits: DataEdits, bad: Callable[[str, str], None]
) -> list[VehicleClass]:
    """The vehicle classes with a scenario's removals, additions and cost factors."""
    from hubnet.inputs import _NEEDED_TIERS

    ids = [v.id for v in classes]

    def unknown(key: str, class_id: str, among: Sequence[str]) -> None:
        hint = _hint(class_id, among) or f"; the classes are {', '.join(among)}"
        bad(key, f"unknown vehicle class {class_id!r}{hint}")

    removed = set(edits.remove_vehicle_classes)
    for class_id in edits.remove_vehicle_classes:
        if class_id not in ids:
            unknown("remove_vehicle_classes", class_id, ids)
    out = [v for v in classes if v.id not in removed]
    for class_id, new in edits.add_vehicle_classes.items():
        if any(v.id == class_id for v in out):
            bad(
                "add_vehicle_classes",
                f"vehicle class {class_id!r} exists; to replace it, also list it in "
                "remove_vehicle_classes",
            )
            continue
        out.append(new.vehicle_class(class_id))
    left = [v.id for v in out]
    for key in ("vehicle_km_cost_scale_by_class", "vehicle_hour_cost_scale_by_class"):
        for class_id in getattr(edits, key):
            if class_id in removed and class_id not in left:
                bad(key, f"vehicle class {class_id!r} is removed by remove_vehicle_classes")
            elif class_id not in left:
                unknown(key, class_id, left)
    if edits.remove_vehicle_classes:
        for tier, legs in _NEEDED_TIERS:
            if not any(tier in v.tiers for v in out):
                bad(
                    "remove_vehicle_classes",
                    f"no vehicle class left may run on {legs}: keep a class with {tier!r} "
                    "in its tiers, or add one with add_vehicle_classes",
                )
    km_all = 1.0 if edits.vehicle_km_cost_scale is None else edits.vehicle_km_cost_scale
    hour_all = 1.0 if edits.vehicle_hour_cost_scale is None else edits.vehicle_hour_cost_scale
    scaled = []
    for v in out:
        km = km_all * edits.vehicle_km_cost_scale_by_class.get(v.id, 1.0)
        hour = hour_all * edits.vehicle_hour_cost_scale_by_class.get(v.id, 1.0)
        if km != 1.0 or hour != 1.0:
            v = dataclasses.replace(
                v, cost_per_km=v.cost_per_km * km, cost_per_hour=v.cost_per_hour * hour
            )
        scaled.append(v)
    return scaled


# --------------------------------------------------------------------------
# Sweep files
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class ScenarioSpec:
    """One scenario of a sweep, before loading.

    Attributes
    ----------
    name
        Scenario name (also the run folder's name).
    description
        Shown in outputs.
    overrides
        Nested config overrides merged on the base config (the scenario
        name included).
    edits
        Data edits as plain data (see :class:`DataEdits`).
    origins
        For messages: the config key path (``("model", "hubs")``) or edit
        name (``("close_hubs",)``) to the key path in the sweep file that
        set it.
    """

    name: str
    description: str
    overrides: Mapping[str, Any]
    edits: Mapping[str, Any]
    origins: Mapping[tuple[str, ...], tuple[str, ...]]

    @property
    def data_edits(self) -> DataEdits:
        """The edits, validated."""
        return DataEdits.model_validate(dict(self.edits))


@dataclass(frozen=True)
class Sweep:
    """A sweep file, read and checked for form (not yet for data).

    Attributes
    ----------
    name, description
        From ``[sweep]``.
    path
        The sweep file.
    base
        The base config file.
    scenarios
        In file order, grid scenarios last.
    text
        The file's text (for line numbers in messages).
    """

    name: str
    description: str
    path: Path
    base: Path
    scenarios: tuple[ScenarioSpec, ...]
    text: str

    @functools.cached_property
    def _index(self) -> dict[tuple[str, ...], int]:
        return _key_lines(self.text)

    def line(self, *keys: str) -> int | None:
        """Line (1-based) of a key path in the sweep file (longest prefix found)."""
        index = self._index
        path = tuple(keys)
        while path:
            if path in index:
                return index[path]
            path = path[:-1]
        return None

    def scenario(self, name: str) -> ScenarioSpec:
        """The scenario with this name (:class:`KeyError` when absent)."""
        for spec in self.scenarios:
            if spec.name == name:
                return spec
        raise KeyError(name)


def _key_lines(text: str) -> dict[tuple[str, ...], int]:
    """Map every table header and key path of a TOML text to its first line."""
    out: dict[tuple[str, ...], int] = {}
    table: tuple[str, ...] = ()
    header = re.compile(r"^\s*\[\[?\s*(.+?)\s*\]\]?\s*(#.*)?$")
    for number, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        if not stripped or stripped.startswith("#"):
            continue
        m = header.match(line)
        if m and not stripped.startswith("[="):
            path = _key_path(m.group(1))
            if path is not None:
                table = path
                for n in range(1, len(table) + 1):  # [a.b.c] also defines a.b
                    out.setdefault(table[:n], number)
            continue
        lhs = _left_of_equals(stripped)
        if lhs is None:
            continue
        path = _key_path(lhs)
        if path is not None:
            out.setdefault(table + path, number)
    return out


def _left_of_equals(line: str) -> str | None:
    quote = ""
    for i, ch in enumerate(line):
        if quote:
            if ch == quote:
                quote = ""
        elif ch in "\"'":
            quote = ch
        elif ch == "=":
            return line[:i].strip()
    return None


def _key_path(key: str) -> tuple[str, ...] | None:
    try:
        doc: Any = tomllib.loads(f"{key} = 0")
    except tomllib.TOMLDecodeError:
        return None
    path: list[str] = []
    while isinstance(doc, dict) and len(doc) == 1:
        k = next(iter(doc))
        path.append(k)
        doc = doc[k]
    return tuple(path)


def _flatten(table: Mapping[str, Any], prefix: tuple[str, ...] = ()) -> dict[tuple[str, ...], Any]:
    """Leaf key paths of nested tables; dotted keys (``"model.hubs"``) are split."""
    out: dict[tuple[str, ...], Any] = {}
    for key, value in table.items():
        parts = tuple(key.split(".")) if "." in key else (key,)
        path = prefix + parts
        if isinstance(value, Mapping) and (
            path[0] in CONFIG_SECTIONS or (len(path) > 1 and path[0] not in EDIT_KEYS)
        ):
            out.update(_flatten(value, path))
        else:
            out[path] = value
    return out


class _Collector:
    """Collects problems of one sweep file."""

    def __init__(self, file: str, text: str):
        self.file = file
        self.index = _key_lines(text)
        self.problems: list[Problem] = []

    def line(self, path: Sequence[str]) -> int | None:
        p = tuple(path)
        while p:
            if p in self.index:
                return self.index[p]
            p = p[:-1]
        return None

    def add(self, path: Sequence[str], message: str, shown: str | None = None) -> None:
        self.problems.append(Problem(self.file, self.line(path), shown or ".".join(path), message))


def _split_changes(
    table: Mapping[str, Any],
    where: tuple[str, ...],
    sweep_dir: Path,
    out: _Collector,
) -> tuple[dict[str, Any], dict[str, Any], dict[tuple[str, ...], tuple[str, ...]]]:
    """Split a scenario (or defaults) table into config overrides and data edits."""
    overrides: dict[str, Any] = {}
    edits: dict[str, Any] = {}
    origins: dict[tuple[str, ...], tuple[str, ...]] = {}
    for key, value in table.items():
        if key == "description":
            continue
        head = key.split(".")[0]
        if head in CONFIG_SECTIONS:
            if "." not in key and not isinstance(value, Mapping):
                out.add((*where, key), f"expected a table of {key} keys, got {value!r}")
                continue
            leaves = _flatten({key: value})
            for path, leaf in leaves.items():
                is_file = path[0] == "inputs" and len(path) == 2 and path[1] in _PATH_KEYS
                if path == ("hours", "rules") and isinstance(leaf, str):
                    is_file = (
                        bool(leaf.strip()) and leaf.strip().lower() not in BUILT_IN_HOURS_RULES
                    )
                if is_file and isinstance(leaf, str):
                    p = Path(leaf).expanduser()
                    leaf = str(p if p.is_absolute() else (sweep_dir / p).absolute())
                node = overrides
                for part in path[:-1]:
                    node = node.setdefault(part, {})
                    if not isinstance(node, dict):
                        break
                else:
                    node[path[-1]] = leaf
                origins[path] = (*where, *((key,) if "." in key else path))
        elif head == "scenario":
            out.add(
                (*where, key),
                "a scenario's name is its table name, and its text is set with description = ...",
            )
        elif "." in key:
            known = (*EDIT_KEYS, *CONFIG_SECTIONS, "description")
            out.add((*where, key), f"unknown key {key!r}{_hint(head, known)}")
        else:
            edits[key] = value
            origins[(key,)] = (*where, key)
    return overrides, edits, origins


def _grid_label(path: tuple[str, ...], value: Any) -> str:
    text = "true" if value is True else "false" if value is False else str(value)
    return re.sub(r"[^A-Za-z0-9._-]+", "-", f"{path[-1]}-{text}").strip("-")


def load_sweep(path: str | Path, *, check: bool = False) -> Sweep:
    """Read a sweep file and check its form (and, with ``check``, every scenario).

    Parameters
    ----------
    path
        The sweep file.
    check
        Also load and check every scenario against its data
        (:func:`check_sweep`), reporting the problems of both steps at once.

    Checks the TOML, the ``[sweep]`` table, scenario names, the data
    edits' types and ranges, and expands the grid. Config values and data
    edits against the data are checked by :func:`check_sweep`.

    Raises
    ------
    InputError
        With every problem found, each naming the sweep file, the line and
        the key.
    """
    sweep, problems, bad = _read_sweep(Path(path))
    if check and sweep is not None:
        try:
            check_sweep(sweep, skip=bad)
        except InputError as err:
            problems.extend(err.problems)
    if problems or sweep is None:
        raise InputError(_unique(problems))
    return sweep


def _read_sweep(path: Path) -> tuple[Sweep | None, list[Problem], set[str]]:
    """The sweep (None when its [sweep] table is unusable), its form problems, bad scenarios."""
    file = str(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError(Problem(file, None, None, "sweep file not found")) from None
    except (OSError, UnicodeDecodeError) as err:
        raise InputError(Problem(file, None, None, f"cannot read sweep file: {err}")) from None
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        m = re.search(r"line (\d+)", str(err))
        raise InputError(
            Problem(file, int(m.group(1)) if m else None, None, f"not valid TOML: {err}")
        ) from None
    out = _Collector(file, text)
    sweep_dir = path.parent

    known_top = ("sweep", "defaults", "scenarios", "grid")
    for key in raw:
        if key not in known_top:
            out.add(
                (key,),
                f"unknown table {key!r}{_hint(key, known_top)}; known: {', '.join(known_top)}",
            )
    head = raw.get("sweep")
    base: Path | None = None
    name = path.stem
    description = ""
    if not isinstance(head, Mapping):
        out.add(("sweep",), 'a [sweep] table with base = "CONFIG.toml" is required', "sweep")
    else:
        for key in head:
            if key not in ("base", "name", "description", "format"):
                hint = _hint(key, ("base", "name", "description", "format"))
                out.add(("sweep", key), f"unknown key {key!r}{hint}")
        fmt = head.get("format", SWEEP_FORMAT)
        if fmt != SWEEP_FORMAT:
            out.add(
                ("sweep", "format"),
                f"format {fmt!r} is not known to this hubnet (it reads format {SWEEP_FORMAT})",
            )
        b = head.get("base")
        if not isinstance(b, str) or not b:
            out.add(("sweep", "base"), "required: the base config file, relative to this file")
        else:
            bp = Path(b).expanduser()
            base = bp if bp.is_absolute() else sweep_dir / bp
            if not base.is_file():
                out.add(("sweep", "base"), f"config file not found: {base}")
        n = head.get("name", name)
        if not isinstance(n, str) or not _NAME.match(n):
            out.add(("sweep", "name"), f"expected letters, digits, '.', '_' or '-', got {n!r}")
        else:
            name = n
        description = str(head.get("description", ""))

    defaults = raw.get("defaults", {})
    if not isinstance(defaults, Mapping):
        out.add(("defaults",), "expected a table")
        defaults = {}
    d_over, d_edits, d_origins = _split_changes(defaults, ("defaults",), sweep_dir, out)

    specs: list[ScenarioSpec] = []
    scenarios = raw.get("scenarios", {})
    if not isinstance(scenarios, Mapping):
        out.add(("scenarios",), "expected tables [scenarios.NAME]")
        scenarios = {}
    for sname, table in scenarios.items():
        where = ("scenarios", sname)
        if not _NAME.match(sname):
            out.add(
                where,
                "scenario names become folder names: use letters, digits, "
                f"'.', '_' or '-' (at most 80), got {sname!r}",
            )
            continue
        if not isinstance(table, Mapping):
            out.add(where, f"expected a table [scenarios.{sname}]")
            continue
        over, edits, origins = _split_changes(table, where, sweep_dir, out)
        desc = table.get("description", "")
        specs.append(_spec(sname, str(desc), (d_over, d_edits, d_origins), (over, edits, origins)))

    grid = raw.get("grid")
    if grid is not None:
        specs.extend(_grid_specs(grid, sweep_dir, out, (d_over, d_edits, d_origins)))

    if not specs and not out.problems:
        out.add(
            ("scenarios",), "no scenarios: add [scenarios.NAME] tables or a [grid]", "scenarios"
        )
    seen: set[str] = set()
    bad: set[str] = set()
    for spec in specs:
        if spec.name in seen:
            out.add(("grid",), f"two scenarios are named {spec.name!r}", "grid")
        seen.add(spec.name)
        try:
            parse_edits(spec.edits, file=file)
        except InputError as err:
            bad.add(spec.name)
            for p in err.problems:
                origin = spec.origins.get((p.column or "",), ("scenarios", spec.name))
                shown = ".".join(origin)
                message = p.message
                if origin[0] == "grid":
                    message = f"scenario {spec.name}: {message}"
                out.problems.append(Problem(file, out.line(origin), shown, message))
    if base is None or not base.is_file() or not specs:
        return None, out.problems, bad
    return Sweep(name, description, path, base, tuple(specs), text), out.problems, bad


def _spec(
    name: str,
    description: str,
    defaults: tuple[dict[str, Any], dict[str, Any], dict[tuple[str, ...], tuple[str, ...]]],
    own: tuple[dict[str, Any], dict[str, Any], dict[tuple[str, ...], tuple[str, ...]]],
) -> ScenarioSpec:
    from hubnet.config import deep_merge

    overrides = deep_merge(defaults[0], own[0])
    scen: dict[str, Any] = {"name": name}
    if description:
        scen["description"] = description
    overrides["scenario"] = scen
    edits = {**copy.deepcopy(defaults[1]), **copy.deepcopy(own[1])}
    origins = {**defaults[2], **own[2]}
    return ScenarioSpec(name, description, overrides, edits, origins)


def _grid_specs(
    grid: Any,
    sweep_dir: Path,
    out: _Collector,
    defaults: tuple[dict[str, Any], dict[str, Any], dict[tuple[str, ...], tuple[str, ...]]],
) -> list[ScenarioSpec]:
    if not isinstance(grid, Mapping) or not grid:
        out.add(("grid",), 'expected keys with lists of values, e.g. "model.hubs" = [2, 3, 4]')
        return []
    axes: list[tuple[tuple[str, ...], tuple[str, ...], list[Any]]] = []
    for path, values in _flatten(grid).items():
        dotted = ".".join(path)
        written = ("grid", dotted) if ("grid", dotted) in out.index else ("grid", *path)
        is_config = path[0] in CONFIG_SECTIONS and len(path) >= 2
        is_edit = len(path) == 1 and path[0] in EDIT_KEYS
        if not (is_config or is_edit):
            known = (*CONFIG_SECTIONS, *EDIT_KEYS)
            out.add(written, f"unknown key {dotted!r}{_hint(path[0], known)}", "grid." + dotted)
            continue
        if not isinstance(values, list) or not values:
            out.add(
                written, f"expected a non-empty list of values, got {values!r}", "grid." + dotted
            )
            continue
        axes.append((path, written, values))
    written_by_path = {path: written for path, written, _ in axes}
    specs = []
    for combo in itertools.product(*(vals for _, _, vals in axes)):
        table: dict[str, Any] = {}
        labels = []
        for (path, _written, _values), value in zip(axes, combo, strict=True):
            table[".".join(path)] = value
            labels.append(_grid_label(path, value))
        name = "_".join(labels)
        if not _NAME.match(name):
            out.add(("grid",), f"the grid makes a name that cannot be a folder: {name!r}", "grid")
            continue
        over, edits, origins = _split_changes(table, ("grid",), sweep_dir, out)
        origins = {k: written_by_path.get(k, ("grid",)) for k in origins}
        desc = "grid: " + ", ".join(f"{k} = {v!r}" for k, v in table.items())
        specs.append(_spec(name, desc, defaults, (over, edits, origins)))
    return specs


_PER_SCENARIO = re.compile(r"scenario (.+?): (.*)", re.S)


def _unique(problems: list[Problem], total: int | None = None) -> list[Problem]:
    """Problems without repeats, in order of first mention.

    The same problem found in several scenarios at the same place (a key of
    ``[defaults]`` every scenario inherits) is said once, naming the
    scenarios, or "every scenario" when that is all ``total`` of them.
    """
    names: dict[tuple[str, int | None, str | None, str], list[str]] = {}
    order: list[Problem | tuple[str, int | None, str | None, str]] = []
    seen: set[Problem] = set()
    for p in problems:
        m = _PER_SCENARIO.fullmatch(p.message)
        if m is not None:
            key = (p.file, p.row, p.column, m.group(2))
            if key not in names:
                names[key] = []
                order.append(key)
            if m.group(1) not in names[key]:
                names[key].append(m.group(1))
        elif p not in seen:
            seen.add(p)
            order.append(p)
    out = []
    for item in order:
        if isinstance(item, Problem):
            out.append(item)
            continue
        file, row, column, message = item
        found = names[item]
        if len(found) == 1:
            who = f"scenario {found[0]}"
        elif total is not None and len(found) == total > 2:
            who = "every scenario"
        else:
            who = "scenarios " + ", ".join(found)
        out.append(Problem(file, row, column, f"{who}: {message}"))
    return out


# --------------------------------------------------------------------------
# Checking every scenario against the data
# --------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class CheckedScenario:
    """A scenario loaded and checked: its config and its edited network."""

    spec: ScenarioSpec
    config: ScenarioConfig
    data: NetworkData


def without_hub_count(config: ScenarioConfig) -> ScenarioConfig:
    """The config with ``model.hubs`` unset, for reading the network before edits.

    The number of hubs is checked against the candidates after the edits
    (:func:`hub_count_problems`): a scenario may add candidates.
    """
    if config.model.hubs is None:
        return config
    return dataclasses.replace(config, model=dataclasses.replace(config.model, hubs=None))


def hub_count_problems(config: ScenarioConfig, data: NetworkData) -> list[str]:
    """Plain sentences when ``model.hubs`` cannot be met by the (edited) network."""
    hubs = config.model.hubs
    if hubs is None:
        return []
    cand = int(data.candidates().sum())
    forced = int(data.forced_open().sum())
    out = []
    if hubs > cand:
        out.append(f"{hubs} hubs asked (model.hubs) but only {cand} sites can be a hub")
    if forced > hubs:
        out.append(f"{forced} hubs forced open but only {hubs} hubs asked (model.hubs)")
    return out


def load_scenario_data(
    base: str | Path | ScenarioConfig,
    overrides: Mapping[str, Any] | None,
    edits: DataEdits,
) -> tuple[ScenarioConfig, NetworkData]:
    """Load a config with overrides and data edits: the config and the edited network.

    Parameters
    ----------
    base
        The base config file (or an already loaded config, then
        ``overrides`` must be empty).
    overrides
        Nested config overrides.
    edits
        The data edits.

    Raises
    ------
    InputError
        From the config, the input files, the edits, or a number of hubs
        the edited network cannot meet.
    """
    from hubnet.inputs import load_network

    if isinstance(base, ScenarioConfig):
        if overrides:
            raise ValueError("overrides need a config file, not a loaded config")
        config = base
    else:
        config = load_config(base, overrides)
    config = apply_config_edits(config, edits)
    data = apply_data_edits(load_network(without_hub_count(config)), edits)
    messages = hub_count_problems(config, data)
    if messages:
        file = str(config.source) if config.source is not None else "config"
        raise InputError([Problem(file, None, "model.hubs", m) for m in messages])
    return config, data


def check_sweep(sweep: Sweep, *, skip: Collection[str] = ()) -> list[CheckedScenario]:
    """Load and check every scenario of a sweep, solving nothing.

    Each distinct set of input files is read once. A problem caused by a
    scenario's change names the sweep file, line and key; a problem in the
    base config or the input files is reported once, as for ``hubnet check``.

    Parameters
    ----------
    sweep
        The sweep read by :func:`load_sweep`.
    skip
        Names of scenarios whose data edits are malformed (already
        reported): only their config keys are checked.

    Raises
    ------
    InputError
        With every problem of every scenario.
    """
    from hubnet.inputs import load_network

    file = str(sweep.path)
    problems: list[Problem] = []
    cache: dict[Any, NetworkData | InputError] = {}
    checked = []
    for spec in sweep.scenarios:

        def where(key: tuple[str, ...], spec: ScenarioSpec = spec) -> tuple[str, ...] | None:
            for n in range(len(key), 0, -1):
                if key[:n] in spec.origins:
                    return spec.origins[key[:n]]
            for k, w in spec.origins.items():  # a section problem: any key under it
                if k[: len(key)] == key:
                    return w[: len(w) - (len(k) - len(key))] if w[0] != "grid" else w
            return None

        def mapped(p: Problem, spec: ScenarioSpec = spec) -> Problem:
            key = tuple((p.column or "").split(".")) if p.column else ()
            origin = where(key) if key else None
            if origin is None:
                return p
            return Problem(
                file, sweep.line(*origin), ".".join(origin), f"scenario {spec.name}: {p.message}"
            )

        edits = DataEdits() if spec.name in skip else spec.data_edits
        try:
            config = apply_config_edits(load_config(sweep.base, spec.overrides), edits)
        except InputError as err:
            problems.extend(mapped(p) for p in err.problems)
            continue
        if spec.name in skip:
            continue
        key = (config.inputs, config.distances.method, config.source)
        if key not in cache:
            try:
                cache[key] = load_network(without_hub_count(config))
            except InputError as err:
                cache[key] = err
        found = cache[key]
        if isinstance(found, InputError):
            problems.extend(mapped(p) for p in found.problems)
            continue
        try:
            data = apply_data_edits(found, edits)
        except InputError as err:
            for p in err.problems:
                origin = spec.origins.get((p.column or "",), ("scenarios", spec.name))
                problems.append(
                    Problem(
                        file,
                        sweep.line(*origin),
                        ".".join(origin),
                        f"scenario {spec.name}: {p.message}",
                    )
                )
            continue
        messages = hub_count_problems(config, data)
        if messages:
            origin = spec.origins.get(("model", "hubs")) or next(
                (spec.origins[k] for k in (("close_hubs",), ("open_hubs",)) if k in spec.origins),
                ("scenarios", spec.name),
            )
            problems.extend(
                Problem(file, sweep.line(*origin), ".".join(origin), f"scenario {spec.name}: {m}")
                for m in messages
            )
            continue
        checked.append(CheckedScenario(spec, config, data))
    if problems:
        raise InputError(_unique(problems, len(sweep.scenarios)))
    return checked
