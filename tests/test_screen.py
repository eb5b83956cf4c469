"""Screening single-allocation allocations by a bound over every hub set (hubnet/screen.py).

Reference outside hubnet's model code: tests/bruteforce.py enumerates every
single-allocation plan from the problem's definition; the AP optima are the
published values in ../shared/reference/hub_benchmarks/published_optima.csv
(Ernst and Krishnamoorthy 1996).
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from benchdata import ap_network, ap_params, euclid, reference_dir
from bruteforce import cost_terms, single_allocation_plans
from randomnet import random_network

from hubnet.config import HubModelParams, SolverParams
from hubnet.data import NetworkData
from hubnet.screen import MAX_WORK, screen_allocations, screening_work
from hubnet.solve import solve_network


def _network(seed: int, own: bool = False) -> tuple[NetworkData, np.ndarray]:
    """A random 7-site network (tests/randomnet.py) and its distances."""
    data, d, _fixed, _handling = random_network(seed, own=own)
    return data, d


def _plans(
    data: NetworkData, d: np.ndarray, params: HubModelParams
) -> tuple[np.ndarray, np.ndarray]:
    assert params.hubs is not None
    return single_allocation_plans(d, data.flow_matrix(), params.hubs, **cost_terms(data, params))


@pytest.mark.parametrize("p", [2, 3])
@pytest.mark.parametrize("own", [False, True])
def test_screen_keeps_every_allocation_of_every_plan_within_the_incumbent(
    p: int, own: bool
) -> None:
    # Reference: tests/bruteforce.py, every plan of each network priced from
    # the definition. Whatever the incumbent (the optimum, or a plan 1 % or
    # 5 % dearer), each allocation of each plan costing no more is left in,
    # and the screen's bound is at most the optimum. With own = True the
    # flow matrix has a diagonal (as AP's), priced at the hub and back.
    ruled_out = 0
    for seed in range(6):
        data, d = _network(seed + 10 * p, own=own)
        params = HubModelParams(allocation="single", hubs=p, transfer_factor=0.7)
        costs, plans = _plans(data, d, params)
        best = float(costs.min())
        for incumbent in (best, best * 1.01, best * 1.05):
            found = screen_allocations(data, d, params, incumbent)
            assert found is not None
            assert found.bound <= best * (1 + 1e-9)
            within = plans[costs <= incumbent]
            for a in within:
                assert found.allowed[np.arange(data.n), a].all(), (seed, incumbent)
            ruled_out += int((~found.allowed).sum())
    # Not vacuous: it rules allocations out (measured: 500-700 of the
    # 6 x 3 x 49 over the networks of one case).
    assert ruled_out >= 100


def test_screen_honours_forced_and_closed_hubs() -> None:
    # Reference: tests/bruteforce.py with the same forced and closed sites.
    for seed in range(4):
        data, d = _network(seed)
        sites = list(data.sites)
        sites[1] = dataclasses.replace(sites[1], hub_status="open")
        sites[4] = dataclasses.replace(sites[4], hub_status="closed")
        data = dataclasses.replace(data, sites=tuple(sites))
        params = HubModelParams(allocation="single", hubs=3, transfer_factor=0.5)
        costs, plans = _plans(data, d, params)
        best = float(costs.min())
        found = screen_allocations(data, d, params, best * 1.02)
        assert found is not None
        assert not found.allowed[:, 4].any()  # a closed site is no one's hub
        for a in plans[costs <= best * 1.02]:
            assert found.allowed[np.arange(data.n), a].all()
        # solve_network screens and still reaches the enumerated optimum.
        lines: list[str] = []
        sol = solve_network(data, d, params, SolverParams(), progress=lines.append)
        assert sol.stats.status == "optimal"
        assert sol.costs["total"] == pytest.approx(best, rel=1e-7)
        assert any("left by screening" in line for line in lines)


def test_screening_applies_only_where_it_is_exact() -> None:
    data, d = _network(0)
    single = HubModelParams(allocation="single", hubs=2)
    assert screening_work(data, single) is not None
    for params in (
        dataclasses.replace(single, allocation="multiple"),
        dataclasses.replace(single, hubs=None),
        dataclasses.replace(single, capacitated=True),
    ):
        assert screening_work(data, params) is None
        assert screen_allocations(data, d, params, 1e9) is None
    # No priced plan in hand: nothing to screen against.
    assert screen_allocations(data, d, single, float("nan")) is None


# Published: published_optima.csv, AP 25 nodes, single allocation p-hub
# median (Ernst and Krishnamoorthy 1996): objective and 1-based hubs.
AP25_SINGLE = {
    2: (175541.98, ["8", "18"]),
    3: (155256.32, ["7", "14", "18"]),
    4: (139197.17, ["2", "7", "14", "18"]),
}


@pytest.mark.parametrize("p", sorted(AP25_SINGLE))
def test_ap25_screened_relaxation_reaches_the_published_optimum(p: int) -> None:
    # Reference above; within half a unit of the last printed digit.
    reference_dir()
    data = ap_network(25)
    params = ap_params("single", p)
    assert (screening_work(data, params) or 0) <= MAX_WORK
    lines: list[str] = []
    sol = solve_network(data, euclid(data), params, SolverParams(), progress=lines.append)
    want, hubs = AP25_SINGLE[p]
    assert sol.stats.status == "optimal"
    assert abs(sol.costs["total"] - want) <= 0.005
    assert sorted(sol.hub_ids, key=int) == hubs
    assert any("left by screening" in line for line in lines), lines


@pytest.mark.parametrize("own", [False, True])
def test_screen_without_a_plan_prices_its_own(own: bool) -> None:
    # Reference: tests/bruteforce.py. With no incumbent the screen allocates
    # the sets of smallest bound and prices them: the plan it returns costs
    # what the definition says, no plan cheaper than it loses an
    # allocation, and its allocation is a local optimum under moving one
    # terminal to another hub of the set (each move priced from the
    # definition).
    for seed in range(5):
        data, d = _network(seed + 40, own=own)
        params = HubModelParams(allocation="single", hubs=3, transfer_factor=0.6)
        costs, plans = _plans(data, d, params)
        found = screen_allocations(data, d, params, None)
        assert found is not None and found.plan is not None
        hubs, assign, cost = found.plan
        row = np.flatnonzero((plans == assign).all(axis=1))
        assert len(row) == 1 and costs[row[0]] == pytest.approx(cost, rel=1e-9)
        assert sorted(set(assign.tolist())) == hubs
        for a in plans[costs <= cost]:
            assert found.allowed[np.arange(data.n), a].all()
        for i in range(data.n):
            if i in hubs:
                continue
            for k in hubs:
                moved = assign.copy()
                moved[i] = k
                r = np.flatnonzero((plans == moved).all(axis=1))
                assert costs[r[0]] >= cost * (1 - 1e-9), (seed, i, k)
