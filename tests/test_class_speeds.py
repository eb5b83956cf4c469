"""Legs timed by the classes run on them: hand-computed cases with two or three speeds.

A leg takes the time of the slowest class the plan runs on it, so a slow,
cheap class may run where the deadline leaves room and a fast one where it
does not (hubnet.freight, speed levels).

Scenario: terminals A and B each 100 km from hub H (planar, distances as a
matrix), one hub, no direct lanes unless said, A -> B 10 pallets. Hub sort
1 h (hubnet's default). Fast van: payload 10, 3.0 per km, 100 km/h, so 1 h
a leg; slow van: payload 10, 1.0 per km, 50 km/h, 2 h a leg. No hourly or
dispatch costs. Both are far under the 4.5 h of driving after which
Regulation (EC) No 561/2006, Art. 7, asks for a break. A round trip of a
feeder leg is 200 km: 600 with the fast van, 200 with the slow one.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from hubnet.api import load_scenario, solve_scenario
from hubnet.errors import InfeasibleError
from hubnet.freight import (
    _setup,
    evaluate_freight,
    restrict_allocations,
    starting_freight_plan,
)
from hubnet.solution import SolveStats

HEADER = "id,name,payload,cost_per_km,speed_kmh,tiers\n"
FAST = "fast,Fast van,10,3.0,100,feeder trunk\n"
SLOW = "slow,Slow van,10,1.0,50,feeder trunk\n"


def scenario(
    folder: Path,
    vehicles: str,
    demand: str,
    *,
    km: dict[tuple[str, str], float] | None = None,
    freight: str = "direct_min_load = 100.0",
) -> Path:
    """Write the A - H - B scenario; ``km`` replaces the distances (both ways)."""
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "sites.csv").write_text(
        "id,name,x,y,can_be_hub\nA,A,0,0,false\nH,H,100,0,true\nB,B,200,0,false\n",
        encoding="utf-8",
    )
    km = km or {("A", "H"): 100, ("H", "B"): 100, ("A", "B"): 200}
    rows = ["origin,destination,distance_km"]
    for (a, b), d in km.items():
        rows += [f"{a},{b},{d}", f"{b},{a},{d}"]
    (folder / "distances.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    (folder / "demand.csv").write_text(
        "origin,destination,volume,max_hours\n" + demand, encoding="utf-8"
    )
    (folder / "vehicles.csv").write_text(HEADER + vehicles, encoding="utf-8")
    config = folder / "s.toml"
    config.write_text(
        f"""[scenario]
name = "class speeds"
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
{freight}
[solver]
name = "highs"
gap = 0.0
""",
        encoding="utf-8",
    )
    return config


def classes_on(sol: object, tier: str, origin: str, destination: str) -> set[str]:
    legs = [
        g
        for g in sol.legs  # type: ignore[attr-defined]
        if (g.tier, g.origin, g.destination) == (tier, origin, destination)
    ]
    assert len(legs) == 1
    return {c for c, n in legs[0].dispatches.items() if n > 0}


@pytest.mark.parametrize(
    ("allowed", "cost", "hours", "fast_legs"),
    [
        # 3.5 h: only fast + 1 h sort + fast = 3.0 h is on time (fast + slow is
        # 1 + 1 + 2 = 4.0 h): 600 + 600.
        (3.5, 1200.0, 3.0, 2),
        # 4.5 h: one leg may be slow: 1 + 1 + 2 = 4.0 h, 600 + 200 (both slow: 5.0 h, late).
        (4.5, 800.0, 4.0, 1),
        # 6 h: both slow, 2 + 1 + 2 = 5.0 h, 200 + 200.
        (6.0, 400.0, 5.0, 0),
    ],
)
def test_each_leg_runs_the_cheapest_class_its_deadline_allows(
    tmp_path: Path, allowed: float, cost: float, hours: float, fast_legs: int
) -> None:
    config = scenario(tmp_path, FAST + SLOW, f"A,B,10,{allowed}\n")
    sol = solve_scenario(load_scenario(config))
    assert sol.stats.status == "optimal"
    assert sol.costs["total"] == pytest.approx(cost, rel=1e-9)
    (route,) = sol.routes
    assert route.transit_h == pytest.approx(hours, rel=1e-9)
    runs = [classes_on(sol, "feeder", "A", "H"), classes_on(sol, "feeder", "H", "B")]
    assert sum(r == {"fast"} for r in runs) == fast_legs
    assert sum(r == {"slow"} for r in runs) == 2 - fast_legs
    # each leg's time in legs.csv is its class's: 1 h fast, 2 h slow
    for g in sol.legs:
        assert g.transit_h == pytest.approx(1.0 if set(g.dispatches) == {"fast"} else 2.0)


def test_one_way_runs_time_collection_and_delivery_apart(tmp_path: Path) -> None:
    # One-way runs of 100 km: fast 300, slow 100. 4.5 h allowed: one of the two
    # runs fast (4.0 h), 300 + 100.
    config = scenario(
        tmp_path,
        FAST + SLOW,
        "A,B,10,4.5\n",
        freight="direct_min_load = 100.0\nround_trips = false",
    )
    sol = solve_scenario(load_scenario(config))
    assert sol.costs["total"] == pytest.approx(400.0, rel=1e-9)
    assert sol.routes[0].transit_h == pytest.approx(4.0, rel=1e-9)


def test_the_starting_plan_uses_the_fast_class_where_the_deadline_needs_it(
    tmp_path: Path,
) -> None:
    # The start, built outside the solver, must also time legs by their classes:
    # at 3.5 h allowed it runs the fast van on both legs (1200, 3.0 h), the plan
    # the solver proves optimal above.
    sc = load_scenario(scenario(tmp_path, FAST + SLOW, "A,B,10,3.5\n"))
    cfg = sc.config
    st = _setup(sc.data, sc.distances, cfg.model, cfg.freight)
    restrict_allocations(sc.data, st)
    plan = starting_freight_plan(sc.data, st, cfg.model, cfg.freight, max_seconds=5.0)
    assert plan is not None
    stats = SolveStats(
        solver="highs",
        status="time_limit",
        objective=None,
        best_bound=None,
        gap=None,
        solve_seconds=0.0,
        build_seconds=0.0,
        formulation="starting plan",
    )
    sol = evaluate_freight(sc.data, st, cfg.model, cfg.freight, plan, stats)
    assert sol.costs["total"] == pytest.approx(1200.0, rel=1e-9)
    assert sol.routes[0].transit_h == pytest.approx(3.0, rel=1e-9)


def test_value_of_time_counts_the_slowest_class_on_a_leg_once(tmp_path: Path) -> None:
    # Three classes on the feeders: fast (10, 3.0/km, 100 km/h, 1 h), medium
    # (5, 0.6/km, 80 km/h, 1.25 h), slow (10, 1.0/km, 50 km/h, 2 h). A -> B 10
    # pallets in 3.2 h: fast on both legs (medium on one: 3.25 h, late): 1200,
    # 3.0 h. C -> H 15 pallets, no deadline, on C's own feeder leg (100 km):
    # value of time 3 per pallet-hour.
    #   medium + slow: 120 + 200 = 320, leg 2 h (its slowest), + 1 h sort = 3 h:
    #     320 + 15 x 3 x 3 = 455
    #   3 medium: 360, 2.25 h: 360 + 101.25 = 461.25; 2 slow: 400 + 135 = 535;
    #   2 fast: 1200 + 90 = 1290.
    # Total 1200 + 10 x 3.0 x 3 + 455 = 1745. (Summing the extra hours of both
    # slower classes would price medium + slow at 3.25 h and miss this.)
    vehicles = FAST + "med,Medium van,5,0.6,80,feeder trunk\n" + SLOW
    km = {("A", "H"): 100, ("H", "B"): 100, ("C", "H"): 100, ("A", "B"): 150}
    km |= {("A", "C"): 150, ("B", "C"): 150}
    config = scenario(
        tmp_path,
        vehicles,
        "A,B,10,3.2\nC,H,15,\n",
        km=km,
        freight="direct_min_load = 100.0\nvalue_of_time = 3.0",
    )
    (tmp_path / "sites.csv").write_text(
        "id,name,x,y,can_be_hub\nA,A,0,0,false\nH,H,100,0,true\nB,B,200,0,false\n"
        "C,C,100,100,false\n",
        encoding="utf-8",
    )
    sol = solve_scenario(load_scenario(config))
    assert sol.stats.status == "optimal"
    assert sol.costs["total"] == pytest.approx(1745.0, rel=1e-9)
    assert sol.costs["time"] == pytest.approx(90.0 + 135.0, rel=1e-9)
    assert classes_on(sol, "feeder", "C", "H") == {"med", "slow"}


def test_a_direct_lane_runs_a_class_too_slow_for_a_pair_that_goes_via_the_hub(
    tmp_path: Path,
) -> None:
    # Feeders (and trunks, unused): a van (10, 1.0/km, 100 km/h). Direct lanes: a slow truck (20,
    # 1.0/km, 50 km/h) or an express van (10, 10.0/km, 100 km/h). Direct lane
    # A - B 180 km.
    #   A -> B 20 pallets, no deadline: direct on one slow truck, 360 km x 1.0
    #   = 360 (via H: two vans on each feeder, 2 x 200 x 2 = 800).
    #   B -> A 5 pallets in 3.5 h: direct on the slow truck 3.6 h (late); via H
    #   on vans 1 + 1 + 1 = 3.0 h, one van on each feeder: 200 + 200.
    # Optimum 360 + 400 = 760. Barring the slow truck from the lane because it
    # is too slow for B -> A, a pair the lane does not carry, gives 800 (all
    # via H); B -> A direct on the express van would cost 3,600 alone.
    vehicles = (
        "van,Van,10,1.0,100,feeder trunk\n"
        "slow,Slow truck,20,1.0,50,direct\n"
        "express,Express van,10,10.0,100,direct\n"
    )
    km = {("A", "H"): 100, ("H", "B"): 100, ("A", "B"): 180}
    config = scenario(
        tmp_path, vehicles, "A,B,20,\nB,A,5,3.5\n", km=km, freight="direct_min_load = 0.5"
    )
    sol = solve_scenario(load_scenario(config))
    assert sol.costs["total"] == pytest.approx(760.0, rel=1e-9)
    assert classes_on(sol, "direct", "A", "B") == {"slow"}
    back = next(r for r in sol.routes if r.origin == "B")
    assert back.path == ("B", "H", "A")
    assert back.transit_h == pytest.approx(3.0, rel=1e-9)


def test_no_class_fast_enough_names_the_fastest_path(tmp_path: Path) -> None:
    # The slow van alone: 2 + 1 + 2 = 5.0 h against 3.5 h allowed.
    with pytest.raises(InfeasibleError) as err:
        solve_scenario(load_scenario(scenario(tmp_path, SLOW, "A,B,10,3.5\n")))
    text = str(err.value)
    assert "A -> B: the fastest path, via H, takes 5.0 h on each leg's fastest class" in text
    assert "3.5 h are allowed" in text


def test_a_slow_class_beside_a_fast_one_no_longer_makes_a_pair_late(tmp_path: Path) -> None:
    # Before legs were timed by their classes, adding the slow van to the fast
    # one timed every feeder at 2 h and the pair A -> B (3.5 h) was called late.
    with_slow = solve_scenario(load_scenario(scenario(tmp_path / "a", FAST + SLOW, "A,B,10,3.5\n")))
    alone = solve_scenario(load_scenario(scenario(tmp_path / "b", FAST, "A,B,10,3.5\n")))
    assert with_slow.costs["total"] == pytest.approx(alone.costs["total"], rel=1e-9)
    assert with_slow.routes[0].transit_h == pytest.approx(3.0, rel=1e-9)


def test_a_slower_class_that_arrives_sooner_is_timed_by_its_hours(tmp_path: Path) -> None:
    # hours.long_legs = "two_drivers", EU rules. Direct lane A - B 900 km, 9.5 h
    # allowed, no other way in time (via H: 800 km legs, over 8 h each).
    #   fast, 100 km/h: 9.0 h of driving, one driver (at most 9 h a day,
    #     Regulation (EC) No 561/2006 Art. 6(1)) with a 45 min break after
    #     4.5 h (Art. 7): 9.75 h, late;
    #   slow, 97.8 km/h: 9.2025 h of driving, over one driver's day, so two
    #     drivers who take their breaks while the other drives (Art. 7, second
    #     paragraph, from memory): 9.2025 h, on time.
    # The slower class is the quicker one here: one round trip, 1,800 km x 2.0 = 3,600.
    vehicles = (
        "fast,Fast van,10,1.0,100,feeder trunk direct\n"
        "slow,Slow van,10,2.0,97.8,feeder trunk direct\n"
    )
    km = {("A", "H"): 800, ("H", "B"): 800, ("A", "B"): 900}
    config = scenario(tmp_path, vehicles, "A,B,10,9.5\n", km=km, freight="direct_min_load = 0.0")
    config.write_text(
        config.read_text(encoding="utf-8") + '[hours]\nlong_legs = "two_drivers"\n',
        encoding="utf-8",
    )
    sol = solve_scenario(load_scenario(config))
    assert sol.costs["total"] == pytest.approx(3600.0, rel=1e-9)
    assert classes_on(sol, "direct", "A", "B") == {"slow"}
    assert sol.routes[0].transit_h == pytest.approx(900 / 97.8, rel=1e-9)
