"""Write the France demo's ``sites.csv``, ``demand.csv`` and ``vehicles.csv`` from the tables below.

The demo is an invented pallet network on real geography: the terminals sit
on real towns of mainland France, but every volume, cost, capacity and time
is made up (see ``demo_regions/france/README.md``). Everything the three
files hold is either written out in this script (towns, hubs, vehicle
classes) or derived from it by the rules documented here, so the files can
be recreated exactly.

Demand
------
Daily volume from terminal ``i`` to terminal ``j`` (pallets per day) is a
gravity model::

    raw[i, j] = K * P[i] ** A * P[j] ** B / (r[i, j] + R0) ** C * noise[i, j]

- ``P`` is the population of the terminal's catchment, in millions
  (approximate, from memory; an Île-de-France terminal gets a share of the
  Paris region's population);
- ``r`` is the road distance in km, estimated as the great-circle distance
  on a sphere of the IUGG mean Earth radius (6371.0088 km) times the
  circuity ``CIRCUITY`` = 1.2 (as ``configs/demo.toml``);
- ``R0`` is an invented offset in km that keeps neighbouring terminals
  (Paris and its suburbs, 10 to 30 km apart) from absurd volumes: freight
  inside one town mostly goes out on local delivery rounds, not through
  the network;
- ``K``, ``A``, ``B``, ``C`` are invented constants;
- ``noise`` is log-normal, ``exp(SIGMA * z)`` with ``z`` standard normal.
  Each OD pair draws its own ``z`` from a generator seeded with the text
  ``"{SEED}:{origin}:{destination}"``, so a pair's volume does not depend
  on which other terminals are in the file: the small variant's lanes are
  exactly the full demo's lanes between the same terminals.

Pairs with ``raw < 1`` are dropped (no daily freight between them); the
others are rounded to whole pallets (so at least one a day).

Service times
-------------
Each terminal gets a collection cut-off and a delivery deadline (columns
``cutoff`` and ``deliver_by``) by a fixed rule (invented, in the spirit of
pallet networks' zone tables; common practice, no source):

- catchment of at least 0.5 million: cut-off 19:00, deliver by 07:30;
  0.15 to 0.5 million: 18:30 and 08:00; smaller: 18:00 and 08:00;
- Île-de-France, right next to the Paris hub: cut-off 19:30, deliver by 07:30;
- remote terminals, more than ``REMOTE_KM`` road km from the nearest of
  the 20 candidate hubs: cut-off 30 minutes earlier, deliver 30 minutes later.

Cut-offs thus fall between 17:30 and 19:30 and deadlines between 07:30 and
08:30, so the overnight allowance of an OD pair (origin cut-off to the
destination's deadline next morning) is 12.0 to 15.0 h. Far pairs cannot
be run overnight at truck speeds (Lille to Nice is about 1,000 road km,
over 13 h of driving alone), so, as pallet networks draw their next-day
zones from the network they run, a pair is promised next-day only when a
reference network gets it there overnight: the first ``CORE_HUBS`` hubs of
``HUBS`` (Paris, Lyon, Marseille, Toulouse, Bordeaux, Lille, Nantes,
Strasbourg) open, each terminal on its nearest of them, feeder legs at the
slowest feeder class's speed, trunk legs at the trunk class's speed, the
EU drivers' breaks and relays (``leg_hours``) and each hub's sort time,
with ``MARGIN_H`` to spare. Other pairs get a two-night service:
``max_hours`` = their overnight allowance + 24 h. Next-day pairs leave
``max_hours`` empty (the sites' times apply). The reference network thus
meets every deadline with any vehicle class on its feeder legs, so the
demo always has a plan on time; with fewer or other hubs some pairs may
need a different allocation, a faster vehicle or a direct leg.

Hub sort time (``sort_hours``) is set for candidate hubs only; terminals
leave it empty.

Small variant
-------------
``--terminals N --hubs H`` keeps the first ``H`` candidate hubs of
``HUBS`` (in table order) and ``N - H`` other terminals, taken region by
region so that they spread over the country: the largest catchment of each
region (regions in the order they first appear in ``TOWNS``), then the
second largest of each, and so on (ties in table order). Rows keep the
full demo's order and values. ``--small`` is ``--terminals 40 --hubs 8
--out demo_regions/france_small``.

Only the standard library is used: :meth:`random.Random.random` (seeded
with a string, which Python hashes with SHA-512) is the one generator Python
promises to repeat across versions, and ``z`` comes from it through
:meth:`statistics.NormalDist.inv_cdf`.

Usage::

    python demo_regions/france/generate.py                  # rewrite the CSVs
    python demo_regions/france/generate.py --check          # exit 1 if any differs
    python demo_regions/france/generate.py --small          # the 40-terminal variant
    python demo_regions/france/generate.py --small --check
"""

from __future__ import annotations

import argparse
import csv
import io
import math
import random
import statistics
import sys
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

HERE = Path(__file__).resolve().parent
SMALL_DIR = HERE.parent / "france_small"

#: Full demo size: terminals (candidate hubs included) and candidate hubs.
FULL_TERMINALS = 140
FULL_HUBS = 20
#: The small variant's size.
SMALL_TERMINALS = 40
SMALL_HUBS = 8

#: Invented gravity constants: scale (pallets per day, with P in millions
#: and distances in km), origin and destination population exponents,
#: distance decay exponent and distance offset (km).
K = 1200.0
A = 0.55
B = 0.65
C = 0.8
R0 = 100.0
#: Spread of the log-normal noise (invented).
SIGMA = 0.5
#: Seed of the noise.
SEED = 20240915

#: IUGG mean Earth radius, km (for the great-circle distance only).
MEAN_EARTH_RADIUS_KM = 6371.0088
#: Road km over great-circle km: about 1.2 (Ballou, Rahardja and Sakai,
#: 2002, Transportation Research Part A 36(9); from memory).
CIRCUITY = 1.2

#: A terminal further than this from every candidate hub (road km) has an
#: earlier cut-off and a later deadline (invented).
REMOTE_KM = 150.0
#: The reference network that decides which OD pairs are promised
#: overnight: the first ``CORE_HUBS`` candidate hubs of ``HUBS``, each
#: terminal on its nearest (see the module docstring).
CORE_HUBS = 8
#: EU drivers' hours, Regulation (EC) No 561/2006 (from memory): a 45 min
#: break after 4.5 h of driving (Art. 7), at most 9 h of daily driving
#: (Art. 6(1)), after which a relay driver takes over.
BREAK_AFTER_H = 4.5
BREAK_H = 0.75
DAILY_DRIVING_H = 9.0
#: Time lost at a driver relay, hours (as ``relay_minutes`` in
#: ``configs/national.toml``; invented for the demo).
RELAY_H = 20.0 / 60.0
#: Spare time a next-day pair keeps on the reference network, hours (invented).
MARGIN_H = 0.5

#: Region names (the 12 regions of mainland France, Corsica left out).
IDF = "Île-de-France"
HDF = "Hauts-de-France"
NOR = "Normandie"
BRE = "Bretagne"
PDL = "Pays de la Loire"
CVL = "Centre-Val de Loire"
GES = "Grand Est"
BFC = "Bourgogne-Franche-Comté"
ARA = "Auvergne-Rhône-Alpes"
NAQ = "Nouvelle-Aquitaine"
OCC = "Occitanie"
PAC = "Provence-Alpes-Côte d'Azur"


@dataclass(frozen=True)
class Town:
    """One terminal: id, town name, WGS84 degrees, region, catchment (millions)."""

    id: str
    name: str
    lat: float
    lon: float
    region: str
    population_m: float


@dataclass(frozen=True)
class Hub:
    """What a candidate hub costs and holds (all invented for the demo).

    ``fixed_cost`` EUR per day, ``handling`` EUR per pallet sorted,
    ``capacity`` pallets per day taken in from the hub's terminals,
    ``sort_hours`` hours a pallet spends in the sort.
    """

    fixed_cost: int
    handling: float
    capacity: int
    sort_hours: float


#: Towns: coordinates are town centres (recalled from memory, to about
#: 0.01 degree); catchments are approximate, from memory, and only shape
#: the invented volumes. The 20 candidate hubs come first, in the order of
#: ``HUBS``.
TOWNS: tuple[Town, ...] = (
    # candidate hubs
    Town("PAR", "Paris-Rungis", 48.7480, 2.3500, IDF, 1.40),
    Town("LYO", "Lyon", 45.7640, 4.8357, ARA, 1.70),
    Town("MAR", "Marseille", 43.2965, 5.3698, PAC, 1.40),
    Town("TLS", "Toulouse", 43.6047, 1.4442, OCC, 1.45),
    Town("BDX", "Bordeaux", 44.8378, -0.5792, NAQ, 1.35),
    Town("LIL", "Lille", 50.6292, 3.0573, HDF, 1.20),
    Town("NTE", "Nantes", 47.2184, -1.5536, PDL, 1.00),
    Town("STR", "Strasbourg", 48.5734, 7.7521, GES, 0.85),
    Town("ORL", "Orléans", 47.9030, 1.9093, CVL, 0.45),
    Town("CLF", "Clermont-Ferrand", 45.7772, 3.0870, ARA, 0.50),
    Town("DIJ", "Dijon", 47.3220, 5.0415, BFC, 0.40),
    Town("REN", "Rennes", 48.1173, -1.6778, BRE, 0.75),
    Town("TRS", "Tours", 47.3941, 0.6848, CVL, 0.52),
    Town("LIM", "Limoges", 45.8336, 1.2611, NAQ, 0.33),
    Town("MPL", "Montpellier", 43.6108, 3.8767, OCC, 0.80),
    Town("REI", "Reims", 49.2583, 4.0317, GES, 0.35),
    Town("MTZ", "Metz", 49.1193, 6.1757, GES, 0.45),
    Town("ROU", "Rouen", 49.4432, 1.0999, NOR, 0.70),
    Town("POI", "Poitiers", 46.5802, 0.3404, NAQ, 0.28),
    Town("VCE", "Valence", 44.9334, 4.8924, ARA, 0.30),
    # Île-de-France (the Paris region, about 12.3 million, shared out)
    Town("PCE", "Paris", 48.8566, 2.3522, IDF, 2.10),
    Town("SDN", "Saint-Denis", 48.9362, 2.3574, IDF, 1.60),
    Town("NAN", "Nanterre", 48.8924, 2.2069, IDF, 1.60),
    Town("CRE", "Créteil", 48.7904, 2.4556, IDF, 0.90),
    Town("VER", "Versailles", 48.8049, 2.1204, IDF, 0.90),
    Town("EVR", "Évry", 48.6243, 2.4407, IDF, 0.80),
    Town("CER", "Cergy", 49.0364, 2.0761, IDF, 0.80),
    Town("MEA", "Meaux", 48.9601, 2.8788, IDF, 0.50),
    Town("TOR", "Torcy", 48.8502, 2.6508, IDF, 0.60),
    Town("MEL", "Melun", 48.5421, 2.6554, IDF, 0.40),
    Town("ROI", "Roissy-en-France", 49.0036, 2.5166, IDF, 0.40),
    Town("MNT", "Mantes-la-Jolie", 48.9908, 1.7172, IDF, 0.30),
    # Hauts-de-France
    Town("AMI", "Amiens", 49.8941, 2.2958, HDF, 0.30),
    Town("RBX", "Roubaix", 50.6942, 3.1746, HDF, 0.40),
    Town("LEN", "Lens", 50.4320, 2.8333, HDF, 0.50),
    Town("DOU", "Douai", 50.3714, 3.0800, HDF, 0.20),
    Town("VAL", "Valenciennes", 50.3570, 3.5235, HDF, 0.35),
    Town("DUN", "Dunkerque", 51.0343, 2.3768, HDF, 0.26),
    Town("CAL", "Calais", 50.9513, 1.8587, HDF, 0.15),
    Town("BOU", "Boulogne-sur-Mer", 50.7264, 1.6147, HDF, 0.15),
    Town("ARR", "Arras", 50.2910, 2.7775, HDF, 0.17),
    Town("SQU", "Saint-Quentin", 49.8465, 3.2876, HDF, 0.12),
    Town("BEA", "Beauvais", 49.4295, 2.0807, HDF, 0.14),
    Town("CPG", "Compiègne", 49.4179, 2.8261, HDF, 0.15),
    Town("CRL", "Creil", 49.2597, 2.4746, HDF, 0.20),
    # Normandie
    Town("LHV", "Le Havre", 49.4944, 0.1079, NOR, 0.33),
    Town("CAE", "Caen", 49.1829, -0.3707, NOR, 0.47),
    Town("CHE", "Cherbourg", 49.6337, -1.6222, NOR, 0.12),
    Town("EVX", "Évreux", 49.0241, 1.1508, NOR, 0.11),
    Town("ALE", "Alençon", 48.4329, 0.0913, NOR, 0.08),
    Town("SLO", "Saint-Lô", 49.1157, -1.0906, NOR, 0.06),
    Town("DIE", "Dieppe", 49.9229, 1.0775, NOR, 0.08),
    # Bretagne
    Town("BRS", "Brest", 48.3904, -4.4861, BRE, 0.32),
    Town("QPR", "Quimper", 47.9960, -4.1024, BRE, 0.13),
    Town("LRT", "Lorient", 47.7482, -3.3702, BRE, 0.22),
    Town("VNS", "Vannes", 47.6582, -2.7608, BRE, 0.18),
    Town("SBK", "Saint-Brieuc", 48.5136, -2.7603, BRE, 0.15),
    Town("SML", "Saint-Malo", 48.6493, -2.0257, BRE, 0.09),
    Town("MXN", "Morlaix", 48.5776, -3.8280, BRE, 0.06),
    # Pays de la Loire
    Town("ANG", "Angers", 47.4784, -0.5632, PDL, 0.42),
    Town("LMN", "Le Mans", 48.0061, 0.1996, PDL, 0.35),
    Town("SNZ", "Saint-Nazaire", 47.2735, -2.2138, PDL, 0.20),
    Town("LRY", "La Roche-sur-Yon", 46.6705, -1.4260, PDL, 0.12),
    Town("CHO", "Cholet", 47.0600, -0.8794, PDL, 0.10),
    Town("LVL", "Laval", 48.0706, -0.7734, PDL, 0.12),
    # Centre-Val de Loire
    Town("BGS", "Bourges", 47.0810, 2.3988, CVL, 0.14),
    Town("CHR", "Chartres", 48.4439, 1.4890, CVL, 0.14),
    Town("BLO", "Blois", 47.5861, 1.3359, CVL, 0.12),
    Town("CHX", "Châteauroux", 46.8103, 1.6913, CVL, 0.10),
    Town("MTG", "Montargis", 47.9976, 2.7325, CVL, 0.08),
    Town("DRX", "Dreux", 48.7370, 1.3664, CVL, 0.08),
    # Grand Est
    Town("NCY", "Nancy", 48.6921, 6.1844, GES, 0.50),
    Town("MLH", "Mulhouse", 47.7508, 7.3359, GES, 0.28),
    Town("COL", "Colmar", 48.0794, 7.3585, GES, 0.13),
    Town("TRY", "Troyes", 48.2973, 4.0744, GES, 0.20),
    Town("EPI", "Épinal", 48.1724, 6.4495, GES, 0.10),
    Town("CHM", "Charleville-Mézières", 49.7621, 4.7263, GES, 0.11),
    Town("THI", "Thionville", 49.3579, 6.1684, GES, 0.18),
    Town("CEC", "Châlons-en-Champagne", 48.9566, 4.3631, GES, 0.09),
    Town("HAG", "Haguenau", 48.8156, 7.7906, GES, 0.10),
    Town("FBH", "Forbach", 49.1875, 6.8965, GES, 0.10),
    # Bourgogne-Franche-Comté
    Town("BES", "Besançon", 47.2378, 6.0241, BFC, 0.28),
    Town("BEL", "Belfort", 47.6380, 6.8628, BFC, 0.14),
    Town("MBD", "Montbéliard", 47.5100, 6.7983, BFC, 0.15),
    Town("CSS", "Chalon-sur-Saône", 46.7806, 4.8539, BFC, 0.13),
    Town("MAC", "Mâcon", 46.3069, 4.8287, BFC, 0.10),
    Town("AUX", "Auxerre", 47.7982, 3.5673, BFC, 0.11),
    Town("NEV", "Nevers", 46.9908, 3.1590, BFC, 0.10),
    Town("LCR", "Le Creusot", 46.8006, 4.4403, BFC, 0.09),
    Town("LLS", "Lons-le-Saunier", 46.6744, 5.5546, BFC, 0.06),
    # Auvergne-Rhône-Alpes
    Town("STP", "Saint-Priest", 45.6965, 4.9440, ARA, 0.60),
    Town("GRE", "Grenoble", 45.1885, 5.7245, ARA, 0.70),
    Town("STE", "Saint-Étienne", 45.4397, 4.3872, ARA, 0.52),
    Town("ANN", "Annecy", 45.8992, 6.1294, ARA, 0.30),
    Town("CMF", "Chambéry", 45.5646, 5.9178, ARA, 0.25),
    Town("BOB", "Bourg-en-Bresse", 46.2052, 5.2255, ARA, 0.13),
    Town("ROA", "Roanne", 46.0342, 4.0720, ARA, 0.10),
    Town("VIC", "Vichy", 46.1277, 3.4259, ARA, 0.08),
    Town("MLC", "Montluçon", 46.3401, 2.6034, ARA, 0.08),
    Town("MOU", "Moulins", 46.5646, 3.3326, ARA, 0.07),
    Town("AUR", "Aurillac", 44.9264, 2.4397, ARA, 0.06),
    Town("LPY", "Le Puy-en-Velay", 45.0434, 3.8856, ARA, 0.06),
    Town("AMS", "Annemasse", 46.1934, 6.2342, ARA, 0.15),
    Town("MTL", "Montélimar", 44.5581, 4.7509, ARA, 0.07),
    # Nouvelle-Aquitaine
    Town("LRH", "La Rochelle", 46.1603, -1.1511, NAQ, 0.22),
    Town("PAU", "Pau", 43.2951, -0.3708, NAQ, 0.32),
    Town("BAY", "Bayonne", 43.4929, -1.4748, NAQ, 0.30),
    Town("AGL", "Angoulême", 45.6484, 0.1562, NAQ, 0.18),
    Town("NIO", "Niort", 46.3237, -0.4588, NAQ, 0.16),
    Town("PGX", "Périgueux", 45.1846, 0.7214, NAQ, 0.10),
    Town("BVE", "Brive-la-Gaillarde", 45.1589, 1.5332, NAQ, 0.10),
    Town("AGN", "Agen", 44.2033, 0.6163, NAQ, 0.11),
    Town("MDM", "Mont-de-Marsan", 43.8902, -0.4996, NAQ, 0.07),
    Town("BGC", "Bergerac", 44.8533, 0.4833, NAQ, 0.07),
    Town("CTL", "Châtellerault", 46.8171, 0.5455, NAQ, 0.06),
    Town("DAX", "Dax", 43.7102, -1.0536, NAQ, 0.07),
    Town("STS", "Saintes", 45.7464, -0.6333, NAQ, 0.07),
    # Occitanie
    Town("NIM", "Nîmes", 43.8367, 4.3601, OCC, 0.33),
    Town("PGF", "Perpignan", 42.6887, 2.8948, OCC, 0.33),
    Town("BZR", "Béziers", 43.3442, 3.2158, OCC, 0.17),
    Town("NAR", "Narbonne", 43.1839, 3.0042, OCC, 0.10),
    Town("CCF", "Carcassonne", 43.2130, 2.3491, OCC, 0.10),
    Town("ALB", "Albi", 43.9289, 2.1464, OCC, 0.10),
    Town("MTB", "Montauban", 44.0176, 1.3550, OCC, 0.10),
    Town("TBS", "Tarbes", 43.2328, 0.0781, OCC, 0.12),
    Town("RDZ", "Rodez", 44.3506, 2.5750, OCC, 0.08),
    Town("CAS", "Castres", 43.6060, 2.2400, OCC, 0.08),
    Town("ALS", "Alès", 44.1249, 4.0810, OCC, 0.10),
    Town("SET", "Sète", 43.4028, 3.6967, OCC, 0.09),
    Town("CAH", "Cahors", 44.4475, 1.4419, OCC, 0.05),
    # Provence-Alpes-Côte d'Azur
    Town("NCE", "Nice", 43.7102, 7.2620, PAC, 1.00),
    Town("TLN", "Toulon", 43.1242, 5.9280, PAC, 0.60),
    Town("AIX", "Aix-en-Provence", 43.5297, 5.4474, PAC, 0.40),
    Town("AVN", "Avignon", 43.9493, 4.8055, PAC, 0.50),
    Town("CAN", "Cannes", 43.5528, 7.0174, PAC, 0.35),
    Town("FRJ", "Fréjus", 43.4330, 6.7370, PAC, 0.10),
    Town("GAP", "Gap", 44.5594, 6.0786, PAC, 0.07),
    Town("MSQ", "Manosque", 43.8350, 5.7910, PAC, 0.06),
    Town("SAL", "Salon-de-Provence", 43.6403, 5.0970, PAC, 0.10),
    Town("DRA", "Draguignan", 43.5366, 6.4646, PAC, 0.08),
)

#: Candidate hubs, in priority order for the small variant (all values
#: invented for the demo; see the README for the ranges and their reasons).
HUBS: dict[str, Hub] = {
    "PAR": Hub(24000, 2.60, 16000, 2.00),
    "LYO": Hub(19000, 2.50, 8000, 1.75),
    "MAR": Hub(17000, 2.50, 6000, 1.50),
    "TLS": Hub(16000, 2.40, 4500, 1.50),
    "BDX": Hub(16000, 2.40, 4500, 1.50),
    "LIL": Hub(17000, 2.50, 5000, 1.50),
    "NTE": Hub(15000, 2.30, 6000, 1.50),
    "STR": Hub(15000, 2.40, 4000, 1.25),
    "ORL": Hub(14000, 2.20, 5000, 1.50),
    "CLF": Hub(12000, 2.10, 3000, 1.25),
    "DIJ": Hub(12000, 2.10, 3500, 1.25),
    "REN": Hub(13000, 2.20, 3500, 1.25),
    "TRS": Hub(12000, 2.10, 3500, 1.25),
    "LIM": Hub(10500, 2.00, 2500, 1.00),
    "MPL": Hub(13000, 2.30, 3500, 1.25),
    "REI": Hub(11500, 2.10, 3000, 1.00),
    "MTZ": Hub(11500, 2.10, 3000, 1.00),
    "ROU": Hub(13000, 2.20, 3500, 1.25),
    "POI": Hub(10500, 2.00, 2500, 1.00),
    "VCE": Hub(10500, 2.00, 2500, 1.00),
}


@dataclass(frozen=True)
class Vehicle:
    """One vehicle class, in the units of ``vehicles.csv`` (see the README for sources)."""

    id: str
    name: str
    payload: int  # pallets (EUR pallets on the floor)
    max_kg: int  # kg payload
    max_m3: float  # m3 of load space
    cost_per_km: float  # EUR per vehicle-km
    cost_per_hour: float  # EUR per hour on the road
    cost_per_dispatch: float  # EUR per round trip
    speed_kmh: float  # average road speed
    tiers: str
    fuel_l_per_100km: float
    fuel: str


#: Vehicle classes. Payloads: EUR pallets (1.2 m x 0.8 m, EN 13698-1) three
#: across a 2.45 m wide body, one 1.2 m row per 1.2 m of body length:
#: 6.1 m -> 5 rows = 15, 7.2 m -> 6 rows = 18, 13.6 m -> 11 rows = 33.
#: ``max_m3`` is the body's inner length x 2.45 m x its inner height
#: (6.1 x 2.45 x 2.3 = 34; 7.2 x 2.45 x 2.4 = 42; 13.6 x 2.45 x 2.7 = 90).
#: Fuel use is inside the ranges of /work/shared/reference/TRADE_FACTS.md
#: (common practice, no source); payload weights, costs and speeds are
#: invented for the demo (README.md, "Vehicle classes").
VEHICLES: tuple[Vehicle, ...] = (
    Vehicle(
        id="R75",
        name="7.5 t rigid",
        payload=15,
        max_kg=3000,
        max_m3=34.0,
        cost_per_km=0.35,
        cost_per_hour=32.0,
        cost_per_dispatch=25.0,
        speed_kmh=60.0,
        tiers="feeder direct",
        fuel_l_per_100km=17.0,
        fuel="diesel",
    ),
    Vehicle(
        id="R12",
        name="12 t rigid",
        payload=18,
        max_kg=5500,
        max_m3=42.0,
        cost_per_km=0.45,
        cost_per_hour=35.0,
        cost_per_dispatch=30.0,
        speed_kmh=65.0,
        tiers="feeder direct",
        fuel_l_per_100km=21.0,
        fuel="diesel",
    ),
    Vehicle(
        id="A40",
        name="40 t articulated (13.6 m trailer)",
        payload=33,
        max_kg=25000,
        max_m3=90.0,
        cost_per_km=0.75,
        cost_per_hour=40.0,
        cost_per_dispatch=45.0,
        speed_kmh=75.0,
        tiers="trunk feeder direct",
        fuel_l_per_100km=32.0,
        fuel="diesel",
    ),
)


def great_circle_km(lat1: float, lon1: float, lat2: float, lon2: float) -> float:
    """Haversine distance between two points on the mean-radius sphere, km."""
    p1, p2 = math.radians(lat1), math.radians(lat2)
    dp = p2 - p1
    dl = math.radians(lon2 - lon1)
    h = math.sin(dp / 2) ** 2 + math.cos(p1) * math.cos(p2) * math.sin(dl / 2) ** 2
    return 2 * MEAN_EARTH_RADIUS_KM * math.asin(math.sqrt(h))


def road_km(a: Town, b: Town) -> float:
    """Estimated road distance between two towns, km (great circle x circuity)."""
    return CIRCUITY * great_circle_km(a.lat, a.lon, b.lat, b.lon)


def hhmm(hours: float) -> str:
    """An hour of the day (0-24, whole minutes) as ``HH:MM``."""
    minutes = round(hours * 60)
    return f"{minutes // 60:02d}:{minutes % 60:02d}"


def service_times(town: Town) -> tuple[float, float]:
    """Cut-off and delivery deadline of a terminal, hours of the day (rule in the docstring)."""
    if town.region == IDF:
        cutoff, deliver_by = 19.5, 7.5
    elif town.population_m >= 0.5:
        cutoff, deliver_by = 19.0, 7.5
    elif town.population_m >= 0.15:
        cutoff, deliver_by = 18.5, 8.0
    else:
        cutoff, deliver_by = 18.0, 8.0
    by_id = {t.id: t for t in TOWNS}
    nearest = min(road_km(town, by_id[h]) for h in HUBS)
    if nearest > REMOTE_KM:
        cutoff, deliver_by = cutoff - 0.5, deliver_by + 0.5
    return cutoff, deliver_by


def overnight_h(cutoff_h: float, deliver_by_h: float) -> float:
    """Hours from a cut-off to the next deadline (the allowance of one night)."""
    return (deliver_by_h - cutoff_h) % 24.0 or 24.0


def leg_hours(km: float, speed_kmh: float) -> float:
    """Hours to run one leg: driving, plus EU breaks and driver relays (constants above).

    One break per started 4.5 h of driving after the first, one relay per
    started 9 h after the first: a conservative count.
    """
    drive = km / speed_kmh
    breaks = max(0, math.ceil(drive / BREAK_AFTER_H) - 1)
    relays = max(0, math.ceil(drive / DAILY_DRIVING_H) - 1)
    return drive + breaks * BREAK_H + relays * RELAY_H


def reference_hours(o: Town, d: Town) -> float:
    """Transit hours from ``o`` to ``d`` on the reference network (see the docstring)."""
    by_id = {t.id: t for t in TOWNS}
    core = [by_id[h] for h in list(HUBS)[:CORE_HUBS]]
    feeder_kmh = min(v.speed_kmh for v in VEHICLES if "feeder" in v.tiers.split())
    trunk_kmh = min(v.speed_kmh for v in VEHICLES if "trunk" in v.tiers.split())
    k = min(core, key=lambda h: road_km(o, h))
    m = min(core, key=lambda h: road_km(d, h))
    hours = leg_hours(road_km(o, k), feeder_kmh) + HUBS[k.id].sort_hours
    if m.id != k.id:
        hours += leg_hours(road_km(k, m), trunk_kmh) + HUBS[m.id].sort_hours
    return hours + leg_hours(road_km(m, d), feeder_kmh)


def select(terminals: int, hubs: int) -> list[Town]:
    """The towns of a variant, in ``TOWNS`` order (see "Small variant" above)."""
    if not 1 <= hubs <= len(HUBS):
        raise SystemExit(f"--hubs must be between 1 and {len(HUBS)}")
    if not hubs < terminals <= len(TOWNS):
        raise SystemExit(f"--terminals must be above --hubs and at most {len(TOWNS)}")
    keep = set(list(HUBS)[:hubs])
    by_region: dict[str, list[Town]] = {}
    for t in TOWNS:
        if t.id not in HUBS:
            by_region.setdefault(t.region, []).append(t)
    for towns in by_region.values():
        towns.sort(key=lambda t: -t.population_m)  # stable: ties keep table order
    ranked = [
        towns[r]
        for r in range(max(len(towns) for towns in by_region.values()))
        for towns in by_region.values()
        if r < len(towns)
    ]
    keep.update(t.id for t in ranked[: terminals - hubs])
    return [t for t in TOWNS if t.id in keep]


def sites_rows(towns: Sequence[Town], hubs: int) -> list[list[str]]:
    """Rows of ``sites.csv``: header first."""
    candidates = set(list(HUBS)[:hubs])
    rows = [
        [
            "id", "name", "lat", "lon", "region", "can_be_hub", "hub_fixed_cost",
            "handling_cost", "sort_capacity", "hub_status", "sort_hours", "cutoff", "deliver_by",
        ]
    ]  # fmt: skip
    for t in towns:
        cutoff, deliver_by = service_times(t)
        if t.id in candidates:
            h = HUBS[t.id]
            hub = ["true", str(h.fixed_cost), f"{h.handling:.2f}", str(h.capacity), "candidate"]
            sort = f"{h.sort_hours:.2f}"
        else:
            hub, sort = ["false", "0", "0", "", "closed"], ""
        rows.append(
            [t.id, t.name, f"{t.lat:.4f}", f"{t.lon:.4f}", t.region, *hub, sort]
            + [hhmm(cutoff), hhmm(deliver_by)]
        )
    return rows


def demand_rows(towns: Sequence[Town]) -> list[list[str]]:
    """Rows of ``demand.csv`` (header first): pairs with at least one pallet a day."""
    normal = statistics.NormalDist()
    times = {t.id: service_times(t) for t in towns}
    rows = [["origin", "destination", "volume", "max_hours"]]
    for o in towns:
        for d in towns:
            if o.id == d.id:
                continue
            rng = random.Random(f"{SEED}:{o.id}:{d.id}")
            u = min(max(rng.random(), 1e-12), 1.0 - 1e-12)
            noise = math.exp(SIGMA * normal.inv_cdf(u))
            r = road_km(o, d)
            raw = K * o.population_m**A * d.population_m**B / (r + R0) ** C * noise
            if raw < 1.0:
                continue
            max_hours = ""
            night = overnight_h(times[o.id][0], times[d.id][1])
            if reference_hours(o, d) + MARGIN_H > night:
                max_hours = f"{night + 24.0:g}"
            rows.append([o.id, d.id, str(round(raw)), max_hours])
    return rows


def vehicle_rows() -> list[list[str]]:
    """Rows of ``vehicles.csv``: header first."""
    rows = [
        [
            "id", "name", "payload", "max_kg", "max_m3", "cost_per_km", "cost_per_hour",
            "cost_per_dispatch", "speed_kmh", "tiers", "fuel_l_per_100km", "fuel",
        ]
    ]  # fmt: skip
    for v in VEHICLES:
        rows.append(
            [
                v.id, v.name, str(v.payload), str(v.max_kg), f"{v.max_m3:g}",
                f"{v.cost_per_km:.2f}", f"{v.cost_per_hour:.2f}", f"{v.cost_per_dispatch:.2f}",
                f"{v.speed_kmh:g}", v.tiers, f"{v.fuel_l_per_100km:g}", v.fuel,
            ]
        )  # fmt: skip
    return rows


def render(rows: list[list[str]]) -> str:
    """CSV text with Unix line ends."""
    out = io.StringIO()
    csv.writer(out, lineterminator="\n").writerows(rows)
    return out.getvalue()


def build(terminals: int, hubs: int) -> dict[str, str]:
    """File name -> text of the three CSV files of a variant."""
    if len(TOWNS) != FULL_TERMINALS or len({t.id for t in TOWNS}) != len(TOWNS):
        raise SystemExit(f"TOWNS must hold {FULL_TERMINALS} towns with distinct ids")
    if [t.id for t in TOWNS[: len(HUBS)]] != list(HUBS):
        raise SystemExit("the candidate hubs must come first in TOWNS, in HUBS order")
    towns = select(terminals, hubs)
    return {
        "sites.csv": render(sites_rows(towns, hubs)),
        "demand.csv": render(demand_rows(towns)),
        "vehicles.csv": render(vehicle_rows()),
    }


def main(argv: list[str] | None = None) -> int:
    """Write the files (or, with ``--check``, compare them); return the exit code."""
    doc = __doc__ or ""
    parser = argparse.ArgumentParser(description=doc.splitlines()[0])
    parser.add_argument("--check", action="store_true", help="exit 1 if a file differs")
    parser.add_argument("--terminals", type=int, default=FULL_TERMINALS, help="hubs included")
    parser.add_argument("--hubs", type=int, default=FULL_HUBS, help="candidate hubs")
    parser.add_argument("--out", type=Path, help="folder to write (default: this script's folder)")
    parser.add_argument(
        "--small",
        action="store_true",
        help=f"--terminals {SMALL_TERMINALS} --hubs {SMALL_HUBS} --out {SMALL_DIR}",
    )
    args = parser.parse_args(argv)
    terminals, hubs, out = args.terminals, args.hubs, args.out
    if args.small:
        terminals, hubs, out = SMALL_TERMINALS, SMALL_HUBS, out or SMALL_DIR
    if out is None:
        if (terminals, hubs) != (FULL_TERMINALS, FULL_HUBS):
            raise SystemExit("a reduced variant needs --out (or --small)")
        out = HERE
    files = build(terminals, hubs)
    if args.check:
        stale = [
            name
            for name, text in files.items()
            if not (out / name).exists() or (out / name).read_text(encoding="utf-8") != text
        ]
        for name in stale:
            print(f"{out / name} differs from what generate.py produces", file=sys.stderr)
        if stale:
            return 1
        print(f"{out}: {', '.join(files)} are up to date")
        return 0
    out.mkdir(parents=True, exist_ok=True)
    for name, text in files.items():
        (out / name).write_text(text, encoding="utf-8", newline="")
    demand = list(csv.DictReader(io.StringIO(files["demand.csv"])))
    total = sum(int(row["volume"]) for row in demand)
    print(f"wrote {out}: {terminals} terminals ({hubs} candidate hubs), ", end="")
    print(f"{len(demand)} OD pairs, {total} pallets/day")
    return 0


if __name__ == "__main__":
    sys.exit(main())
