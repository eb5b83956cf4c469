"""Recreate ``demand.csv`` of the Iberia demo from ``sites.csv`` with a small gravity model.

The demo is an invented scenario on real geography: the terminals sit on
real towns, but every volume and cost is made up. Daily volume from
terminal ``i`` to terminal ``j`` (pallets per day) is::

    volume[i, j] = K * P[i] ** A * P[j] ** B / d[i, j] ** C * noise[i, j]

rounded to whole pallets, with at least one pallet a day on every lane,
where

- ``P`` is the approximate metropolitan-area population, in millions
  (approximate, from memory; good enough for invented volumes);
- ``d`` is the great-circle distance in km between the two towns, on a
  sphere of the IUGG mean Earth radius (6371.0088 km);
- ``K``, ``A``, ``B`` and ``C`` are invented constants (below);
- ``noise`` is log-normal, ``exp(SIGMA * z)`` with ``z`` standard normal,
  drawn from a fixed seed so the file is the same on every run.

Only the standard library is used: :meth:`random.Random.random` is the one
generator Python promises to repeat across versions for a given seed, and
``z`` is obtained from it through :meth:`statistics.NormalDist.inv_cdf`.
Lanes are drawn in ``sites.csv`` order, origin first.

Usage::

    python demo_regions/iberia/generate.py           # rewrite demand.csv
    python demo_regions/iberia/generate.py --check   # exit 1 if it differs
"""

from __future__ import annotations

import argparse
import csv
import io
import math
import random
import statistics
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
SITES = HERE / "sites.csv"
DEMAND = HERE / "demand.csv"

#: Approximate metropolitan-area population, millions (approximate, from
#: memory; used only to shape the invented volumes).
POPULATION_M: dict[str, float] = {
    "MAD": 6.8,
    "BCN": 5.0,
    "VAL": 1.6,
    "SEV": 1.5,
    "ZAR": 0.75,
    "MAL": 1.0,
    "BIL": 1.0,
    "VLD": 0.42,
    "VIG": 0.48,
    "ACO": 0.42,
    "ALI": 0.76,
    "MUR": 0.65,
    "GRA": 0.53,
    "OVI": 0.83,
    "PAM": 0.36,
    "BAD": 0.15,
    "CDB": 0.33,
    "ALB": 0.17,
    "BUR": 0.18,
    "LIS": 2.9,
    "OPO": 1.7,
    "FAR": 0.45,
    "COI": 0.43,
    "EVO": 0.17,
}

#: Invented gravity constants: scale (pallets per day), origin and
#: destination population exponents, distance decay exponent.
K = 3000.0
A = 0.9
B = 1.0
C = 0.9
#: Spread of the log-normal noise (invented).
SIGMA = 0.3
#: Fixed seed of the noise.
SEED = 20240601

#: IUGG mean Earth radius, km (for the great-circle distance only).
MEAN_EARTH_RADIUS_KM = 6371.0088


def great_circle_km(lat1: float, lon1: float, lat2: float, lon2: float) -> float:
    """Haversine distance between two points on the mean-radius sphere, km."""
    p1, p2 = math.radians(lat1), math.radians(lat2)
    dp = p2 - p1
    dl = math.radians(lon2 - lon1)
    h = math.sin(dp / 2) ** 2 + math.cos(p1) * math.cos(p2) * math.sin(dl / 2) ** 2
    return 2 * MEAN_EARTH_RADIUS_KM * math.asin(math.sqrt(h))


def read_sites(path: Path) -> list[tuple[str, float, float]]:
    """Terminal ids with latitude and longitude (degrees), in file order."""
    with path.open(newline="", encoding="utf-8") as f:
        return [(row["id"], float(row["lat"]), float(row["lon"])) for row in csv.DictReader(f)]


def demand_rows(sites: list[tuple[str, float, float]]) -> list[tuple[str, str, int]]:
    """Daily volume (pallets) for every ordered pair of distinct terminals."""
    missing = [s for s, _, _ in sites if s not in POPULATION_M]
    if missing:
        raise SystemExit(f"no population for terminal(s) {', '.join(missing)}; add to POPULATION_M")
    rng = random.Random(SEED)
    normal = statistics.NormalDist()
    rows = []
    for o, lat_o, lon_o in sites:
        for d, lat_d, lon_d in sites:
            if o == d:
                continue
            u = min(max(rng.random(), 1e-12), 1.0 - 1e-12)
            noise = math.exp(SIGMA * normal.inv_cdf(u))
            dist = great_circle_km(lat_o, lon_o, lat_d, lon_d)
            volume = K * POPULATION_M[o] ** A * POPULATION_M[d] ** B / dist**C * noise
            rows.append((o, d, max(1, round(volume))))
    return rows


def render(rows: list[tuple[str, str, int]]) -> str:
    """The CSV text: header ``origin,destination,volume``, Unix line ends."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(["origin", "destination", "volume"])
    writer.writerows(rows)
    return out.getvalue()


def main(argv: list[str] | None = None) -> int:
    """Write ``demand.csv`` (or, with ``--check``, compare it); return the exit code."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--check", action="store_true", help="do not write; exit 1 if demand.csv differs"
    )
    args = parser.parse_args(argv)
    rows = demand_rows(read_sites(SITES))
    text = render(rows)
    if args.check:
        current = DEMAND.read_text(encoding="utf-8") if DEMAND.exists() else ""
        if current != text:
            print(f"{DEMAND} differs from what generate.py produces", file=sys.stderr)
            return 1
        print(f"{DEMAND} is up to date")
        return 0
    DEMAND.write_text(text, encoding="utf-8", newline="")
    total = sum(v for _, _, v in rows)
    print(f"wrote {DEMAND}: {len(rows)} lanes, {total} pallets/day")
    return 0


if __name__ == "__main__":
    sys.exit(main())
