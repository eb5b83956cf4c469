"""Single allocation by hub-set search: bounds, exact allocation, optimum (hubnet/setsearch.py).

References outside hubnet's model code: tests/bruteforce.py prices every
single-allocation plan and every hub set's multiple-allocation cost from
the problem's definition; the AP optima are the published values in
../shared/reference/hub_benchmarks/published_optima.csv (Ernst and
Krishnamoorthy 1996).
"""

from __future__ import annotations

import dataclasses
import itertools

import numpy as np
import pytest
from benchdata import ap_network, ap_params, euclid, reference_dir
from bruteforce import cost_terms, multiple_allocation_cost, single_allocation_plans
from randomnet import random_network

from hubnet import hubsets
from hubnet.config import HubModelParams, SolverParams
from hubnet.data import NetworkData
from hubnet.heuristics import _Pricer, single_allocation_cost
from hubnet.hubsets import hub_sets_within
from hubnet.screen import screen_allocations, set_bound
from hubnet.setsearch import allocate_hub_set, search_hub_sets, search_work
from hubnet.solve import solve_network


def _plans(
    data: NetworkData, d: np.ndarray, params: HubModelParams
) -> tuple[np.ndarray, np.ndarray]:
    """Every single-allocation plan and its cost, from the definition."""
    assert params.hubs is not None
    return single_allocation_plans(d, data.flow_matrix(), params.hubs, **cost_terms(data, params))


def _ma_cost(
    data: NetworkData, d: np.ndarray, params: HubModelParams, hubs: tuple[int, ...]
) -> float:
    """A hub set's multiple-allocation cost, from the definition."""
    terms = cost_terms(data, params)
    del terms["candidates"], terms["forced"]
    return multiple_allocation_cost(d, data.flow_matrix(), hubs, **terms)


def _set_optima(costs: np.ndarray, plans: np.ndarray) -> dict[tuple[int, ...], float]:
    """The cheapest plan of each hub set, from every plan."""
    best: dict[tuple[int, ...], float] = {}
    for cost, a in zip(costs, plans, strict=True):
        key = tuple(sorted(set(a.tolist())))
        best[key] = min(best.get(key, np.inf), float(cost))
    return best


@pytest.mark.parametrize("p", [2, 3])
@pytest.mark.parametrize("own", [False, True])
def test_set_bounds_lie_below_every_plan_of_their_hubs(p: int, own: bool) -> None:
    # Reference: tests/bruteforce.py. For every hub set, its
    # multiple-allocation cost (priced from the definition) and the
    # screen's per-set bound are at most its cheapest single-allocation
    # plan; the per-set bound is the one the screen computes over all sets
    # (their minimum is the screen's bound).
    tighter = 0
    for seed in range(4):
        data, d, _f, _h = random_network(seed + 20 * p, own=own)
        params = HubModelParams(allocation="single", hubs=p, transfer_factor=0.7)
        optima = _set_optima(*_plans(data, d, params))
        pr = _Pricer(data, d, params)
        bounds = {}
        for hubs, optimum in optima.items():
            ma = _ma_cost(data, d, params, hubs)
            bound = set_bound(pr, list(hubs))
            assert ma <= optimum * (1 + 1e-9), (seed, hubs)
            assert bound <= optimum * (1 + 1e-9), (seed, hubs)
            tighter += bound > ma * (1 + 1e-6)
            bounds[hubs] = bound
        screened = screen_allocations(data, d, params, max(optima.values()))
        assert screened is not None
        assert min(bounds.values()) == pytest.approx(screened.bound, rel=1e-9)
    # Not vacuous: the per-set bound beats multiple allocation on most sets.
    assert tighter >= 20


@pytest.mark.parametrize("own", [False, True])
def test_hub_sets_within_are_exactly_the_sets_priced_within_the_limit(own: bool) -> None:
    # Reference: tests/bruteforce.py's multiple-allocation cost of each set.
    for seed in range(3):
        data, d, _f, _h = random_network(seed + 60, own=own)
        params = HubModelParams(allocation="single", hubs=3, transfer_factor=0.6)
        priced = {
            hubs: _ma_cost(data, d, params, hubs) for hubs in itertools.combinations(range(7), 3)
        }
        ranked = sorted(priced.values())
        # Half-way between two sets' costs, so that rounding cannot decide.
        limit = 0.5 * (ranked[len(ranked) // 2] + ranked[len(ranked) // 2 + 1])
        found = hub_sets_within(data, d, params, limit)
        assert found is not None
        got = {tuple(h): c for c, h in found}
        assert set(got) == {h for h, c in priced.items() if c <= limit}
        for hubs, cost in got.items():
            assert cost == pytest.approx(priced[hubs], rel=1e-9)
        assert [c for c, _ in found] == sorted(c for c, _ in found)


@pytest.mark.parametrize("own", [False, True])
def test_each_hub_set_is_allocated_at_its_optimum(own: bool) -> None:
    # Reference: tests/bruteforce.py, the cheapest plan of each hub set.
    # Below the cut-off the allocation is that plan (priced again from the
    # definition's cost); above it only a bound at or above the cut-off
    # comes back.
    data, d, _f, _h = random_network(71, own=own)
    params = HubModelParams(allocation="single", hubs=2, transfer_factor=0.8)
    optima = _set_optima(*_plans(data, d, params))
    for hubs, optimum in optima.items():
        found = allocate_hub_set(data, d, params, list(hubs), optimum * 1.001)
        assert found is not None
        cost, assign, _nodes = found
        assert assign is not None
        assert cost == pytest.approx(optimum, rel=1e-9)
        assert single_allocation_cost(data, d, params, assign) == pytest.approx(optimum, rel=1e-9)
        assert sorted(set(assign.tolist())) == list(hubs)
        above = allocate_hub_set(data, d, params, list(hubs), optimum * 0.999)
        assert above is not None and above[1] is None
        assert above[0] >= optimum * 0.999 * (1 - 1e-9)


@pytest.mark.parametrize("p", [2, 3])
@pytest.mark.parametrize("own", [False, True])
def test_search_reaches_the_brute_force_optimum_from_any_start(p: int, own: bool) -> None:
    # Reference: tests/bruteforce.py. Started from the dearest plan there is
    # (so that nearly every set must be looked at), from the median plan
    # and from the optimum itself, the search returns a plan at the optimum
    # and says it is proven.
    for seed in range(4):
        data, d, _f, _h = random_network(seed + 80 + 10 * p, own=own)
        params = HubModelParams(allocation="single", hubs=p, transfer_factor=0.5 + 0.1 * seed)
        costs, plans = _plans(data, d, params)
        best = float(costs.min())
        for r in (
            int(np.argmax(costs)),
            int(np.argsort(costs)[len(costs) // 2]),
            int(np.argmin(costs)),
        ):
            start = (sorted(set(plans[r].tolist())), plans[r], float(costs[r]))
            found = search_hub_sets(data, d, params, start)
            assert found is not None and found.proven
            assert found.cost == pytest.approx(best, rel=1e-9), (seed, r)
            assert single_allocation_cost(data, d, params, found.assign) == pytest.approx(
                best, rel=1e-9
            )
            assert found.hubs == sorted(set(found.assign.tolist()))


def test_search_honours_forced_and_closed_hubs() -> None:
    # Reference: tests/bruteforce.py with the same forced and closed sites.
    data, d, _f, _h = random_network(95)
    sites = list(data.sites)
    sites[2] = dataclasses.replace(sites[2], hub_status="open")
    sites[4] = dataclasses.replace(sites[4], hub_status="closed")
    data = dataclasses.replace(data, sites=tuple(sites))
    params = HubModelParams(allocation="single", hubs=3, transfer_factor=0.7)
    costs, plans = _plans(data, d, params)
    r = int(np.argmax(costs))
    found = search_hub_sets(data, d, params, (sorted(set(plans[r].tolist())), plans[r], costs[r]))
    assert found is not None and found.proven
    assert found.cost == pytest.approx(float(costs.min()), rel=1e-9)
    assert 2 in found.hubs and 4 not in found.hubs


def test_search_applies_only_where_it_is_exact() -> None:
    data, d, _f, _h = random_network(0)
    single = HubModelParams(allocation="single", hubs=2)
    assert search_work(data, single) == 21 * 49  # C(7, 2) n^2
    for params in (
        dataclasses.replace(single, allocation="multiple"),
        dataclasses.replace(single, hubs=None),
        dataclasses.replace(single, capacitated=True),
    ):
        assert search_work(data, params) is None
        assert search_hub_sets(data, d, params, ([0, 1], np.zeros(7, dtype=int), 1e9)) is None


def test_search_gives_up_on_too_many_hub_sets(monkeypatch: pytest.MonkeyPatch) -> None:
    # A weak bound keeps many sets; past MAX_KEPT the search hands back the
    # start unproven (the flow model follows), instead of allocating them all.
    import hubnet.setsearch

    data, d, _f, _h = random_network(5)
    params = HubModelParams(allocation="single", hubs=3, transfer_factor=1.0)
    costs, plans = _plans(data, d, params)
    r = int(np.argmax(costs))
    start = (sorted(set(plans[r].tolist())), plans[r], float(costs[r]))
    full = search_hub_sets(data, d, params, start)
    assert full is not None and full.proven and full.kept > 3
    monkeypatch.setattr(hubnet.setsearch, "MAX_KEPT", 3)
    found = search_hub_sets(data, d, params, start)
    assert found is not None and not found.proven
    assert found.stopped == "too many hub sets" and found.allocated == 0
    assert found.cost == pytest.approx(float(costs[r]))


def test_search_out_of_time_gives_up() -> None:
    data, d, _f, _h = random_network(3)
    params = HubModelParams(allocation="single", hubs=3)
    costs, plans = _plans(data, d, params)
    r = int(np.argmax(costs))
    start = (sorted(set(plans[r].tolist())), plans[r], float(costs[r]))
    assert search_hub_sets(data, d, params, start, time_limit_s=0.0) is None


# Published: published_optima.csv, AP 40 nodes, single allocation p-hub
# median (Ernst and Krishnamoorthy 1996): objective and 1-based hubs. At
# 40 sites the path relaxation is too large to build; the hub-set search
# proves these.
AP40_SINGLE = {
    2: (177471.67, ["12", "28"]),
    3: (158830.54, ["12", "22", "28"]),
}


@pytest.mark.parametrize("p", sorted(AP40_SINGLE))
def test_ap40_hub_set_search_reaches_the_published_optimum(p: int) -> None:
    # Reference above; within half a unit of the last printed digit.
    reference_dir()
    data = ap_network(40)
    params = ap_params("single", p)
    lines: list[str] = []
    sol = solve_network(data, euclid(data), params, SolverParams(), progress=lines.append)
    want, hubs = AP40_SINGLE[p]
    assert sol.stats.status == "optimal"
    assert abs(sol.costs["total"] - want) <= 0.005
    assert sorted(sol.hub_ids, key=int) == hubs
    assert "hub sets bounded" in sol.stats.formulation, lines


@pytest.mark.skipif(not hubsets._CAN_FORK, reason="the walk is split only where fork exists")
def test_ap40_search_split_over_two_processes_reaches_the_published_optimum(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    # Reference: AP40_SINGLE above (published). Every walk, however
    # small, split over two real processes.
    reference_dir()
    monkeypatch.setattr(hubsets, "SPLIT_MIN_S", 0.0)
    data = ap_network(40)
    lines: list[str] = []
    sol = solve_network(
        data, euclid(data), ap_params("single", 3), SolverParams(threads=2), progress=lines.append
    )
    want, hubs = AP40_SINGLE[3]
    assert abs(sol.costs["total"] - want) <= 0.005
    assert sorted(sol.hub_ids, key=int) == hubs
    assert "hub sets bounded" in sol.stats.formulation, lines
    if hubsets.usable_cores() > 1:
        assert any("split over 2 processes" in line for line in lines), lines
