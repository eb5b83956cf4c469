"""Multiple allocation with p hubs by pricing every hub set (hubnet.hubsets).

References outside hubnet's model code: tests/bruteforce.py (every hub set
tried, written from the problem definition), the published AP optima
(Ernst and Krishnamoorthy 1998, ../shared/reference/hub_benchmarks) and
the MILP solved by HiGHS and CBC.
"""

from __future__ import annotations

import dataclasses
import itertools
import os
from pathlib import Path

import numpy as np
import pytest
from benchdata import ap_network, ap_params, euclid
from bruteforce import brute_force, cost_terms, multiple_allocation_cost
from randomnet import random_network
from test_model import _multiple_and_enumerated, _random_network

from hubnet import hubsets
from hubnet.config import HubModelParams, SolverParams
from hubnet.data import Demand, NetworkData, Site
from hubnet.heuristics import _MultipleMoves, _Pricer
from hubnet.hubsets import (
    MAX_WORK,
    _leaves,
    _NearestHubBound,
    cheapest_hub_set,
    enumeration_work,
    hub_choices,
)
from hubnet.solve import solve_network


def _forcing(data, k):  # type: ignore[no-untyped-def]
    """``data`` with site k forced open as a hub."""
    sites = tuple(
        dataclasses.replace(s, hub_status="open") if i == k else s for i, s in enumerate(data.sites)
    )
    return dataclasses.replace(data, sites=sites)


@pytest.mark.parametrize("seed", range(10))
@pytest.mark.parametrize("p", [2, 3, 4])
def test_every_hub_set_priced_matches_brute_force(seed: int, p: int) -> None:
    # Random planar networks with hub fixed costs, handling costs and one
    # closed site; tests/bruteforce.py is the reference.
    data, xy, extra = _random_network(seed, n=8)
    d = np.sqrt(((xy[:, None] - xy[None]) ** 2).sum(-1))
    params, want = _multiple_and_enumerated(data, d, p)
    found = cheapest_hub_set(data, d, params)
    assert found is not None
    assert found.cost == pytest.approx(want, rel=1e-9)
    assert len(found.hubs) == p
    assert all(data.sites[h].is_candidate for h in found.hubs)
    sol = solve_network(data, d, params, SolverParams())
    assert sol.stats.solver == "enumeration"
    assert sol.stats.status == "optimal"
    assert sol.costs["total"] == pytest.approx(want, rel=1e-9)


@pytest.mark.parametrize("seed", range(6))
def test_forced_open_hubs_are_in_the_set(seed: int) -> None:
    data, xy, extra = _random_network(seed, n=8)
    cand: list[int] = extra["candidates"]  # type: ignore[assignment]
    d = np.sqrt(((xy[:, None] - xy[None]) ** 2).sum(-1))
    k = cand[seed % len(cand)]
    forced = _forcing(data, k)
    params, _ = _multiple_and_enumerated(forced, d, 3)
    want, _hubs = brute_force(
        d,
        data.flow_matrix(),
        allocation="multiple",
        p=3,
        rate=0.5,
        alpha=0.6,
        delta=1.2,
        fixed=np.array([s.hub_fixed_cost for s in data.sites]),
        handling=np.array([s.handling_cost for s in data.sites]),
        candidates=cand,
        forced=[k],
    )
    found = cheapest_hub_set(forced, d, params)
    assert found is not None
    assert k in found.hubs
    assert found.cost == pytest.approx(want, rel=1e-9)
    # The same answer from Benders on HiGHS (a named solver: no enumeration).
    milp = solve_network(forced, d, params, SolverParams(name="highs"))
    assert milp.stats.solver == "highs"
    assert milp.costs["total"] == pytest.approx(want, rel=1e-7)


def test_ap25_p5_matches_the_published_optimum_and_cbc() -> None:
    # Published optimum, AP n = 25, p = 5, multiple allocation: 120581.99,
    # hubs 2 8 17 18 20 (1-based; Ernst and Krishnamoorthy 1998, via
    # published_optima.csv). CBC (the Benders master on CBC) is the second
    # opinion.
    data = ap_network(25)
    d = euclid(data)
    params = ap_params("multiple", 5)
    sol = solve_network(data, d, params, SolverParams())
    assert sol.stats.solver == "enumeration"
    assert abs(sol.costs["total"] - 120581.99) <= 0.005
    assert sorted(int(h) for h in sol.hub_ids) == [2, 8, 17, 18, 20]
    cbc = solve_network(data, d, params, SolverParams(name="cbc"))
    assert cbc.stats.solver == "cbc"
    assert cbc.costs["total"] == pytest.approx(sol.costs["total"], rel=1e-7)


def test_enumeration_applies_only_where_it_is_exact() -> None:
    data = ap_network(10)
    assert enumeration_work(data, ap_params("multiple", 3)) == 120 * 100  # C(10, 3) n^2
    assert enumeration_work(data, ap_params("single", 3)) is None
    assert enumeration_work(data, ap_params("multiple", None)) is None  # free hub count
    capacitated = dataclasses.replace(ap_params("multiple", 3), capacitated=True)
    assert enumeration_work(data, capacitated) is None


def test_out_of_time_gives_way_to_the_model() -> None:
    data = ap_network(25)
    params = ap_params("multiple", 5)
    assert cheapest_hub_set(data, euclid(data), params, time_limit_s=0.0) is None


def test_too_many_sets_go_to_the_model() -> None:
    # AP n = 100, p = 5: C(100, 5) 10,000 pairs is 7.5e11, far above the
    # work allowed, so the run goes to the MILP route (Benders).
    data = ap_network(100)
    params = ap_params("multiple", 5)
    work = enumeration_work(data, params)
    assert work is not None and work > 10 * MAX_WORK
    lines: list[str] = []
    sol = solve_network(
        data, euclid(data), params, SolverParams(time_limit_s=2.0), progress=lines.append
    )
    assert sol.stats.solver != "enumeration"
    assert not any("pricing every set" in line for line in lines)


def test_a_short_time_limit_leaves_the_time_to_the_model() -> None:
    # AP n = 50, p = 5 (5.3e9 set-pairs, about 5 s at the rate assumed)
    # with a 2 s limit: enumeration would likely not finish in half of it,
    # so the run goes to the model at once and keeps within its limit with
    # a plan no cheaper than the published optimum (129412.60, Ernst and
    # Krishnamoorthy 1998).
    data = ap_network(50)
    lines: list[str] = []
    sol = solve_network(
        data,
        euclid(data),
        ap_params("multiple", 5),
        SolverParams(time_limit_s=2.0),
        progress=lines.append,
    )
    assert sol.stats.solver != "enumeration"
    assert not any("pricing every set" in line for line in lines)
    assert sol.costs["total"] >= 129412.60 - 0.005


def _ma_brute(data, d, params, hubs):  # type: ignore[no-untyped-def]
    """A hub set's multiple-allocation cost from tests/bruteforce.py (the definition)."""
    terms = cost_terms(data, params)
    del terms["candidates"], terms["forced"]
    return multiple_allocation_cost(d, data.flow_matrix(), hubs, **terms)


def _bound_values(bound: _NearestHubBound, hubs: tuple[int, ...]) -> np.ndarray:
    """Each of the bound's sums for one hub set, currency per day."""
    rows = bound.matrix[:, list(hubs)].min(axis=1)
    values, _saved = bound.savings(rows, bound.matrix[:, :0])
    return values


@pytest.mark.parametrize("own", [False, True])
@pytest.mark.parametrize("alpha", [0.2, 0.75, 1.0])
def test_nearest_hub_bounds_lie_below_every_hub_sets_cost(own: bool, alpha: float) -> None:
    # Reference: tests/bruteforce.py, every route of every OD pair tried.
    # Both bounds (nearest hub; triangle inequality) must lie at or below
    # each hub set's multiple-allocation cost, with handling costs and
    # zero flows in the data.
    closest = 0.0
    for seed in range(3):
        data, d, _f, _h = random_network(seed + 80, own=own)
        params = HubModelParams(
            allocation="multiple", hubs=2, collection_factor=1.5, transfer_factor=alpha
        )
        pr = _Pricer(data, d, params)
        bound = _NearestHubBound(_MultipleMoves(pr), d, params, pr.handling, list(range(data.n)))
        assert len(bound.const) == 2  # planar distances: both bounds apply
        for size in (1, 2, 3):
            for hubs in itertools.combinations(range(data.n), size):
                routing = _ma_brute(data, d, params, hubs) - pr.fixed[list(hubs)].sum()
                values = _bound_values(bound, hubs)
                assert (values <= routing * (1 + 1e-9)).all(), (seed, hubs, values, routing)
                closest = max(closest, float(values.max() / routing))
    # Not vacuous: some set's bound comes within 10 % of its cost.
    assert closest > 0.9


def test_nearest_hub_bounds_hold_on_one_way_distances_and_any_rate() -> None:
    # Reference: tests/bruteforce.py. One-way (asymmetric) distances that
    # obey the triangle inequality (shortest paths over random one-way
    # legs) and a cost per unit-km other than 1: both bounds still lie at
    # or below every set's multiple-allocation cost, and the collection
    # and distribution directions are not swapped.
    rng = np.random.default_rng(7)
    data, _d, _f, _h = random_network(86)
    n = data.n
    d = rng.uniform(10, 100, size=(n, n))
    np.fill_diagonal(d, 0.0)
    for m in range(n):  # shortest paths: the triangle inequality holds
        d = np.minimum(d, d[:, m][:, None] + d[m, :][None, :])
    assert not np.allclose(d, d.T)
    params = HubModelParams(
        allocation="multiple",
        hubs=2,
        collection_factor=2.0,
        transfer_factor=0.5,
        distribution_factor=1.2,
        cost_per_unit_km=0.37,
    )
    pr = _Pricer(data, d, params)
    bound = _NearestHubBound(_MultipleMoves(pr), d, params, pr.handling, list(range(n)))
    assert len(bound.const) == 2
    terms = cost_terms(data, params)
    del terms["candidates"], terms["forced"]
    closest = 0.0
    for size in (1, 2, 3):
        for hubs in itertools.combinations(range(n), size):
            cost = multiple_allocation_cost(d, data.flow_matrix(), hubs, rate=0.37, **terms)
            routing = cost - pr.fixed[list(hubs)].sum()
            values = _bound_values(bound, hubs)
            assert (values <= routing * (1 + 1e-9)).all(), (hubs, values, routing)
            closest = max(closest, float(values.max() / routing))
    assert closest > 0.8


def test_the_triangle_bound_is_left_out_where_distances_break_it() -> None:
    # A user's matrix with a detour shorter than the direct leg: only the
    # nearest-hub bound applies, and it still lies below every set's cost
    # (tests/bruteforce.py).
    data, d, _f, _h = random_network(85)
    d = d.copy()
    d[0, 1] = d[1, 0] = d[0, 2] + d[2, 1] + 50.0
    params = HubModelParams(allocation="multiple", hubs=2, transfer_factor=0.5)
    pr = _Pricer(data, d, params)
    bound = _NearestHubBound(_MultipleMoves(pr), d, params, pr.handling, list(range(data.n)))
    assert len(bound.const) == 1
    for hubs in itertools.combinations(range(data.n), 2):
        routing = _ma_brute(data, d, params, hubs) - pr.fixed[list(hubs)].sum()
        assert _bound_values(bound, hubs)[0] <= routing * (1 + 1e-9)


@pytest.mark.parametrize("forced", [None, 4])
@pytest.mark.parametrize("p", [2, 3])
@pytest.mark.parametrize("share", [0.05, 0.3, 0.7])
def test_pruned_walk_yields_every_set_within_the_limit_and_prunes(
    share: float, p: int, forced: int | None
) -> None:
    # Reference: tests/bruteforce.py's cost of every set of p hubs of 10
    # (with site 4 forced open: every such set holding it). With the
    # bound, the walk must still yield every set whose cost is within the
    # limit (at its brute-force cost), and price fewer sets than the walk
    # without it.
    data, d, _f, _h = random_network(90 + p, n=10)
    if forced is not None:
        data = _forcing(data, forced)
    params = HubModelParams(allocation="multiple", hubs=p, transfer_factor=0.6)
    priced = {
        h: _ma_brute(data, d, params, h)
        for h in itertools.combinations(range(10), p)
        if forced is None or forced in h
    }
    ranked = sorted(priced.values())
    k = int(share * len(ranked))
    limit = 0.5 * (ranked[k] + ranked[k + 1])
    pr = _Pricer(data, d, params)
    moves = _MultipleMoves(pr)
    bound = _NearestHubBound(moves, d, params, pr.handling, list(range(data.n)))
    found = hub_choices(data, params)
    assert found is not None
    got: dict[tuple[int, ...], float] = {}
    for costs, chosen, xs in _leaves(moves, found, None, bound, lambda: limit):
        for cost, x in zip(costs, xs, strict=True):
            got[tuple(sorted([*chosen, x]))] = float(cost)
    within = {h for h, c in priced.items() if c <= limit}
    assert within <= set(got)
    for hubs, cost in got.items():
        assert cost == pytest.approx(priced[hubs], rel=1e-9)
    assert len(got) < len(priced)


@pytest.mark.parametrize("forced", [None, 4])
@pytest.mark.parametrize("p", [0, 1, 2, 3])
@pytest.mark.parametrize("parts", [2, 3])
@pytest.mark.parametrize("share", [None, 0.3])
def test_the_walks_parts_are_disjoint_and_hold_every_set(
    share: float | None, parts: int, p: int, forced: int | None
) -> None:
    # Reference: tests/bruteforce.py's cost of every set of p hubs of 10.
    # Walked in parts, every set within the limit (every set, with no
    # bound) must come out of exactly one part, at its brute-force cost.
    if p == 0 and forced is None:
        pytest.skip("no hub to choose and none forced")
    data, d, _f, _h = random_network(70 + p, n=10)
    if forced is not None:
        data = _forcing(data, forced)
    params = HubModelParams(
        allocation="multiple", hubs=p + (forced is not None), transfer_factor=0.6
    )
    found = hub_choices(data, params)
    assert found is not None
    priced = {
        h: _ma_brute(data, d, params, h)
        for h in itertools.combinations(range(10), params.hubs)
        if forced is None or forced in h
    }
    limit = np.inf
    bound = None
    pr = _Pricer(data, d, params)
    moves = _MultipleMoves(pr)
    if share is not None and len(priced) > 1:
        ranked = sorted(priced.values())
        k = int(share * len(ranked))
        limit = 0.5 * (ranked[k] + ranked[k + 1])
        bound = _NearestHubBound(moves, d, params, pr.handling, list(range(data.n)))
    seen: list[tuple[int, ...]] = []
    for r in range(parts):
        for costs, chosen, xs in _leaves(moves, found, None, bound, lambda: limit, (r, parts)):
            for cost, x in zip(costs, xs, strict=True):
                hubs = tuple(sorted([*chosen, x]))
                seen.append(hubs)
                assert cost == pytest.approx(priced[hubs], rel=1e-9)
    assert len(seen) == len(set(seen))  # no set in two parts
    assert {h for h, c in priced.items() if c <= limit} <= set(seen)


@pytest.fixture
def split_small_walks(monkeypatch: pytest.MonkeyPatch) -> None:
    """Split even the smallest walk over processes (normally only those of 2 s or more)."""
    monkeypatch.setattr(hubsets, "SPLIT_MIN_S", 0.0)


@pytest.mark.skipif(not hubsets._CAN_FORK, reason="the walk is split only where fork exists")
@pytest.mark.parametrize("seed", range(4))
@pytest.mark.usefixtures("split_small_walks")
def test_walks_split_over_processes_match_brute_force(seed: int) -> None:
    # Two real processes (this one and a forked child) share the walk;
    # tests/bruteforce.py prices every set.
    data, xy, _extra = _random_network(seed, n=9)
    d = np.sqrt(((xy[:, None] - xy[None]) ** 2).sum(-1))
    params, want = _multiple_and_enumerated(data, d, 3)
    assert hubsets.split_workers(2, enumeration_work(data, params) or 0) == min(
        2, hubsets.usable_cores()
    )
    found = cheapest_hub_set(data, d, params, workers=2)
    assert found is not None
    assert found.cost == pytest.approx(want, rel=1e-9)
    assert found == dataclasses.replace(
        cheapest_hub_set(data, d, params), seconds=found.seconds
    )  # the same set, ties broken alike
    limit = want * 1.2
    split = hubsets.hub_sets_within(data, d, params, limit, workers=2)
    whole = hubsets.hub_sets_within(data, d, params, limit)
    assert split is not None and whole is not None
    assert [h for _c, h in split] == [h for _c, h in whole]
    assert [c for c, _h in split] == pytest.approx([c for c, _h in whole], rel=1e-12)


@pytest.mark.skipif(not hubsets._CAN_FORK, reason="the walk is split only where fork exists")
@pytest.mark.usefixtures("split_small_walks")
def test_a_split_walk_out_of_time_gives_no_answer() -> None:
    data = ap_network(25)
    params = ap_params("multiple", 5)
    assert cheapest_hub_set(data, euclid(data), params, time_limit_s=0.0, workers=2) is None
    assert (
        hubsets.hub_sets_within(data, euclid(data), params, 1e12, time_limit_s=0.0, workers=2)
        is None
    )


def test_walks_stay_in_one_process_when_small_or_not_allowed(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    big = int(10 * hubsets.SPLIT_MIN_S * hubsets.WORK_PER_S)
    assert hubsets.split_workers(2, 1000) == 1  # not worth a process
    assert hubsets.split_workers(1, big) == 1  # one asked for
    assert hubsets.split_workers(64, big) <= hubsets.usable_cores()

    class _Daemon:
        daemon = True

    # A daemon process (a Dask worker, say) may not start children.
    monkeypatch.setattr(hubsets.multiprocessing, "current_process", lambda: _Daemon())
    assert hubsets.split_workers(2, big) == 1


def _circle(n: int) -> tuple[NetworkData, np.ndarray]:
    """n sites evenly spaced on a circle, the same flow between every pair: many tied hub sets."""
    ang = 2 * np.pi * np.arange(n) / n
    xy = np.c_[50 + 40 * np.cos(ang), 50 + 40 * np.sin(ang)]
    sites = tuple(
        Site(id=f"S{i}", name=f"s{i}", x=float(xy[i, 0]), y=float(xy[i, 1]), hub_fixed_cost=100.0)
        for i in range(n)
    )
    demand = tuple(Demand(f"S{i}", f"S{j}", 7.0) for i in range(n) for j in range(n) if i != j)
    return NetworkData(sites, demand, coordinates="planar"), np.sqrt(
        ((xy[:, None] - xy[None]) ** 2).sum(-1)
    )


@pytest.mark.parametrize(("n", "p"), [(8, 2), (12, 3), (12, 4)])
def test_tied_hub_sets_are_broken_alike_however_the_walk_is_split(n: int, p: int) -> None:
    # Every rotation of a hub set on the circle costs the same (up to the
    # rounding of the batch it is priced in); tests/bruteforce.py gives the
    # cost. Split into 1, 2 or 3 parts, with the shared limit unknown or
    # already at the optimum, the same smallest hub list must win.
    data, d = _circle(n)
    params = HubModelParams(allocation="multiple", hubs=p, transfer_factor=0.6)
    want = min(_ma_brute(data, d, params, h) for h in itertools.combinations(range(n), p))
    chosen = set()
    for parts in (1, 2, 3):
        for start in (np.inf, want * (1 + 1e-12)):
            job = hubsets._Job("cheapest", data, d, params, start, None)
            pairs = [pair for r in range(parts) for pair in hubsets._walk_part(job, (r, parts))]
            low = min(c for c, _h in pairs)
            assert low == pytest.approx(want, rel=1e-12)
            chosen.add(tuple(min(h for c, h in pairs if hubsets._tied(c, low))))
    assert len(chosen) == 1


@pytest.mark.skipif(
    not hubsets._CAN_FORK or hubsets.usable_cores() < 2,
    reason="the walk is split only where fork exists, over two cores or more",
)
@pytest.mark.usefixtures("split_small_walks")
def test_a_failing_part_is_an_error_not_a_timeout(monkeypatch: pytest.MonkeyPatch) -> None:
    # A part that fails in its child process must not pass for "out of
    # time" (which would hide the failure behind a fallback to the model).
    walk = hubsets._walk_part

    def broken(job, part, shared=None):  # type: ignore[no-untyped-def]
        if part[0] != 0:
            raise ValueError("broken part")
        return walk(job, part, shared)

    monkeypatch.setattr(hubsets, "_walk_part", broken)
    data = ap_network(10)
    with pytest.raises(RuntimeError, match="broken part"):
        cheapest_hub_set(data, euclid(data), ap_params("multiple", 3), workers=2)


@pytest.mark.parametrize(
    ("files", "expected"),
    [
        # cgroup v2 cpu.max, "$MAX $PERIOD" in microseconds, "max" for no
        # limit; newer kernels add "$BURST" (Linux kernel documentation,
        # admin-guide/cgroup-v2.rst).
        ({"cpu.max": "200000 100000\n"}, 2),
        ({"cpu.max": "150000 100000\n"}, 2),  # 1.5 CPUs' time: two processes
        ({"cpu.max": "50000 100000 0\n"}, 1),
        ({"cpu.max": "max 100000\n"}, None),
        ({"cpu.max": "garbage\n"}, None),
        # cgroup v1: cpu.cfs_quota_us over cpu.cfs_period_us, -1 for no
        # limit (scheduler/sched-bwc.rst).
        ({"cpu/cpu.cfs_quota_us": "400000\n", "cpu/cpu.cfs_period_us": "100000\n"}, 4),
        ({"cpu/cpu.cfs_quota_us": "-1\n", "cpu/cpu.cfs_period_us": "100000\n"}, None),
        ({}, None),  # no cgroup files (another system): no quota known
    ],
)
def test_cpu_quota_read_from_the_cgroup_files(
    tmp_path: Path, files: dict[str, str], expected: int | None
) -> None:
    for name, text in files.items():
        (tmp_path / name).parent.mkdir(parents=True, exist_ok=True)
        (tmp_path / name).write_text(text)
    assert hubsets.cpu_quota(tmp_path) == expected


def test_usable_cores_keep_to_the_cpu_quota(monkeypatch: pytest.MonkeyPatch) -> None:
    # With a quota of one CPU the walks get one process, whatever the
    # affinity says; without one, the affinity (or the CPU count) stands.
    monkeypatch.setattr(hubsets, "cpu_quota", lambda root=None: 1)
    assert hubsets.usable_cores() == 1
    monkeypatch.setattr(hubsets, "cpu_quota", lambda root=None: None)
    affinity = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
    assert hubsets.usable_cores() == affinity
