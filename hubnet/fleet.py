"""Vehicle classes and the freight model's parameters (service, drivers' hours, emissions).

These frozen objects are what the freight model (:mod:`hubnet.freight`)
works on. They are built by :mod:`hubnet.config` and :mod:`hubnet.inputs`
from files, with full validation, or directly in Python.

Units: distances km, times hours, speeds km/h, money in the scenario's
currency, volumes in the scenario's one volume unit, fuel in litres, CO2e
in kg.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Literal

Tier = Literal["feeder", "trunk", "direct"]
TIERS: tuple[Tier, ...] = ("feeder", "trunk", "direct")
LongLegPolicy = Literal["relay", "two_drivers", "forbid"]
EmissionBasis = Literal["ttw", "wtw"]
Objective = Literal["cost", "transit"]


@dataclass(frozen=True, slots=True)
class VehicleClass:
    """A kind of vehicle the carrier can dispatch on a leg.

    Attributes
    ----------
    id, name
        Identifier (used in outputs) and display name.
    payload
        Volume units one vehicle carries (in the scenario's volume unit).
    max_kg, max_m3
        Optional weight (kg) and cubic (m3) limits; with the scenario's
        kg and m3 per unit they can lower the payload (the binding one
        counts).
    cost_per_km
        Currency per vehicle-km, loaded or empty.
    cost_per_hour
        Currency per hour on the road (driving, breaks and relays).
    cost_per_dispatch
        Currency per dispatch (one round trip, or one one-way run when
        round trips are switched off): loading, tolls, overheads.
    speed_kmh
        Average road speed, km/h.
    tiers
        The tiers the class may run: ``feeder``, ``trunk``, ``direct``.
    fuel_l_per_100km
        Fuel use, litres per 100 vehicle-km.
    fuel
        Fuel name, looked up in the emission factor table (``diesel``...).
    """

    id: str
    name: str
    payload: float
    cost_per_km: float
    speed_kmh: float
    tiers: frozenset[Tier]
    cost_per_hour: float = 0.0
    cost_per_dispatch: float = 0.0
    max_kg: float | None = None
    max_m3: float | None = None
    fuel_l_per_100km: float = 0.0
    fuel: str = "diesel"

    def effective_payload(
        self, kg_per_unit: float | None, m3_per_unit: float | None
    ) -> tuple[float, str]:
        """Units one vehicle can take, and the binding limit (``units``, ``kg`` or ``m3``)."""
        best, why = self.payload, "units"
        if self.max_kg is not None and kg_per_unit:
            by_kg = self.max_kg / kg_per_unit
            if by_kg < best:
                best, why = by_kg, "kg"
        if self.max_m3 is not None and m3_per_unit:
            by_m3 = self.max_m3 / m3_per_unit
            if by_m3 < best:
                best, why = by_m3, "m3"
        return best, why


@dataclass(frozen=True, slots=True)
class ServiceParams:
    """Default service times; sites and demand rows may override them.

    Attributes
    ----------
    cutoff_h
        Collection cut-off: hour of the day (0-24) when the freight of a
        terminal leaves it.
    deliver_by_h
        Delivery deadline: hour of the day by which freight must reach the
        destination terminal.
    days
        Delivery is due on the ``days``-th deadline after the cut-off
        (1 = the next deadline, overnight for a morning deadline).
    sort_hours
        Time a unit spends in a hub's sort, hours.
    """

    cutoff_h: float = 18.0
    deliver_by_h: float = 8.0
    days: int = 1
    sort_hours: float = 1.0

    def allowance_h(self, cutoff_h: float, deliver_by_h: float) -> float:
        """Hours from a cut-off to the deadline ``days`` later (0 < result)."""
        gap = (deliver_by_h - cutoff_h) % 24.0
        if gap == 0.0:
            gap = 24.0
        return gap + 24.0 * (self.days - 1)


@dataclass(frozen=True, slots=True)
class HoursParams:
    """Drivers' hours: which rule set, and what to do with a leg too long for one driver.

    Attributes
    ----------
    rules
        ``eu`` (Regulation (EC) No 561/2006), ``us`` (49 CFR 395.3) or the
        path of a TOML file with the limits (see :mod:`hubnet.hours`).
    long_legs
        ``relay`` (a fresh driver takes over at a relay point), ``two_drivers``
        (a second driver on board) or ``forbid`` (the leg may not be run).
    relay_minutes
        Time lost at each driver change, minutes.
    relay_cost
        Currency per driver change (per one-way run).
    second_driver_cost_per_hour
        Currency per hour for the second driver on a double-manned run.
    """

    rules: str = "eu"
    long_legs: LongLegPolicy = "relay"
    relay_minutes: float = 15.0
    relay_cost: float = 0.0
    second_driver_cost_per_hour: float = 0.0


@dataclass(frozen=True, slots=True)
class FreightParams:
    """Parameters of the freight model (vehicle classes on every leg).

    Attributes
    ----------
    service, hours
        Service times and drivers' hours.
    round_trips
        A dispatch is a round trip: the vehicle comes back, its empty or
        loaded return is paid, and the two directions of a leg share the
        vehicles. ``False``: one-way runs priced per direction.
    integer_vehicles
        Whole vehicles; ``False`` lets dispatch counts be fractional (the
        LP view, and the classic per-unit cost model).
    direct_min_load
        A direct lane between two terminals is offered to the model when
        the larger of its two daily volumes is at least this share of the
        smallest payload of a class allowed on direct legs (0 offers every
        pair with volume).
    value_of_time
        Currency per unit-hour in transit, added to the cost (0 = off).
    carbon_price_per_t
        Currency per tonne CO2e on the chosen basis, added to the cost.
    emissions_basis
        ``wtw`` (well-to-wheel) or ``ttw`` (tank-to-wheel) for the carbon
        price and the headline CO2e.
    kg_per_unit, m3_per_unit
        Average weight and cubic volume of one volume unit, for the
        vehicles' weight and cubic limits (``None`` = not binding).
    max_transit_h
        Optional cap on the volume-weighted average transit time, hours
        (used by the cost-time frontier).
    minimise
        ``cost`` (the default) or ``transit``: the volume-weighted transit
        time (unit-hours), used for the fastest end of the cost-time
        frontier.
    km_cost_factors
        Multipliers of the per-km cost on legs into a hub, between hubs
        and out of a hub (collection, transfer, distribution); 1 for
        freight. Set to the classic factors to reproduce the classic model.
    """

    service: ServiceParams = field(default_factory=ServiceParams)
    hours: HoursParams = field(default_factory=HoursParams)
    round_trips: bool = True
    integer_vehicles: bool = True
    direct_min_load: float = 0.5
    value_of_time: float = 0.0
    carbon_price_per_t: float = 0.0
    emissions_basis: EmissionBasis = "wtw"
    kg_per_unit: float | None = None
    m3_per_unit: float | None = None
    max_transit_h: float | None = None
    minimise: Objective = "cost"
    km_cost_factors: tuple[float, float, float] = (1.0, 1.0, 1.0)
