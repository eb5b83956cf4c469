"""Tables and summary of a plan, on plans small enough to price by hand."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from hubnet.config import HubModelParams
from hubnet.data import Demand, NetworkData, Site
from hubnet.report import (
    COLUMNS,
    TABLES,
    all_tables,
    describe_columns,
    hierarchy_table,
    hubs_table,
    legs_table,
    rank_size_exponent,
    rank_size_table,
    routes_table,
    summary_dict,
    summary_json,
)
from hubnet.report.summary import STANDING_CAUTIONS, jsonable
from hubnet.solution import Leg, Route, Solution, SolveStats, evaluate_plan


def _stats(objective: float | None = None, **changes: object) -> SolveStats:
    base: dict[str, object] = {
        "solver": "highs",
        "status": "optimal",
        "objective": objective,
        "best_bound": objective,
        "gap": 0.0,
        "solve_seconds": 0.25,
        "build_seconds": 0.125,
        "formulation": "hand-built",
        "options": {"time_limit_s": 60.0, "gap": 1e-6},
    }
    base.update(changes)
    return SolveStats(**base)  # type: ignore[arg-type]


def _planar(sites: tuple[Site, ...], demand: tuple[Demand, ...], unit: str = "pallets"):
    data = NetworkData(sites, demand, volume_unit=unit, coordinates="planar")
    xy = np.array([[s.x, s.y] for s in sites], dtype=float)
    d = np.linalg.norm(xy[:, None, :] - xy[None, :, :], axis=2)
    return data, d


def line_plan(objective: float | None = 1279.0, **stat_changes: object) -> Solution:
    """Four sites on a line, two hubs, single allocation, priced by hand.

    Sites (x, km): A 0, H1 10, H2 30, B 40. Hubs H1 (fixed 100/day, handling
    1/unit, sort capacity 20/day) and H2 (fixed 150, handling 2, unlimited).
    A and H1 are allocated to H1; H2 and B to H2. Cost 2 per unit-km, factors
    collection 1, transfer 0.5, distribution 1. Demand (pallets/day):
    A->B 10, B->A 5, A->H1 4.

    Routes
      A->B  A>H1>H2>B, 40 km: 10*2*10 + 10*2*0.5*20 + 10*2*10 + 10*(1+2) = 630
      B->A  B>H2>H1>A, 40 km:  5*2*10 +  5*2*0.5*20 +  5*2*10 +  5*(2+1) = 315
      A->H1 A>H1, 10 km:       4*2*10 + 4*1 (sorted once at H1)            =  84
    Legs (volume, cost = volume * 2 * factor * km)
      trunk  H1>H2 10 -> 200, H2>H1 5 -> 100
      feeder A>H1 14 -> 280, H2>B 10 -> 200, B>H2 5 -> 100, H1>A 5 -> 100
    Transport 980 (collection 380, transfer 300, distribution 300), handling
    49 (H1 throughput 19, H2 throughput 15 * 2), fixed 250: total 1279.
    H1 inbound (volume it collects first) 14 of 20 -> utilisation 0.7.
    """
    sites = (
        Site("A", "Alpha", x=0.0, y=0.0),
        Site("H1", "Hub one", x=10.0, y=0.0, hub_fixed_cost=100, handling_cost=1, sort_capacity=20),
        Site("H2", "Hub two", x=30.0, y=0.0, hub_fixed_cost=150, handling_cost=2),
        Site("B", "Bravo", x=40.0, y=0.0),
    )
    demand = (Demand("A", "B", 10), Demand("B", "A", 5), Demand("A", "H1", 4))
    data, d = _planar(sites, demand)
    params = HubModelParams(transfer_factor=0.5, cost_per_unit_km=2.0)
    return evaluate_plan(
        data, d, params, [1, 2], np.array([1, 1, 2, 2]), _stats(objective, **stat_changes), "line"
    )


def random_network(seed: int) -> tuple[NetworkData, np.ndarray]:
    """Twelve random planar sites with random costs and random demand (some pairs zero)."""
    rng = np.random.default_rng(seed)
    n = 12
    sites = tuple(
        Site(
            f"S{i}",
            f"Site {i}",
            x=float(rng.uniform(0, 100)),
            y=float(rng.uniform(0, 100)),
            hub_fixed_cost=float(rng.uniform(50, 150)),
            handling_cost=float(rng.uniform(0, 2)),
        )
        for i in range(n)
    )
    demand = tuple(
        Demand(f"S{i}", f"S{j}", float(rng.integers(0, 20)))
        for i in range(n)
        for j in range(n)
        if i != j
    )
    return _planar(sites, demand)


def random_plan(seed: int, allocation: str) -> Solution:
    """Hubs S1, S5, S9 on a random network; single allocation to the nearest hub."""
    data, d = random_network(seed)
    n = data.n
    hubs = [1, 5, 9]
    assign = None
    if allocation == "single":
        assign = np.array([min(hubs, key=lambda h: d[i, h]) for i in range(n)])
    params = HubModelParams(allocation=allocation)  # type: ignore[arg-type]
    return evaluate_plan(data, d, params, hubs, assign, _stats(None), f"random-{seed}")


def star_plan(volumes: list[float]) -> Solution:
    """One hub H at the centre; terminal T{r} sends volumes[r-1] to H: one feeder leg each."""
    sites = [Site("H", "Hub", x=0.0, y=0.0)]
    sites += [Site(f"T{r}", f"T{r}", x=float(r), y=1.0) for r in range(1, len(volumes) + 1)]
    demand = tuple(Demand(f"T{r}", "H", v) for r, v in enumerate(volumes, start=1))
    data, d = _planar(tuple(sites), demand)
    assign = np.zeros(len(sites), dtype=int)
    return evaluate_plan(data, d, HubModelParams(), [0], assign, _stats(None))


# --------------------------------------------------------------------------
# The hand-priced plan
# --------------------------------------------------------------------------


def test_line_plan_costs_match_the_hand_pricing():
    sol = line_plan()
    assert sol.costs["total"] == pytest.approx(1279.0)
    assert sol.costs["handling"] == pytest.approx(49.0)
    assert sol.costs["hub_fixed"] == pytest.approx(250.0)


def test_hubs_table_hand_case():
    t = hubs_table(line_plan()).set_index("hub_id")
    assert list(t.index) == ["H1", "H2"]
    h1, h2 = t.loc["H1"], t.loc["H2"]
    assert h1["name"] == "Hub one"
    assert h1["throughput_per_day"] == pytest.approx(19.0)
    assert h1["inbound_per_day"] == pytest.approx(14.0)
    assert h1["sort_capacity_per_day"] == pytest.approx(20.0)
    assert h1["utilisation"] == pytest.approx(0.7)
    assert h1["terminal_count"] == 2
    assert h1["terminal_ids"] == "A;H1"
    assert h1["fixed_cost_per_day"] == pytest.approx(100.0)
    assert h1["handling_cost_per_day"] == pytest.approx(19.0)
    assert h2["throughput_per_day"] == pytest.approx(15.0)
    assert h2["inbound_per_day"] == pytest.approx(5.0)
    assert math.isnan(h2["sort_capacity_per_day"]) and math.isnan(h2["utilisation"])
    assert h2["terminal_ids"] == "H2;B"
    assert h2["handling_cost_per_day"] == pytest.approx(30.0)


def test_legs_table_hand_case():
    t = legs_table(line_plan())
    got = [
        (r.tier, r.from_site, r.to_site, r.distance_km, r.volume_per_day, r.cost_per_day)
        for r in t.itertuples()
    ]
    assert got == [
        ("trunk", "H1", "H2", 20.0, 10.0, 200.0),
        ("trunk", "H2", "H1", 20.0, 5.0, 100.0),
        ("feeder", "A", "H1", 10.0, 14.0, 280.0),
        ("feeder", "H2", "B", 10.0, 10.0, 200.0),
        ("feeder", "B", "H2", 10.0, 5.0, 100.0),
        ("feeder", "H1", "A", 10.0, 5.0, 100.0),
    ]
    assert t["unit_km_per_day"].tolist() == [200.0, 100.0, 140.0, 100.0, 50.0, 50.0]
    # 2 per unit-km: 2 * 0.5 * 20 km on trunks, 2 * 1 * 10 km on feeders
    assert t["cost_per_unit"].tolist() == pytest.approx([20.0] * 6)


def test_routes_table_hand_case():
    t = routes_table(line_plan()).set_index(["origin", "destination"])
    assert t.loc[("A", "B"), "path"] == "A > H1 > H2 > B"
    assert t.loc[("A", "B"), "hub_count"] == 2
    assert t.loc[("A", "B"), "distance_km"] == pytest.approx(40.0)
    assert t.loc[("A", "B"), "cost_per_day"] == pytest.approx(630.0)
    assert t.loc[("A", "B"), "cost_per_unit"] == pytest.approx(63.0)
    assert t.loc[("B", "A"), "path"] == "B > H2 > H1 > A"
    assert t.loc[("B", "A"), "cost_per_day"] == pytest.approx(315.0)
    assert t.loc[("A", "H1"), "path"] == "A > H1"
    assert t.loc[("A", "H1"), "hub_count"] == 1
    assert t.loc[("A", "H1"), "cost_per_day"] == pytest.approx(84.0)
    assert t.loc[("A", "H1"), "cost_per_unit"] == pytest.approx(21.0)


def test_hierarchy_table_hand_case():
    t = hierarchy_table(line_plan()).set_index("tier")
    assert list(t.index) == ["trunk", "feeder", "all"]
    assert t["legs"].tolist() == [2, 4, 6]
    assert t["volume_per_day"].tolist() == pytest.approx([15.0, 34.0, 49.0])
    assert t["unit_km_per_day"].tolist() == pytest.approx([300.0, 340.0, 640.0])
    assert t["cost_per_day"].tolist() == pytest.approx([300.0, 680.0, 980.0])
    assert t["share_of_volume"].tolist() == pytest.approx([15 / 49, 34 / 49, 1.0])
    assert t["share_of_unit_km"].tolist() == pytest.approx([300 / 640, 340 / 640, 1.0])
    assert t["share_of_cost"].tolist() == pytest.approx([300 / 980, 680 / 980, 1.0])
    assert t["avg_distance_km"].tolist() == pytest.approx([20.0, 10.0, 80 / 6])
    assert t["avg_volume_per_leg"].tolist() == pytest.approx([7.5, 8.5, 49 / 6])


def test_rank_size_table_hand_case():
    t = rank_size_table(line_plan())
    assert t["rank"].tolist() == [1, 2, 3, 4, 5, 6]
    assert t["volume_per_day"].tolist() == [14.0, 10.0, 10.0, 5.0, 5.0, 5.0]
    # equal volumes: trunk before feeder, then by site ids
    assert list(zip(t["tier"], t["from_site"], t["to_site"], strict=True))[1:3] == [
        ("trunk", "H1", "H2"),
        ("feeder", "H2", "B"),
    ]
    assert t["share_of_volume"].tolist() == pytest.approx(
        [14 / 49, 10 / 49, 10 / 49] + [5 / 49] * 3
    )
    assert t["cumulative_share"].tolist() == pytest.approx(
        [14 / 49, 24 / 49, 34 / 49, 39 / 49, 44 / 49, 1.0]
    )


def test_tables_follow_the_documented_columns():
    tables = all_tables(line_plan())
    assert set(tables) == set(COLUMNS) == set(TABLES)
    for name, table in tables.items():
        assert list(table.columns) == list(COLUMNS[name]), name


def test_empty_plan_gives_empty_tables_with_columns():
    sol = Solution(
        scenario="empty",
        stats=_stats(0.0),
        hubs=(),
        routes=(),
        legs=(),
        costs={"total": 0.0},
        volume_unit="units",
        allocation="single",
    )
    for name, table in all_tables(sol).items():
        assert list(table.columns) == list(COLUMNS[name])
    assert len(legs_table(sol)) == 0
    h = hierarchy_table(sol).set_index("tier")
    assert h.loc["all", "legs"] == 0
    assert math.isnan(h.loc["all", "share_of_volume"])
    assert rank_size_exponent(sol) is None
    json.loads(summary_json(summary_dict(sol)))


# --------------------------------------------------------------------------
# Consistency on larger random plans
# --------------------------------------------------------------------------


@pytest.mark.parametrize("allocation", ["single", "multiple"])
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_tables_add_up_to_the_plan_costs(seed, allocation):
    sol = random_plan(seed, allocation)
    legs = legs_table(sol)
    routes = routes_table(sol)
    hubs = hubs_table(sol)
    h = hierarchy_table(sol).set_index("tier")
    tiers = h.drop(index="all")
    transport = sol.costs["collection"] + sol.costs["transfer"] + sol.costs["distribution"]
    for column in ("share_of_volume", "share_of_unit_km", "share_of_cost"):
        assert tiers[column].sum() == pytest.approx(1.0)
    for column in ("legs", "volume_per_day", "unit_km_per_day", "cost_per_day"):
        assert tiers[column].sum() == pytest.approx(h.loc["all", column])
    assert legs["cost_per_day"].sum() == pytest.approx(transport)
    assert h.loc["all", "cost_per_day"] == pytest.approx(transport)
    assert h.loc["trunk", "cost_per_day"] == pytest.approx(sol.costs["transfer"])
    assert h.loc["all", "legs"] == len(sol.legs)
    assert routes["cost_per_day"].sum() + sol.costs["hub_fixed"] == pytest.approx(
        sol.costs["total"]
    )
    assert routes["volume_per_day"].sum() == pytest.approx(
        random_network(seed)[0].flow_matrix().sum()
    )
    assert hubs["handling_cost_per_day"].sum() == pytest.approx(sol.costs["handling"])
    assert hubs["fixed_cost_per_day"].sum() == pytest.approx(sol.costs["hub_fixed"])
    # every route's path starts and ends at its OD pair and sorts at 1 or 2 hubs
    for r in routes.itertuples():
        stops = r.path.split(" > ")
        assert stops[0] == r.origin and stops[-1] == r.destination
        assert r.hub_count in (1, 2)
    rank = rank_size_table(sol)
    assert rank["volume_per_day"].is_monotonic_decreasing
    assert rank["cumulative_share"].iloc[-1] == pytest.approx(1.0)


def test_direct_tier_listed_only_when_the_plan_has_direct_legs():
    sol = line_plan()
    assert "direct" not in set(hierarchy_table(sol)["tier"])
    direct = Leg("direct", "A", "B", 40.0, 2.0, 80.0)
    with_direct = Solution(
        scenario="d",
        stats=sol.stats,
        hubs=sol.hubs,
        routes=(*sol.routes, Route("A", "B", 2.0, ("A", "B"), 40.0, 80.0)),
        legs=(*sol.legs, direct),
        costs=sol.costs,
        volume_unit=sol.volume_unit,
        allocation=sol.allocation,
    )
    h = hierarchy_table(with_direct).set_index("tier")
    assert list(h.index) == ["trunk", "feeder", "direct", "all"]
    assert h.loc["direct", "legs"] == 1
    assert h.loc["direct", "share_of_cost"] == pytest.approx(80 / 1060)
    assert legs_table(with_direct)["tier"].iloc[-1] == "direct"
    r = routes_table(with_direct)
    assert (r["hub_count"] == 0).sum() == 1


def test_one_hub_plan_still_lists_an_empty_trunk_tier():
    sol = star_plan([5.0, 3.0, 2.0])
    h = hierarchy_table(sol).set_index("tier")
    assert h.loc["trunk", "legs"] == 0
    assert h.loc["trunk", "share_of_volume"] == 0.0
    assert math.isnan(h.loc["trunk", "avg_distance_km"])
    assert h.loc["feeder", "share_of_volume"] == 1.0


# --------------------------------------------------------------------------
# Rank-size exponent
# --------------------------------------------------------------------------


@pytest.mark.parametrize("exponent", [0.5, 1.0, 1.5, 2.25])
def test_rank_size_exponent_recovers_an_exact_power_law(exponent):
    volumes = [1000.0 * r**-exponent for r in range(1, 9)]
    rng = np.random.default_rng(7)
    sol = star_plan([volumes[i] for i in rng.permutation(len(volumes))])  # order must not matter
    assert rank_size_exponent(sol) == pytest.approx(exponent, rel=1e-9)


def test_rank_size_exponent_is_zero_for_equal_volumes_and_none_below_three_legs():
    assert rank_size_exponent(star_plan([4.0, 4.0, 4.0, 4.0])) == pytest.approx(0.0, abs=1e-12)
    assert rank_size_exponent(star_plan([4.0, 2.0])) is None
    # a leg without volume does not count
    assert rank_size_exponent(star_plan([4.0, 2.0, 0.0])) is None


def test_rank_size_exponent_differs_from_a_noisy_law_but_stays_close():
    rng = np.random.default_rng(3)
    volumes = [500.0 * r**-1.2 * float(np.exp(rng.normal(0, 0.05))) for r in range(1, 40)]
    b = rank_size_exponent(star_plan(volumes))
    assert b is not None and 1.0 < b < 1.4


# --------------------------------------------------------------------------
# Column documentation
# --------------------------------------------------------------------------


def test_describe_columns_is_markdown_naming_every_column_and_the_unit():
    text = describe_columns("pallets")
    for table, columns in COLUMNS.items():
        assert f"### {table}.csv" in text
        for column in columns:
            assert f"| `{column}` |" in text
    assert "pallets per day" in text
    assert "{unit}" not in text
    rows = [line for line in text.splitlines() if line.startswith("| `")]
    assert len(rows) == sum(len(c) for c in COLUMNS.values())
    assert all(line.count(" | ") == 1 for line in rows)  # pipes in the text are escaped


def test_readme_documents_every_column_of_every_run_file():
    # The README's column tables are describe_columns' own text (classic and
    # freight runs) plus sites.csv: a column added in code but not in the
    # README fails here. Regenerate with describe_columns(freight=True).
    from pathlib import Path

    from hubnet.report.workbook import SITES_COLUMNS

    readme = (Path(__file__).resolve().parent.parent / "README.md").read_text(encoding="utf-8")
    assert describe_columns(freight=True).strip() in readme
    for column, doc in SITES_COLUMNS.items():
        assert f"| `{column}` | {doc} |" in readme


def test_every_money_and_volume_column_states_its_unit():
    for table, columns in COLUMNS.items():
        for column, doc in columns.items():
            if column.startswith("cost") or column.endswith("_cost_per_day"):
                assert "currency" in doc, (table, column)
            if column.startswith("volume") or column.endswith("_per_day"):
                assert "per day" in doc, (table, column)
            if column.endswith("_km"):
                assert "km" in doc, (table, column)


# --------------------------------------------------------------------------
# Summary
# --------------------------------------------------------------------------


def _strict_json(text: str) -> object:
    def refuse(name: str) -> object:
        raise AssertionError(f"{name} in JSON")

    return json.loads(text, parse_constant=refuse)


def test_summary_hand_case():
    s = summary_dict(line_plan())
    assert s["scenario"] == "line"
    assert s["status"] == "optimal" and s["proven_optimal"] is True
    assert s["objective"] == 1279.0 and s["best_bound"] == 1279.0 and s["gap"] == 0.0
    assert s["hubs"] == ["H1", "H2"]
    assert s["solver"] == "highs" and s["formulation"] == "hand-built"
    assert s["solve_seconds"] == 0.25 and s["build_seconds"] == 0.125
    assert s["start_seconds"] == 0.0  # no starting-plan search in a hand-built plan
    assert s["solver_options"] == {"time_limit_s": 60.0, "gap": 1e-6}
    assert s["costs"] == {
        "hub_fixed": 250.0,
        "handling": 49.0,
        "collection": 380.0,
        "transfer": 300.0,
        "distribution": 300.0,
        "total": 1279.0,
    }
    assert s["volume_unit"] == "pallets"
    assert s["total_volume"] == 19.0
    assert s["od_pairs"] == 3
    assert s["legs_by_tier"] == {"trunk": 2, "feeder": 4, "direct": 0}
    assert s["unit_km"] == 640.0
    assert s["objective_check"] == 0.0
    assert isinstance(s["hubnet_version"], str) and s["hubnet_version"]
    assert s["cautions"] == list(STANDING_CAUTIONS)
    assert any("decision aid" in c for c in s["cautions"])
    assert any("regulations" in c and "confirm" in c.lower() for c in s["cautions"])
    assert _strict_json(summary_json(s)) == s


def test_summary_never_writes_nan_or_infinity():
    sol = line_plan(
        objective=math.inf,
        status="time_limit",
        best_bound=math.nan,
        gap=math.nan,
        options={"weird": math.nan, "arr": np.array([1.0, np.inf]), "n": np.int64(3)},
    )
    s = summary_dict(sol)
    assert s["objective"] is None and s["best_bound"] is None and s["gap"] is None
    assert s["objective_check"] is None
    assert s["solver_options"] == {"weird": None, "arr": [1.0, None], "n": 3}
    assert _strict_json(summary_json(s)) == s


def test_summary_time_limit_is_not_called_optimal_and_says_so():
    s = summary_dict(line_plan(status="time_limit", best_bound=1200.0, gap=0.0617669))
    assert s["status"] == "time_limit" and s["proven_optimal"] is False
    assert s["gap"] == 0.0617669
    assert any("time limit" in c and "6.18 %" in c for c in s["cautions"])


def test_summary_flags_a_cost_mismatch():
    s = summary_dict(line_plan(objective=1200.0))
    assert s["objective_check"] == pytest.approx(79.0)
    assert any("differs from the solver's objective" in c for c in s["cautions"])
    s = summary_dict(line_plan(objective=1279.0 + 1e-9))
    assert not any("differs" in c for c in s["cautions"])


def test_summary_flags_hub_over_capacity():
    sol = line_plan()
    h1 = sol.hubs[0]
    over = Solution(
        scenario=sol.scenario,
        stats=sol.stats,
        hubs=(type(h1)(h1.id, h1.throughput, 25.0, 20.0, h1.terminals, 100.0, 19.0), sol.hubs[1]),
        routes=sol.routes,
        legs=sol.legs,
        costs=sol.costs,
        volume_unit=sol.volume_unit,
        allocation=sol.allocation,
    )
    cautions = summary_dict(over)["cautions"]
    assert any("Hub H1" in c and "above its sort capacity" in c for c in cautions)


def test_summary_rounds_money_to_sub_cent_and_keeps_tiny_gaps():
    sol = line_plan(objective=1279.123456789, best_bound=1279.0, gap=1.234567891e-7)
    s = summary_dict(sol)
    assert s["objective"] == 1279.1235
    assert s["gap"] == 1.23457e-7
    assert s["objective_check"] == pytest.approx(-0.1235)


def test_summary_with_config_and_extra(tmp_path):
    from hubnet.config import parse_config

    cfg = parse_config(
        {
            "scenario": {"name": "from-config", "description": "a test"},
            "inputs": {"sites": "s.csv", "demand": "d.csv", "volume_unit": "pallets"},
            "model": {"hubs": 2, "transfer_factor": 0.5},
        },
        base_dir=tmp_path,
    )
    s = summary_dict(line_plan(), cfg, extra={"run_id": 42, "started": tmp_path})
    assert s["scenario"] == "line"  # the plan's own name wins
    assert s["description"] == "a test"
    assert s["model"]["hubs"] == 2 and s["model"]["transfer_factor"] == 0.5
    assert s["inputs"]["sites"] == str(tmp_path / "s.csv")
    assert s["run_id"] == 42 and s["started"] == str(tmp_path)
    _strict_json(summary_json(s))
    with pytest.raises(ValueError, match="status"):
        summary_dict(line_plan(), extra={"status": "fine"})


def test_jsonable_handles_nested_values():
    value = {1: (np.float32(1.5), {"x": float("-inf")}), "s": {3, 1}}
    assert jsonable(value) == {"1": [1.5, {"x": None}], "s": [1, 3]}


@pytest.mark.parametrize("allocation", ["single", "multiple"])
def test_summary_is_valid_json_for_random_plans(allocation):
    sol = random_plan(4, allocation)
    s = summary_dict(sol)
    assert _strict_json(summary_json(s)) == s
    assert s["objective"] is None and s["objective_check"] is None
    assert sum(s["legs_by_tier"].values()) == len(legs_table(sol))
    assert s["total_volume"] == pytest.approx(random_network(4)[0].flow_matrix().sum())
    assert s["costs"]["total"] == pytest.approx(sol.costs["total"], abs=1e-4)
