"""Frozen, validated network data: sites, demand and an optional distance matrix.

These are the in-memory objects every later stage works on. They are built
by :mod:`hubnet.inputs` from files (with full validation and clear messages)
or directly in Python; ``__post_init__`` re-checks the invariants the model
relies on, so a hand-built object cannot be inconsistent either. Vary them
with :func:`dataclasses.replace`.

Site order is fixed: the index of a site in :attr:`NetworkData.sites` is its
row and column in every matrix hubnet builds.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Literal

import numpy as np

from hubnet.emissions import FuelFactor
from hubnet.errors import InputError, Problem
from hubnet.fleet import VehicleClass
from hubnet.units import VOLUME_UNITS

HubStatus = Literal["candidate", "open", "closed"]
CoordinateSystem = Literal["geographic", "planar"]


@dataclass(frozen=True, slots=True)
class Site:
    """A terminal, which may also be a candidate hub.

    Attributes
    ----------
    id
        Unique identifier used by demand and matrix files.
    name
        Display name (shown as text only, never as markup).
    lat, lon
        WGS84 latitude and longitude in degrees (geographic data).
    x, y
        Planar coordinates in the data's own length unit (benchmark data);
        used only when the network's coordinate system is ``planar``.
    can_be_hub
        Whether the site is a candidate hub.
    hub_fixed_cost
        Cost of operating the site as a hub, currency per day.
    handling_cost
        Sorting cost per unit of volume passing through the hub, currency
        per unit. A unit pays it at every hub it passes.
    sort_capacity
        Units per day the hub can take in from the terminals allocated to
        it (their originating volume, the hub's own included); ``None``
        means unlimited. Used by the capacitated single-allocation model.
    hub_status
        ``candidate`` (the model decides), ``open`` (forced open) or
        ``closed`` (forced closed).
    region
        Optional region name (a sales area, a country), used to scale
        demand by region in scenarios; empty when not given.
    sort_hours
        Hours a unit spends in this hub's sort (freight model); ``None``
        takes the scenario's default.
    cutoff_h
        Collection cut-off, hour of the day (0-24) when freight leaves this
        terminal (freight model); ``None`` takes the scenario's default.
    deliver_by_h
        Delivery deadline at this terminal, hour of the day (0-24);
        ``None`` takes the scenario's default.
    """

    id: str
    name: str
    lat: float | None = None
    lon: float | None = None
    x: float | None = None
    y: float | None = None
    can_be_hub: bool = True
    hub_fixed_cost: float = 0.0
    handling_cost: float = 0.0
    sort_capacity: float | None = None
    hub_status: HubStatus = "candidate"
    region: str = ""
    sort_hours: float | None = None
    cutoff_h: float | None = None
    deliver_by_h: float | None = None

    @property
    def is_candidate(self) -> bool:
        """True when the model may open a hub here."""
        return self.can_be_hub and self.hub_status != "closed"


@dataclass(frozen=True, slots=True)
class Demand:
    """Daily volume from one site to another (one OD pair), in the volume unit.

    ``max_hours`` optionally overrides the pair's transit allowance (hours
    from the origin's cut-off to delivery) in the freight model.
    """

    origin: str
    destination: str
    volume: float
    max_hours: float | None = None


@dataclass(frozen=True, eq=False)
class DistanceMatrix:
    """Leg distances and, optionally, drive times, in site order.

    Attributes
    ----------
    km
        ``(n, n)`` array of distances in km (or the planar unit of
        benchmark data), ``km[i, j]`` from site ``i`` to site ``j``.
    hours
        ``(n, n)`` array of drive times in hours, or ``None``.
    source
        How the matrix was obtained: ``geodesic``, ``euclidean`` or ``user``.
    """

    km: np.ndarray
    hours: np.ndarray | None = None
    source: str = "user"


@dataclass(frozen=True, eq=False)
class NetworkData:
    """Sites and demand of one scenario.

    Attributes
    ----------
    sites
        All sites, in a fixed order.
    demand
        OD pairs with positive or zero volume per day. Each (origin,
        destination) pair appears at most once.
    volume_unit
        The one unit all volumes use (see :data:`hubnet.units.VOLUME_UNITS`).
    coordinates
        ``geographic`` (lat/lon, WGS84) or ``planar`` (x/y).
    distances
        A user-supplied matrix, used as given; ``None`` to compute one.
    allow_same_site_demand
        Whether volume from a site to itself is allowed; it is then routed
        through the site's hub like any other flow (as in postal benchmark
        data where intra-district mail is sorted at the hub).
    vehicles
        Vehicle classes; when given, the freight model plans vehicles on
        every leg instead of the classic per-unit costs.
    fuels
        Fuel emission factors by fuel name, from the scenario's own table
        (``inputs.fuels``); empty: the bundled table
        (:func:`hubnet.emissions.load_fuels`).
    """

    sites: tuple[Site, ...]
    demand: tuple[Demand, ...]
    volume_unit: str = "units"
    coordinates: CoordinateSystem = "geographic"
    distances: DistanceMatrix | None = None
    allow_same_site_demand: bool = False
    vehicles: tuple[VehicleClass, ...] = ()
    fuels: Mapping[str, FuelFactor] = field(default_factory=dict)
    _index: Mapping[str, int] = field(init=False, repr=False)

    def __post_init__(self) -> None:
        problems: list[Problem] = []
        index: dict[str, int] = {}
        for i, s in enumerate(self.sites):
            if s.id in index:
                problems.append(Problem("sites", None, "id", f"duplicate site id {s.id!r}"))
            index[s.id] = i
            if self.coordinates == "geographic":
                if s.lat is None or not -90 <= s.lat <= 90:
                    problems.append(
                        Problem("sites", None, "lat", f"site {s.id!r}: latitude outside [-90, 90]")
                    )
                if s.lon is None or not -180 <= s.lon <= 180:
                    problems.append(
                        Problem(
                            "sites", None, "lon", f"site {s.id!r}: longitude outside [-180, 180]"
                        )
                    )
            elif s.x is None or s.y is None:
                problems.append(Problem("sites", None, "x", f"site {s.id!r}: missing x/y"))
        if self.volume_unit not in VOLUME_UNITS:
            problems.append(
                Problem("config", None, "volume_unit", f"unknown unit {self.volume_unit!r}")
            )
        seen: set[tuple[str, str]] = set()
        for d in self.demand:
            for end in (d.origin, d.destination):
                if end not in index:
                    problems.append(Problem("demand", None, None, f"unknown site {end!r}"))
            if d.origin == d.destination and not self.allow_same_site_demand:
                problems.append(
                    Problem("demand", None, None, f"demand from {d.origin!r} to itself")
                )
            if not math.isfinite(d.volume) or d.volume < 0:
                problems.append(Problem("demand", None, "volume", f"bad volume {d.volume!r}"))
            key = (d.origin, d.destination)
            if key in seen:
                problems.append(Problem("demand", None, None, f"duplicate OD pair {key}"))
            seen.add(key)
        vehicle_ids: set[str] = set()
        for v in self.vehicles:
            if v.id in vehicle_ids:
                problems.append(Problem("vehicles", None, "id", f"duplicate vehicle id {v.id!r}"))
            vehicle_ids.add(v.id)
            if not v.payload > 0 or not v.speed_kmh > 0:
                problems.append(
                    Problem("vehicles", None, None, f"vehicle {v.id!r}: payload, speed must be > 0")
                )
            if not v.tiers:
                problems.append(Problem("vehicles", None, "tiers", f"vehicle {v.id!r}: no tier"))
        if self.distances is not None:
            n = len(self.sites)
            if self.distances.km.shape != (n, n):
                problems.append(Problem("distances", None, None, f"matrix is not {n} x {n}"))
        if problems:
            raise InputError(problems)
        object.__setattr__(self, "_index", index)

    @property
    def n(self) -> int:
        """Number of sites."""
        return len(self.sites)

    @property
    def ids(self) -> tuple[str, ...]:
        """Site ids in matrix order."""
        return tuple(s.id for s in self.sites)

    def index(self, site_id: str) -> int:
        """Matrix index of a site id."""
        return self._index[site_id]

    def flow_matrix(self) -> np.ndarray:
        """Daily volume as an ``(n, n)`` array, ``W[i, j]`` from site i to site j."""
        w = np.zeros((self.n, self.n))
        for d in self.demand:
            w[self._index[d.origin], self._index[d.destination]] += d.volume
        return w

    def candidates(self) -> np.ndarray:
        """Boolean array: True where the model may open a hub."""
        return np.array([s.is_candidate for s in self.sites], dtype=bool)

    def forced_open(self) -> np.ndarray:
        """Boolean array: True where a hub is forced open."""
        return np.array([s.hub_status == "open" for s in self.sites], dtype=bool)
