"""What a user is told when a deadline cannot be met, with two vehicle speeds.

hubnet times every leg at the slowest class allowed on its tier, so a plan
stays on time whichever allowed class runs it. When that makes a pair late
but the fastest class would not, the message must say so and say what to
change, rather than quote the slow timetable as the fastest path.

Hand-computed case: terminals A and B each 100 km from hub H (planar,
distances as a matrix), A -> B allowed 3.5 h, hub sorting 1 h (hubnet's
default). A fast van at 100 km/h takes 1 h a leg, a slow van at 50 km/h
2 h; both are far under the 4.5 h of driving after which Regulation (EC)
No 561/2006, Art. 7, asks for a break. At the slowest class A -> H -> B
takes 2 + 1 + 2 = 5 h; at the fastest 1 + 1 + 1 = 3 h.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from hubnet.api import load_scenario, solve_scenario
from hubnet.errors import InfeasibleError

FAST = "fast,Fast van,10,3.0,100,feeder trunk\n"
SLOW = "slow,Slow van,10,1.0,50,feeder trunk\n"
HEADER = "id,name,payload,cost_per_km,speed_kmh,tiers\n"


def scenario(folder: Path, vehicles: str) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "sites.csv").write_text(
        "id,name,x,y,can_be_hub\nA,A,0,0,false\nH,H,100,0,true\nB,B,200,0,false\n",
        encoding="utf-8",
    )
    km = {("A", "H"): 100, ("H", "B"): 100, ("A", "B"): 200}
    rows = ["origin,destination,distance_km"]
    for (a, b), d in km.items():
        rows += [f"{a},{b},{d}", f"{b},{a},{d}"]
    (folder / "distances.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    (folder / "demand.csv").write_text(
        "origin,destination,volume,max_hours\nA,B,10,3.5\n", encoding="utf-8"
    )
    (folder / "vehicles.csv").write_text(HEADER + vehicles, encoding="utf-8")
    config = folder / "s.toml"
    config.write_text(
        """[scenario]
name = "deadline messages"
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
[solver]
name = "highs"
""",
        encoding="utf-8",
    )
    return config


def test_fast_class_alone_is_on_time(tmp_path: Path) -> None:
    sol = solve_scenario(load_scenario(scenario(tmp_path, FAST)))
    (route,) = sol.routes
    assert route.transit_h == pytest.approx(3.0)  # 1 + 1 + 1


def test_a_slow_class_beside_it_is_named_as_the_cause(tmp_path: Path) -> None:
    with pytest.raises(InfeasibleError) as err:
        solve_scenario(load_scenario(scenario(tmp_path, FAST + SLOW)))
    text = str(err.value)
    assert "A -> B: the fastest path, via H, takes 5.0 h" in text  # the slow timetable
    assert "with the fastest class on every leg it would take 3.0 h" in text
    assert "keep the slower classes off the tiers it uses" in text


def test_no_hint_when_no_class_is_fast_enough(tmp_path: Path) -> None:
    # The slow van alone: 5 h whichever class, so nothing to switch off.
    with pytest.raises(InfeasibleError) as err:
        solve_scenario(load_scenario(scenario(tmp_path, SLOW)))
    text = str(err.value)
    assert "takes 5.0 h" in text
    assert "fastest class on every leg" not in text
