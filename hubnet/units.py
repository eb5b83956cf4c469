"""Units, conversions and reference constants: defined here and nowhere else.

Distances are kilometres (``_km``), times hours (``_h``), volumes are in the
one unit the scenario declares (parcels, pallets, tonnes or m3), and money
is in the scenario's currency per day unless a name says otherwise.
"""

from __future__ import annotations

#: Volume units a scenario may declare; every volume in a scenario uses one.
VOLUME_UNITS = ("units", "parcels", "pallets", "tonnes", "m3")

#: WGS84 ellipsoid, NIMA TR8350.2: semi-major axis in metres and flattening.
WGS84_A_M = 6_378_137.0
WGS84_F = 1.0 / 298.257223563

#: Road distance over great-circle distance. Ballou, Rahardja and Sakai
#: (2002), "Selected country circuity factors for road travel distance
#: estimation", Transportation Research Part A 36(9), 843-848: about 1.2 for
#: the US, 1.1 to 1.4 across countries (as the shared TRADE_FACTS.md gives
#: it, itself marked from memory).
DEFAULT_CIRCUITY = 1.2

M_PER_KM = 1000.0


def m_to_km(metres: float) -> float:
    """Convert metres to kilometres."""
    return metres / M_PER_KM
