"""A leg takes the time of the class run on it, not of the slowest class allowed.

Issue 3 asks for the transit time of every route "at the chosen class's
speed". Hand-computed cases on a line of sites 100 km apart (planar, the
distances given as a matrix), one hub H, a fast van (100 km/h, 3.00 per
km) and a slow van (50 km/h, 1.00 per km), both carrying 10 units and
allowed on every tier. Hub sorting takes 1 h (hubnet's default sort time).
Every leg here is far under the 4.5 h of driving after which Regulation
(EC) No 561/2006, Art. 7, asks for a break, so a run's time is its driving
time: 1 h at 100 km/h, 2 h at 50 km/h. A dispatch is a round trip: 200 km,
600 with the fast van and 200 with the slow one.
"""

from __future__ import annotations

import csv
from pathlib import Path

import pytest

from hubnet.api import load_scenario, run_scenario, solve_scenario
from hubnet.errors import InfeasibleError

FAST_ONLY = """\
id,name,payload,cost_per_km,speed_kmh,tiers
fast,Fast van,10,3.0,100,feeder trunk
"""
BOTH = FAST_ONLY + "slow,Slow van,10,1.0,50,feeder trunk\n"
SLOW_ONLY = "id,name,payload,cost_per_km,speed_kmh,tiers\nslow,Slow van,10,1.0,50,feeder trunk\n"


def scenario(folder: Path, vehicles: str, demand: str, *, value_of_time: float = 0.0) -> Path:
    """Terminals A, B, C each 100 km from hub H; write the files and the config."""
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "sites.csv").write_text(
        "id,name,x,y,can_be_hub\nA,A,0,0,false\nH,H,100,0,true\nB,B,200,0,false\n"
        "C,C,100,100,false\n",
        encoding="utf-8",
    )
    ids = ("A", "H", "B", "C")
    km = {frozenset(p): d for p, d in ((("A", "H"), 100), (("H", "B"), 100), (("H", "C"), 100))}
    rows = ["origin,destination,distance_km"]
    for a in ids:
        for b in ids:
            if a != b:
                rows.append(f"{a},{b},{km.get(frozenset((a, b)), 150)}")
    (folder / "distances.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    (folder / "demand.csv").write_text(demand, encoding="utf-8")
    (folder / "vehicles.csv").write_text(vehicles, encoding="utf-8")
    config = folder / "s.toml"
    config.write_text(
        f"""[scenario]
name = "leg times"
[inputs]
sites = "sites.csv"
demand = "demand.csv"
distances = "distances.csv"
vehicles = "vehicles.csv"
[distances]
method = "matrix"
[model]
hubs = 1
[freight]
direct_min_load = 100.0
value_of_time = {value_of_time}
[solver]
name = "highs"
gap = 0.0
""",
        encoding="utf-8",
    )
    return config


def rows(path: Path) -> list[dict[str, str]]:
    with open(path, encoding="utf-8", newline="") as fh:
        return list(csv.DictReader(fh))


#: A -> B within 3.5 h: via H, 1 h sort. Fast vans on both feeders: 1 + 1 + 1
#: = 3 h; a slow van on either: 2 + 1 + 1 = 4 h, late. A -> H has all day.
TIGHT = "origin,destination,volume,max_hours\nA,B,10,3.5\nA,H,5,\n"


def test_a_slow_class_allowed_does_not_make_the_plan_late(tmp_path: Path) -> None:
    sol, out = run_scenario(scenario(tmp_path / "in", BOTH, TIGHT), tmp_path / "run")
    assert sol.stats.status == "optimal"
    # A-H carries 15 units: 2 fast vans (a slow one there would make A -> B late);
    # H-B carries 10: 1 fast van. Cost (2 + 1) x 600 = 1,800.
    assert sol.costs["total"] == pytest.approx(1800.0)
    runs = {
        (r["origin"], r["destination"], r["vehicle_class"]): r for r in rows(out / "dispatches.csv")
    }
    assert {k[2] for k in runs} == {"fast"}
    routes = {(r["origin"], r["destination"]): r for r in rows(out / "routes.csv")}
    assert float(routes["A", "B"]["transit_h"]) == pytest.approx(3.0)
    assert float(routes["A", "H"]["transit_h"]) == pytest.approx(2.0)  # 1 h driving + 1 h sort


def test_only_the_slow_class_cannot_meet_it(tmp_path: Path) -> None:
    # With the slow van alone the fastest path takes 2 + 1 + 2 = 5 h > 3.5 h.
    with pytest.raises(InfeasibleError, match=r"A -> B: the fastest path, via H, takes 5\.0 h"):
        solve_scenario(load_scenario(scenario(tmp_path, SLOW_ONLY, TIGHT)))


def test_the_slow_class_runs_where_there_is_time(tmp_path: Path) -> None:
    # C -> H has all day: the slow van, 200 a dispatch, instead of the fast one at
    # 600. Plan: 2 fast on A-H, 1 fast on H-B, 1 slow on C-H = 1,800 + 200.
    demand = TIGHT + "C,H,10,\n"
    sol, out = run_scenario(scenario(tmp_path / "in", BOTH, demand), tmp_path / "run")
    assert sol.costs["total"] == pytest.approx(2000.0)
    classes = {
        (r["origin"], r["destination"]): r["vehicle_class"] for r in rows(out / "dispatches.csv")
    }
    assert classes["C", "H"] == "slow"
    assert classes["A", "H"] == classes["H", "B"] == "fast"
    legs = {(r["from_site"], r["to_site"]): r for r in rows(out / "legs.csv")}
    assert float(legs["C", "H"]["transit_h"]) == pytest.approx(2.0)  # 100 km at 50 km/h
    assert float(legs["A", "H"]["transit_h"]) == pytest.approx(1.0)  # 100 km at 100 km/h
    routes = {(r["origin"], r["destination"]): r for r in rows(out / "routes.csv")}
    assert float(routes["C", "H"]["transit_h"]) == pytest.approx(3.0)  # 2 h + 1 h sort


@pytest.mark.parametrize(("value_of_time", "c_class"), [(30.0, "slow"), (50.0, "fast")])
def test_value_of_time_buys_the_fast_class(
    tmp_path: Path, value_of_time: float, c_class: str
) -> None:
    # C -> H, 10 units: the fast van costs 400 more a day and saves 10 units x 1 h
    # = 10 unit-hours; it pays above 40 per unit-hour. (A's pairs use fast vans
    # either way, as above.)
    demand = TIGHT + "C,H,10,\n"
    sol, out = run_scenario(
        scenario(tmp_path / "in", BOTH, demand, value_of_time=value_of_time), tmp_path / "run"
    )
    classes = {
        (r["origin"], r["destination"]): r["vehicle_class"] for r in rows(out / "dispatches.csv")
    }
    assert classes["C", "H"] == c_class
    # vehicles 1,800 + (200 slow | 600 fast); unit-hours: A -> B 10 x 3 h, A -> H 5 x 2 h,
    # C -> H 10 x (3 h slow | 2 h fast)
    hours = 10 * 3.0 + 5 * 2.0 + 10 * (3.0 if c_class == "slow" else 2.0)
    vehicles = 1800.0 + (200.0 if c_class == "slow" else 600.0)
    assert sol.costs["time"] == pytest.approx(value_of_time * hours)
    assert sol.costs["total"] == pytest.approx(vehicles + value_of_time * hours)
    assert sol.objective_check is not None and abs(sol.objective_check) <= 1e-6 * sol.costs["total"]
