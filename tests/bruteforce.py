"""Exhaustive enumeration of hub plans: the independent reference for small cases.

Written from the problem definition alone (no hubnet model code), so a
match with the MILP is evidence that both are right.
"""

from __future__ import annotations

import itertools

import numpy as np


def _unit_costs(
    d: np.ndarray, rate: float, chi: float, alpha: float, delta: float
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    return rate * chi * d, rate * alpha * d, rate * delta * d


def brute_force(
    d: np.ndarray,
    w: np.ndarray,
    *,
    allocation: str,
    p: int | None,
    rate: float = 1.0,
    chi: float = 1.0,
    alpha: float = 1.0,
    delta: float = 1.0,
    fixed: np.ndarray | None = None,
    handling: np.ndarray | None = None,
    capacity: np.ndarray | None = None,
    candidates: list[int] | None = None,
    forced: list[int] | None = None,
) -> tuple[float, tuple[int, ...]]:
    """Cheapest plan by trying every hub set (and every allocation for single).

    Returns the optimal cost and one optimal hub set (0-based indices).
    """
    n = len(d)
    fixed = np.zeros(n) if fixed is None else fixed
    handling = np.zeros(n) if handling is None else handling
    cand = list(range(n)) if candidates is None else candidates
    forced = forced or []
    c, t, dist = _unit_costs(d, rate, chi, alpha, delta)
    out_vol = w.sum(axis=1)
    best = (np.inf, ())
    sizes = [p] if p is not None else range(1, len(cand) + 1)
    for size in sizes:
        for hubs in itertools.combinations(cand, size):
            if any(f not in hubs for f in forced):
                continue
            if allocation == "multiple":
                cost = _multiple(c, t, dist, w, hubs, handling)
            else:
                cost = _single(c, t, dist, w, out_vol, hubs, handling, capacity)
            cost += fixed[list(hubs)].sum()
            if cost < best[0] - 1e-9:
                best = (float(cost), hubs)
    return best


def _multiple(c, t, dist, w, hubs, handling) -> float:  # type: ignore[no-untyped-def]
    n = len(c)
    total = 0.0
    for i in range(n):
        for j in range(n):
            if w[i, j] == 0:
                continue
            total += w[i, j] * min(
                c[i, k] + handling[k] + t[k, m] + (handling[m] if m != k else 0.0) + dist[m, j]
                for k in hubs
                for m in hubs
            )
    return total


def _single(c, t, dist, w, out_vol, hubs, handling, capacity) -> float:  # type: ignore[no-untyped-def]
    n = len(c)
    others = [i for i in range(n) if i not in hubs]
    h = np.array(hubs)
    # Every allocation of the non-hub sites, vectorised: rows are allocations.
    choices = np.array(list(itertools.product(range(len(h)), repeat=len(others))), dtype=int)
    if choices.size == 0:
        choices = np.zeros((1, 0), dtype=int)
    alloc = np.empty((len(choices), n), dtype=int)
    for pos, k in enumerate(hubs):
        alloc[:, k] = pos
    alloc[:, others] = choices
    a = h[alloc]  # (m, n) hub of each site
    if capacity is not None:
        load = np.zeros((len(a), len(h)))
        for pos in range(len(h)):
            load[:, pos] = ((alloc == pos) * out_vol[None, :]).sum(axis=1)
        ok = (load <= capacity[h][None, :] + 1e-9).all(axis=1)
        a = a[ok]
        if len(a) == 0:
            return np.inf
    idx = np.arange(n)
    coll = ((c[idx[None, :], a] + handling[a]) * out_vol[None, :]).sum(axis=1)
    dis = (dist[a, idx[None, :]] * w.sum(axis=0)[None, :]).sum(axis=1)
    hub_t = t + handling[None, :]
    np.fill_diagonal(hub_t, 0.0)
    trans = (w[None, :, :] * hub_t[a[:, :, None], a[:, None, :]]).sum(axis=(1, 2))
    return float((coll + dis + trans).min())


def multiple_allocation_cost(
    d: np.ndarray,
    w: np.ndarray,
    hubs: tuple[int, ...] | list[int],
    *,
    rate: float = 1.0,
    chi: float = 1.0,
    alpha: float = 1.0,
    delta: float = 1.0,
    fixed: np.ndarray | None = None,
    handling: np.ndarray | None = None,
) -> float:
    """Cost of one hub set under multiple allocation, by trying every hub pair per OD."""
    n = len(d)
    fixed = np.zeros(n) if fixed is None else fixed
    handling = np.zeros(n) if handling is None else handling
    c, t, dist = _unit_costs(d, rate, chi, alpha, delta)
    return float(_multiple(c, t, dist, w, tuple(hubs), handling) + fixed[list(hubs)].sum())


def single_allocation_plans(
    d: np.ndarray,
    w: np.ndarray,
    p: int,
    *,
    rate: float = 1.0,
    chi: float = 1.0,
    alpha: float = 1.0,
    delta: float = 1.0,
    fixed: np.ndarray | None = None,
    handling: np.ndarray | None = None,
    candidates: list[int] | None = None,
    forced: list[int] | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Every single-allocation plan with p hubs and its cost.

    Returns ``(costs, assign)``: ``costs[r]`` is plan r's cost and
    ``assign[r, i]`` the hub (0-based index) of site i; each hub is
    allocated to itself. Written from the definition, like
    :func:`brute_force`.
    """
    n = len(d)
    fixed = np.zeros(n) if fixed is None else fixed
    handling = np.zeros(n) if handling is None else handling
    cand = list(range(n)) if candidates is None else candidates
    forced = forced or []
    c, t, dist = _unit_costs(d, rate, chi, alpha, delta)
    hub_t = t + handling[None, :]
    np.fill_diagonal(hub_t, 0.0)
    costs, plans = [], []
    for hubs in itertools.combinations(cand, p):
        if any(f not in hubs for f in forced):
            continue
        others = [i for i in range(n) if i not in hubs]
        for choice in itertools.product(hubs, repeat=len(others)):
            a = np.empty(n, dtype=int)
            a[list(hubs)] = hubs
            a[others] = choice
            cost = _plan_cost(c, hub_t, dist, handling, w, a)
            costs.append(cost + fixed[list(hubs)].sum())
            plans.append(a)
    return np.array(costs), np.array(plans)


def _plan_cost(c, hub_t, dist, handling, w, a) -> float:  # type: ignore[no-untyped-def]
    """Routing and handling of allocation ``a`` (``a[i]``: hub of site i), pair by pair."""
    n = len(a)
    return float(
        sum(
            w[i, j] * (c[i, a[i]] + handling[a[i]] + hub_t[a[i], a[j]] + dist[a[j], j])
            for i in range(n)
            for j in range(n)
            if w[i, j] > 0
        )
    )


def single_plan_cost(
    d: np.ndarray,
    w: np.ndarray,
    a: np.ndarray,
    *,
    rate: float = 1.0,
    chi: float = 1.0,
    alpha: float = 1.0,
    delta: float = 1.0,
    handling: np.ndarray | None = None,
) -> float:
    """One single allocation's routing and handling cost (no fixed costs).

    Each unit from i to j pays collection to ``a[i]``, handling there,
    transfer to ``a[j]`` with handling there when the hubs differ, and
    distribution to j; as in :func:`single_allocation_plans`.
    """
    handling = np.zeros(len(d)) if handling is None else handling
    c, t, dist = _unit_costs(d, rate, chi, alpha, delta)
    hub_t = t + handling[None, :]
    np.fill_diagonal(hub_t, 0.0)
    return _plan_cost(c, hub_t, dist, handling, w, a)


def cost_terms(data, params) -> dict:  # type: ignore[no-untyped-def,type-arg]
    """The keyword arguments above for a hubnet network and its parameters.

    Reads only the network's sites and the parameters' factors: the cost
    factors, fixed and handling costs, candidates and forced-open hubs.
    """
    sites = data.sites
    return {
        "chi": params.collection_factor,
        "alpha": params.transfer_factor,
        "delta": params.distribution_factor,
        "fixed": np.array([s.hub_fixed_cost for s in sites]),
        "handling": np.array([s.handling_cost for s in sites]),
        "candidates": [k for k, s in enumerate(sites) if s.is_candidate],
        "forced": [k for k, s in enumerate(sites) if s.hub_status == "open"],
    }
