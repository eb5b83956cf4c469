"""The local search that gives multiple allocation its starting plan (hubnet/heuristics.py).

References outside hubnet's model code: tests/bruteforce.py prices a hub
set by trying every hub pair for every OD pair, from the problem definition
alone; the AP optima are the published values in
../shared/reference/hub_benchmarks/published_optima.csv (Ernst and
Krishnamoorthy 1998, UMApHMP).
"""

from __future__ import annotations

import dataclasses
import itertools

import numpy as np
import pytest
from benchdata import ap_network, ap_params, euclid, published_rows, reference_dir
from bruteforce import brute_force, cost_terms, multiple_allocation_cost, single_plan_cost
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from hubnet.config import HubModelParams
from hubnet.data import Demand, NetworkData, Site
from hubnet.heuristics import _MultipleMoves, _Pricer, search_multiple, starting_plan

FACTORS = {"chi": 3.0, "alpha": 0.75, "delta": 2.0}
SETTINGS = settings(
    max_examples=30,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow],
    derandomize=True,  # the same examples on every run (and in CI)
)


def _network(
    seed: int,
    n: int,
    forced: int | None = None,
    *,
    all_flows: bool = False,
    fixed_scale: float = 1.0,
) -> tuple[NetworkData, np.ndarray]:
    """Planar sites with fixed and handling costs.

    Some OD pairs carry no flow and none a site to itself, unless
    ``all_flows`` (every pair, the diagonal included, as in the AP data).
    """
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 100, size=(n, 2))
    w = rng.integers(1, 20, size=(n, n)).astype(float)
    if not all_flows:
        w[rng.uniform(size=(n, n)) < 0.3] = 0.0
        np.fill_diagonal(w, 0.0)
    sites = tuple(
        Site(
            id=f"S{i}",
            name=f"site {i}",
            x=float(xy[i, 0]),
            y=float(xy[i, 1]),
            hub_fixed_cost=float(rng.uniform(200, 2000) * fixed_scale),
            handling_cost=float(rng.uniform(0, 3)),
            hub_status="open" if i == forced else "candidate",
        )
        for i in range(n)
    )
    demand = tuple(
        Demand(f"S{i}", f"S{j}", float(w[i, j])) for i in range(n) for j in range(n) if w[i, j] > 0
    )
    d = np.sqrt(((xy[:, None] - xy[None]) ** 2).sum(-1))
    return NetworkData(sites, demand, coordinates="planar", allow_same_site_demand=all_flows), d


def _params(p: int | None) -> HubModelParams:
    return HubModelParams(
        allocation="multiple",
        hubs=p,
        collection_factor=FACTORS["chi"],
        transfer_factor=FACTORS["alpha"],
        distribution_factor=FACTORS["delta"],
        cost_per_unit_km=1.0,
    )


def _brute(data: NetworkData, d: np.ndarray, hubs: list[int] | tuple[int, ...]) -> float:
    fixed = np.array([s.hub_fixed_cost for s in data.sites])
    handling = np.array([s.handling_cost for s in data.sites])
    return multiple_allocation_cost(
        d, data.flow_matrix(), hubs, fixed=fixed, handling=handling, **FACTORS
    )


@SETTINGS
@given(
    seed=st.integers(0, 10_000),
    n=st.integers(3, 8),
    size=st.integers(0, 3),
    all_flows=st.booleans(),
)
def test_move_costs_match_pricing_every_hub_pair(
    seed: int, n: int, size: int, all_flows: bool
) -> None:
    # Every "open one more hub" cost equals the hub set priced pair by pair.
    data, d = _network(seed, n, all_flows=all_flows)
    rng = np.random.default_rng(seed)
    hubs = sorted(rng.choice(n, size=min(size, n - 1), replace=False).tolist())
    moves = _MultipleMoves(_Pricer(data, d, _params(None)))
    xs = [k for k in range(n) if k not in hubs]
    got = moves.with_each(moves.state(hubs), xs, chunk=2)
    for x, value in zip(xs, got, strict=True):
        fixed = sum(data.sites[k].hub_fixed_cost for k in hubs + [x])
        assert value + fixed == pytest.approx(_brute(data, d, hubs + [x]), rel=1e-9)
    if hubs:
        assert moves.cost(hubs) == pytest.approx(_brute(data, d, hubs), rel=1e-9)


@SETTINGS
@given(
    seed=st.integers(0, 10_000),
    n=st.integers(4, 8),
    p=st.sampled_from([None, 1, 2, 3]),
    start_size=st.integers(0, 5),
)
def test_search_ends_where_no_single_move_is_cheaper(
    seed: int, n: int, p: int | None, start_size: int
) -> None:
    # The plan returned is priced right, has the hub count and the forced
    # hub, and no swap (nor, without a hub count, opening or closing one
    # hub) is cheaper, all priced pair by pair. Starts of any size, with
    # or without the forced hub, are repaired.
    forced = seed % n if seed % 3 == 0 else None
    data, d = _network(seed, n, forced, fixed_scale=10.0 if seed % 2 else 1.0)
    start = list(range(n))[n - min(start_size, n) :]
    hubs, cost = search_multiple(
        data, d, _params(p), start, list(range(n)), max_seconds=30.0, max_idle=3, seed=seed
    )
    assert cost == pytest.approx(_brute(data, d, hubs), rel=1e-9)
    if p is not None:
        assert len(hubs) == p
    if forced is not None:
        assert forced in hubs
    closed = [k for k in range(n) if k not in hubs]
    neighbours = [
        [k for k in hubs if k != out] + [inn] for out in hubs if out != forced for inn in closed
    ]
    if p is None:
        neighbours += [hubs + [inn] for inn in closed]
        neighbours += [[k for k in hubs if k != out] for out in hubs if out != forced]
    for move in (m for m in neighbours if m):
        assert _brute(data, d, move) >= cost - 1e-9 * abs(cost), move


@pytest.mark.parametrize("p", [None, 2, 3])
def test_small_networks_reach_the_enumerated_optimum(p: int | None) -> None:
    # Iterated search on 8-site networks (fixed costs high enough that the
    # optimum opens a few hubs, not nearly all): its plan equals the cheapest
    # of all hub sets, enumerated and priced pair by pair (fixed seeds).
    for seed in range(8):
        forced = 3 if seed % 4 == 0 else None
        data, d = _network(seed, 8, forced, fixed_scale=10.0)
        sizes = [p] if p is not None else range(1, 9)
        best = min(
            _brute(data, d, hs)
            for size in sizes
            for hs in itertools.combinations(range(8), size)
            if forced is None or forced in hs
        )
        found = starting_plan(data, d, _params(p), max_seconds=30.0)
        assert found is not None
        assert found[2] == pytest.approx(best, rel=1e-9), seed


@pytest.mark.parametrize(("n", "p"), [(50, 5), (50, 10)])
def test_starting_plan_reaches_published_ap_values(n: int, p: int) -> None:
    # published_optima.csv: AP n=50 p=5 UMApHMP 129412.60 (Ernst and
    # Krishnamoorthy 1998) and p=10 100508.95 (best known, Stanimirovic 2008).
    reference_dir()  # skips with the reason when the published data is absent
    row = next(
        r for r in published_rows() if r.problem == "UMApHMP" and r.n == n and r.setting == str(p)
    )
    data = ap_network(n)
    found = starting_plan(data, euclid(data), ap_params("multiple", p), max_seconds=60.0)
    assert found is not None
    assert found[2] <= row.objective + 0.5 * 10 ** (-row.decimals)


def _reference_single_cost(
    data: NetworkData, d: np.ndarray, params: HubModelParams, a: np.ndarray
) -> float:
    """A single allocation's routing and handling cost, from the definition.

    tests/bruteforce.py prices it pair by pair, without hubnet's pricing code.
    """
    return single_plan_cost(
        d,
        data.flow_matrix(),
        a,
        rate=params.cost_per_unit_km,
        chi=params.collection_factor,
        alpha=params.transfer_factor,
        delta=params.distribution_factor,
        handling=np.array([s.handling_cost for s in data.sites]),
    )


@SETTINGS
@given(
    seed=st.integers(0, 10_000),
    n=st.integers(5, 8),
    p=st.integers(1, 4),
    all_flows=st.booleans(),
)
def test_capacitated_allocation_is_a_local_optimum_of_moves_and_exchanges(
    seed: int, n: int, p: int, all_flows: bool
) -> None:
    # Tight sort capacities (each hub room for a little more than its share
    # of the volume) often block every single move; exchanging two
    # terminals of different hubs then still lowers the cost. The
    # allocation found must fit the capacities, cost no less than the best
    # allocation by enumeration, and no move or exchange that fits may
    # lower its cost, both priced from the definition above. Sites may
    # send to themselves (as in the AP data): that volume stays on the
    # site's hub whichever it is.
    data, d, params, hubs, out_vol, room = _tight_network(seed, n, p, all_flows, 1.15)
    found = _Pricer(data, d, params).allocate(hubs)
    if found is None:
        # The greedy fill may miss an allocation that fits (it then says
        # so rather than invent one): only when some fit is it required.
        return
    a = np.asarray(found)
    assert all(a[k] == k for k in hubs)
    assert all(out_vol[a == k].sum() <= room + 1e-9 for k in hubs)
    cost = _reference_single_cost(data, d, params, a)
    tol = 1e-7 * max(1.0, cost)
    assert cost >= _best_by_enumeration(data, d, params, hubs, room) - tol
    for b in _neighbours_of(a, hubs):
        if all(out_vol[b == k].sum() <= room + 1e-9 for k in hubs):
            assert _reference_single_cost(data, d, params, b) >= cost - tol


def _neighbours_of(a: np.ndarray, hubs: list[int]) -> list[np.ndarray]:
    """Every allocation one move or one exchange of two terminals away from ``a``."""
    n = len(a)
    others = [i for i in range(n) if i not in hubs]
    found = []
    for i in others:
        for k in hubs:
            if k != a[i]:
                b = a.copy()
                b[i] = k
                found.append(b)
        for j in others:
            if j > i and a[j] != a[i]:
                b = a.copy()
                b[i], b[j] = a[j], a[i]
                found.append(b)
    return found


def _tight_network(
    seed: int,
    n: int,
    p: int,
    all_flows: bool,
    slack: float,
    *,
    free_costs: bool = False,
    idle_site: bool = False,
) -> tuple[NetworkData, np.ndarray, HubModelParams, list[int], np.ndarray, float]:
    """A small network whose ``p`` random hubs each sort ``slack`` times their share.

    ``free_costs``: no fixed or handling costs (a capacitated p-hub
    median); ``idle_site``: one site that is not a hub sends and receives
    nothing.
    """
    data, d = _network(seed, n, all_flows=all_flows)
    rng = np.random.default_rng(seed + 1)
    hubs = sorted(rng.choice(n, size=p, replace=False).tolist())
    if idle_site:
        idle = f"S{next(i for i in range(n) if i not in hubs)}"
        demand = tuple(r for r in data.demand if idle not in (r.origin, r.destination))
        data = dataclasses.replace(data, demand=demand)
    out_vol = data.flow_matrix().sum(axis=1)
    room = float(slack * out_vol.sum() / p)
    sites = tuple(
        dataclasses.replace(
            s,
            sort_capacity=room,
            hub_fixed_cost=0.0 if free_costs else s.hub_fixed_cost,
            handling_cost=0.0 if free_costs else s.handling_cost,
        )
        for s in data.sites
    )
    data = dataclasses.replace(data, sites=sites)
    params = dataclasses.replace(_params(p), allocation="single", capacitated=True)
    return data, d, params, hubs, out_vol, room


def _random_allocation(
    seed: int, h: np.ndarray, out_vol: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Hub positions of a random allocation to hubs ``h`` (each on itself) and the loads."""
    pos = np.random.default_rng(seed).integers(len(h), size=len(out_vol))
    pos[h] = np.arange(len(h))
    return pos, np.bincount(pos, weights=out_vol, minlength=len(h))


@SETTINGS
@given(
    seed=st.integers(0, 10_000),
    n=st.integers(5, 8),
    p=st.integers(2, 4),
    all_flows=st.booleans(),
    slack=st.sampled_from([1.02, 1.05, 1.15]),
    free_costs=st.booleans(),
    idle_site=st.booleans(),
)
def test_iterated_allocation_reaches_the_best_allocation_by_enumeration(
    seed: int, n: int, p: int, all_flows: bool, slack: float, free_costs: bool, idle_site: bool
) -> None:
    # Under tight sort capacities moves and exchanges stop short; the
    # iterated search (kicks, a descent with overflow at a price, repair)
    # must return an allocation that fits, keeps each hub on itself, costs
    # no more than where it started, and on these small networks is the
    # cheapest allocation to the same hubs found by trying them all. Costs
    # from the definition (tests/bruteforce.py). Also without fixed and
    # handling costs (the repair's overflow price must not vanish) and with
    # a site that has no volume (it must not switch the search off).
    data, d, params, hubs, out_vol, room = _tight_network(
        seed, n, p, all_flows, slack, free_costs=free_costs, idle_site=idle_site
    )
    pricer = _Pricer(data, d, params)
    start = pricer.allocate(hubs)
    if start is None:
        return  # the quick rule found no allocation that fits: nothing to refine
    a = pricer.refine(hubs, start)
    assert all(a[k] == k for k in hubs)
    assert all(out_vol[a == k].sum() <= room + 1e-9 for k in hubs)
    cost = _reference_single_cost(data, d, params, a)
    assert cost <= _reference_single_cost(data, d, params, np.asarray(start)) + 1e-7 * cost
    assert cost == pytest.approx(_best_by_enumeration(data, d, params, hubs, room), rel=1e-9)


def _best_by_enumeration(
    data: NetworkData, d: np.ndarray, params: HubModelParams, hubs: list[int], room: float
) -> float:
    """Cheapest allocation to ``hubs`` within sort capacity ``room``, trying every one."""
    n = data.n
    out_vol = data.flow_matrix().sum(axis=1)
    others = [i for i in range(n) if i not in hubs]
    best = np.inf
    for choice in itertools.product(hubs, repeat=len(others)):
        b = np.arange(n)
        b[others] = choice
        if all(out_vol[b == k].sum() <= room + 1e-9 for k in hubs):
            best = min(best, _reference_single_cost(data, d, params, b))
    return float(best)


@pytest.mark.parametrize("seed", [3, 4, 14])
def test_iterated_allocation_runs_beside_a_site_without_volume(seed: int) -> None:
    # A site with no volume fits on any hub; it must not make the search
    # think that every hub has room for every terminal and stop at once.
    # On these networks the quick rule stops 9-28 % above the cheapest
    # allocation (enumeration, costs from the definition) and the iterated
    # search must reach it.
    data, d, params, hubs, _out_vol, room = _tight_network(seed, 8, 2, True, 1.05, idle_site=True)
    pricer = _Pricer(data, d, params)
    start = pricer.allocate(hubs)
    assert start is not None
    best = _best_by_enumeration(data, d, params, hubs, room)
    assert _reference_single_cost(data, d, params, np.asarray(start)) > best * (1 + 1e-6)
    found = _reference_single_cost(data, d, params, pricer.refine(hubs, start))
    assert found == pytest.approx(best, rel=1e-9)


@settings(SETTINGS, max_examples=80)
@given(
    seed=st.integers(0, 10_000),
    n=st.integers(5, 9),
    p=st.integers(2, 4),
    price=st.sampled_from([0.5, 5.0, 50.0]),
    slack=st.sampled_from([1.0, 1.05]),
)
def test_descent_with_priced_overflow_ends_where_no_step_pays(
    seed: int, n: int, p: int, price: float, slack: float
) -> None:
    # With an overflow price every move and exchange is allowed and each
    # unit of volume over a hub's capacity costs ``price``. From a random
    # allocation (over capacity or not), the descent must end where no
    # move or exchange lowers cost + price x overflow, both priced here
    # from the definition, and report each hub's load as it is.
    data, d, params, hubs, out_vol, room = _tight_network(seed, n, p, True, slack)
    pricer = _Pricer(data, d, params)
    h = np.asarray(hubs)
    local, hubs_t, caps = pricer._on_hubs(h)
    pos, load = _random_allocation(seed, h, out_vol)
    pricer._exchange(pos, load, caps, local, hubs_t, overflow_price=price)
    a = h[pos]
    assert np.allclose(load, [out_vol[a == k].sum() for k in hubs])
    assert all(a[k] == k for k in hubs)

    def penalised(b: np.ndarray) -> float:
        over = sum(max(out_vol[b == k].sum() - room, 0.0) for k in hubs)
        return _reference_single_cost(data, d, params, b) + price * over

    value = penalised(a)
    for b in _neighbours_of(a, hubs):
        assert penalised(b) >= value - 1e-7 * max(1.0, value)


@pytest.mark.parametrize("seed", range(8))
def test_capacitated_p_hub_start_without_fixed_or_handling_costs(seed: int) -> None:
    # Eight sites, two hubs, capacities 2 % above an even share, no fixed
    # or handling costs (a capacitated p-hub median). The largest-first fill
    # often overfills a hub here, and the repair prices the overflow in
    # proportion to the sites' own collection and distribution costs: with
    # a price that vanished with the fixed and handling costs the start
    # ended up to 26 % above the optimum (five of these eight networks).
    # The start must be the optimum found by trying every hub set and
    # allocation (tests/bruteforce.py).
    data, d, params, _hubs, _out_vol, room = _tight_network(seed, 8, 2, True, 1.02, free_costs=True)
    optimum, _ = brute_force(
        d,
        data.flow_matrix(),
        allocation="single",
        p=2,
        capacity=np.full(8, room),
        **cost_terms(data, params),
    )
    found = starting_plan(data, d, params, max_seconds=20.0)
    assert found is not None
    assert found[2] == pytest.approx(optimum, rel=1e-9)


#: The AP capacitated instances with published values (published_optima.csv:
#: CSAHLP, Ernst and Krishnamoorthy 1999; 50 TT is a best known value).
CSAHLP_CASES = [
    pytest.param(n, setting, marks=[pytest.mark.slow] if n >= 40 else [])
    for n in (10, 20, 25, 40, 50)
    for setting in ("LL", "LT", "TL", "TT")
]


@pytest.mark.parametrize(("n", "setting"), CSAHLP_CASES)
def test_capacitated_start_reaches_the_published_value(n: int, setting: str) -> None:
    # The starting search alone (no solver) must reach the published
    # optimum (or best known value) within half a unit of its last printed
    # digit. Before the iterated allocation it ended up to 9.6 % above
    # (40 LT: 298,446.26 against 272,218.32); at 50 TT the best known
    # plan's hubs were allocated 1.7 % too dear and never chosen. The plan
    # must fit the sort capacities (inbound volume counted here from the
    # flow matrix) and cost what the search says, priced from the
    # definition.
    reference_dir()  # skips with the reason when the published data is absent
    row = next(
        (
            r
            for r in published_rows()
            if r.problem == "CSAHLP" and r.n == n and f"instance {n}{setting}" in r.setting
        ),
        None,
    )
    assert row is not None, f"published_optima.csv has no CSAHLP {n}{setting} row"
    data = ap_network(n, fixed=setting[0], cap=setting[1])
    d = euclid(data)
    found = starting_plan(data, d, ap_params("single", None, capacitated=True))
    assert found is not None
    hubs, assign, cost = found
    assert assign is not None
    assert abs(cost - row.objective) <= 0.5 * 10 ** (-row.decimals)
    out_vol = data.flow_matrix().sum(axis=1)
    assert set(assign.tolist()) == set(hubs) and all(assign[k] == k for k in hubs)
    for k in hubs:
        cap = data.sites[k].sort_capacity
        assert cap is not None and out_vol[assign == k].sum() <= cap + 1e-9
    fixed = sum(data.sites[k].hub_fixed_cost for k in hubs)
    params = ap_params("single", None, capacitated=True)
    priced = _reference_single_cost(data, d, params, assign) + fixed
    assert priced == pytest.approx(cost, rel=1e-9)


@SETTINGS
@given(
    seed=st.integers(0, 10_000),
    n=st.integers(5, 8),
    p=st.integers(2, 4),
    price=st.sampled_from([None, 0.5, 50.0]),
    all_flows=st.booleans(),
)
def test_step_costs_are_the_cost_changes_of_each_move_and_exchange(
    seed: int, n: int, p: int, price: float | None, all_flows: bool
) -> None:
    # From a random allocation (over capacity or not), each move's and each
    # exchange's cost change as the search computes it must equal the
    # difference of the two allocations' costs priced from the definition,
    # plus price x the change in volume over capacity when overflow is
    # priced; without a price, steps that end over a capacity are barred.
    data, d, params, hubs, out_vol, room = _tight_network(seed, n, p, all_flows, 1.05)
    pricer = _Pricer(data, d, params)
    h = np.asarray(hubs)
    local, hubs_t, caps = pricer._on_hubs(h)
    pos, load = _random_allocation(seed, h, out_vol)
    move, swap, _ = pricer._step_costs(pos, load, caps, local, hubs_t, price)
    a = h[pos]

    def over(b: np.ndarray) -> float:
        return sum(max(out_vol[b == k].sum() - room, 0.0) for k in hubs)

    base = _reference_single_cost(data, d, params, a)
    checked = 0
    for i in range(n):
        for j in range(n):
            if i in hubs or j in hubs or i == j or pos[i] == pos[j]:
                assert not np.isfinite(swap[i, j])
                continue
            b = a.copy()
            b[i], b[j] = a[j], a[i]
            change = _reference_single_cost(data, d, params, b) - base
            if price is not None:
                assert swap[i, j] == pytest.approx(change + price * (over(b) - over(a)), abs=1e-6)
                checked += 1
            else:
                fits = all(out_vol[b == k].sum() <= room + 1e-9 for k in (a[i], a[j]))
                assert np.isfinite(swap[i, j]) == fits
                if fits:
                    assert swap[i, j] == pytest.approx(change, abs=1e-6)
                    checked += 1
        for k_pos in range(p):
            if i in hubs or k_pos == pos[i]:
                assert not np.isfinite(move[i, k_pos])
                continue
            b = a.copy()
            b[i] = h[k_pos]
            change = _reference_single_cost(data, d, params, b) - base
            if price is not None:
                priced = change + price * (over(b) - over(a))
                assert move[i, k_pos] == pytest.approx(priced, abs=1e-6)
                checked += 1
            else:
                assert np.isfinite(move[i, k_pos]) == (out_vol[b == h[k_pos]].sum() <= room + 1e-9)
                if np.isfinite(move[i, k_pos]):
                    assert move[i, k_pos] == pytest.approx(change, abs=1e-6)
                    checked += 1
    assert price is None or checked > 0
