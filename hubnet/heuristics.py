"""Fast starting plans for the MILP: local search over hub sets.

A good first plan lets the solver prune early and gives every run a plan
even when the time limit is short. Pure numpy; deterministic.
"""

from __future__ import annotations

import numpy as np

from hubnet.config import HubModelParams
from hubnet.data import NetworkData
from hubnet.model import allocation_costs
from hubnet.solution import best_hub_pairs, unit_path_costs


class _Pricer:
    """Prices hub sets (and single allocations) for one network, vectorised."""

    def __init__(self, data: NetworkData, d: np.ndarray, params: HubModelParams):
        self.params = params
        self.d = d
        self.w = data.flow_matrix()
        self.out_vol = self.w.sum(axis=1)
        self.in_vol = self.w.sum(axis=0)
        self.handling = np.array([s.handling_cost for s in data.sites])
        self.fixed = np.array([s.hub_fixed_cost for s in data.sites])
        self.cap = np.array(
            [np.inf if s.sort_capacity is None else s.sort_capacity for s in data.sites]
        )
        self.c, self.t, self.dist = unit_path_costs(d, params)
        # Collection, handling at the hub and distribution of each site's
        # volume for every hub, (n, n): the local part of an allocation.
        self.local = allocation_costs(data, d, params, list(range(len(self.w))))
        # Transfer plus handling at the second hub (none when k == m).
        self.t2 = self.t + self.handling[None, :]
        np.fill_diagonal(self.t2, 0.0)

    def multiple(self, hubs: list[int]) -> float:
        cost, _, _ = best_hub_pairs(self.d, self.params, hubs, self.handling)
        return float((self.w * cost).sum() + self.fixed[hubs].sum())

    def allocate(self, hubs: list[int]) -> np.ndarray | None:
        """Single allocation for a hub set: cheapest feeder cost, then 1-opt moves."""
        h = np.asarray(hubs)
        local = self.local[:, h]  # a copy; the hubs' own rows are set below
        local[h, :] = np.inf
        local[h, np.arange(len(h))] = 0.0
        order = np.argsort(-self.out_vol)
        assign = np.full(len(self.out_vol), -1)
        load = np.zeros(len(h))
        caps = self.cap[h] if self.params.capacitated else np.full(len(h), np.inf)
        for k_pos, k in enumerate(h):
            assign[k] = k_pos
            load[k_pos] += self.out_vol[k]
        for i in order:
            if assign[i] >= 0:
                continue
            for k_pos in np.argsort(local[i]):
                if load[k_pos] + self.out_vol[i] <= caps[k_pos] + 1e-9 and np.isfinite(
                    local[i, k_pos]
                ):
                    assign[i] = k_pos
                    load[k_pos] += self.out_vol[i]
                    break
            else:
                return None
        if (load > caps + 1e-9).any():
            return None
        # 1-opt: move one terminal to another hub while it lowers the cost.
        best = self.single_cost(h, assign)
        improved = True
        rounds = 0
        while improved and rounds < 20:
            improved = False
            rounds += 1
            for i in order:
                if i in h:
                    continue
                cur = assign[i]
                for k_pos in range(len(h)):
                    if k_pos == cur or load[k_pos] + self.out_vol[i] > caps[k_pos] + 1e-9:
                        continue
                    assign[i] = k_pos
                    cost = self.single_cost(h, assign)
                    if cost < best - 1e-9:
                        best = cost
                        load[cur] -= self.out_vol[i]
                        load[k_pos] += self.out_vol[i]
                        cur = k_pos
                        improved = True
                    else:
                        assign[i] = cur
        return h[assign]

    def single_cost(self, h: np.ndarray, assign_pos: np.ndarray) -> float:
        n = len(assign_pos)
        hub_of = h[assign_pos]
        a = np.zeros((n, len(h)))
        a[np.arange(n), assign_pos] = 1.0
        flows = a.T @ self.w @ a  # (p, p) volume from hub to hub
        cost = (self.c[np.arange(n), hub_of] + self.handling[hub_of]) @ self.out_vol
        cost += self.dist[hub_of, np.arange(n)] @ self.in_vol
        cost += float((flows * self.t2[np.ix_(h, h)]).sum())
        return float(cost + self.fixed[h].sum())


def _greedy_multiple(
    pricer: _Pricer, cand: list[int], forced: list[int], target: int | None
) -> list[int]:
    """Add hubs one at a time, each the one that lowers multiple-allocation cost most.

    Incremental: with ``reach[i, x]`` the cheapest cost from origin i to hub
    x through an open first hub, and ``onward[x, j]`` the cheapest cost from
    hub x to destination j through an open second hub, pricing a new hub x
    costs O(n^2), so a greedy step over all candidates is O(q n^2).
    Without a hub count, hubs are added while they pay their fixed cost.
    """
    c = pricer.c + pricer.handling[None, :]  # (n, n): i to first hub k, with handling at k
    t2 = pricer.t2  # (n, n): k to m with handling at m, 0 on the diagonal
    dist = pricer.dist  # (n, n): m to j
    w = pricer.w
    n = w.shape[0]
    cur = np.full((n, n), np.inf)
    reach = np.full((n, n), np.inf)
    onward = np.full((n, n), np.inf)

    def priced(x: int) -> np.ndarray:
        via_x_first = c[:, x][:, None] + np.minimum(onward[x, :], dist[x, :])[None, :]
        via_x_second = reach[:, x][:, None] + dist[x, :][None, :]
        return np.minimum(cur, np.minimum(via_x_first, via_x_second))

    def add(x: int) -> None:
        nonlocal cur, reach, onward
        cur = priced(x)
        reach = np.minimum(reach, c[:, x][:, None] + t2[x, :][None, :])
        onward = np.minimum(onward, t2[:, x][:, None] + dist[x, :][None, :])

    def total(matrix: np.ndarray) -> float:
        with np.errstate(invalid="ignore"):
            return float(np.where(w > 0, w * matrix, 0.0).sum())

    hubs: list[int] = []
    for k in forced:
        add(k)
        hubs.append(k)
    free = [k for k in cand if k not in hubs]
    current = total(cur) + pricer.fixed[hubs].sum() if hubs else np.inf
    while free and (target is None or len(hubs) < target):
        costs = np.array([total(priced(k)) + pricer.fixed[hubs + [k]].sum() for k in free])
        best = int(np.argmin(costs))
        if target is None and hubs and costs[best] >= current:
            break
        current = float(costs[best])
        add(free[best])
        hubs.append(free.pop(best))
    return hubs


def starting_plan(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    max_rounds: int = 50,
    max_seconds: float = 60.0,
) -> tuple[list[int], np.ndarray | None, float] | None:
    """Find a good plan by greedy construction then swap/add/drop local search.

    The swap search stops after ``max_rounds`` improving rounds or
    ``max_seconds`` of wall time, whichever comes first.

    Returns
    -------
    tuple or None
        ``(hubs, assign, cost)``: hub indices, the single-allocation hub of
        each site (``None`` for multiple allocation), and the plan's cost in
        currency per day; ``None`` if no feasible start was found.
    """
    pricer = _Pricer(data, d, params)
    cand = [k for k, s in enumerate(data.sites) if s.is_candidate]
    forced = [k for k, s in enumerate(data.sites) if s.hub_status == "open"]
    single = params.allocation == "single"

    def price(hubs: list[int]) -> tuple[float, np.ndarray | None]:
        if not hubs:
            return np.inf, None
        if single:
            assign = pricer.allocate(sorted(hubs))
            if assign is None:
                return np.inf, None
            pos = {k: p for p, k in enumerate(sorted(hubs))}
            return pricer.single_cost(
                np.asarray(sorted(hubs)), np.array([pos[a] for a in assign])
            ), assign
        return pricer.multiple(sorted(hubs)), None

    # Cheap proxy for the greedy phase: multiple-allocation pricing.
    def proxy(hubs: list[int]) -> float:
        return pricer.multiple(sorted(hubs))

    target = params.hubs
    hubs = _greedy_multiple(pricer, cand, forced, target)
    cost, assign = price(hubs)
    # Swap (and, without a fixed hub count, add/drop) local search.
    import time

    t_end = time.perf_counter() + max_seconds
    for _ in range(max_rounds):
        if time.perf_counter() > t_end:
            break
        improved = False
        moves: list[list[int]] = []
        for out in [k for k in hubs if k not in forced]:
            for inn in [k for k in cand if k not in hubs]:
                moves.append([k for k in hubs if k != out] + [inn])
        if target is None:
            moves += [hubs + [k] for k in cand if k not in hubs]
            if len(hubs) > 1:
                moves += [[k for k in hubs if k != out] for out in hubs if out not in forced]
        if single and len(moves) > 40:
            # Rank swaps with the cheap proxy; price only the most promising exactly.
            ranked = sorted(moves, key=proxy)[:40]
            moves = ranked
        for move in moves:
            if time.perf_counter() > t_end:
                break
            c_move, a_move = price(move)
            if c_move < cost - 1e-9 * max(1.0, abs(cost)):
                hubs, cost, assign = move, c_move, a_move
                improved = True
                break
        if not improved:
            break
    if not np.isfinite(cost):
        return None
    return sorted(hubs), assign, float(cost)


def allocate_to_hubs(
    data: NetworkData, d: np.ndarray, params: HubModelParams, hubs: list[int]
) -> np.ndarray | None:
    """Single allocation of every site to one of the given hubs (cheap, then 1-opt).

    Returns the hub index of each site, or ``None`` when capacities cannot
    be met by this simple rule.
    """
    return _Pricer(data, d, params).allocate(sorted(hubs))


def single_allocation_cost(
    data: NetworkData, d: np.ndarray, params: HubModelParams, assign: np.ndarray
) -> float:
    """Cost of a single-allocation plan, currency per day.

    ``assign[i]`` is the hub (matrix index) of site i; the open hubs are
    those used. Collection, handling at each hub passed, transfer,
    distribution, and the open hubs' fixed costs.
    """
    a = np.asarray(assign, dtype=np.int64)
    h = np.unique(a)
    pos = np.searchsorted(h, a)
    return _Pricer(data, d, params).single_cost(h, pos)


def polish_multiple(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    hubs: list[int],
    pool: list[int],
    max_seconds: float = 30.0,
) -> tuple[list[int], float]:
    """Swap local search for multiple allocation, swapping in hubs from ``pool`` only.

    Used by the Benders solver with the support of the LP solution as the
    pool: a small, promising neighbourhood that exact pricing can afford on
    large networks.

    Parameters
    ----------
    data, d, params
        Network, distances (km), model parameters.
    hubs
        Starting hub set (matrix indices).
    pool
        Candidate hubs that may be swapped in.
    max_seconds
        Wall-clock budget (s).

    Returns
    -------
    tuple
        Best hub set found and its cost (currency per day).
    """
    import time

    t_end = time.perf_counter() + max_seconds
    pricer = _Pricer(data, d, params)
    forced = {k for k, s in enumerate(data.sites) if s.hub_status == "open"}
    current = sorted(hubs)
    cost = pricer.multiple(current)
    improved = True
    while improved and time.perf_counter() < t_end:
        improved = False
        for out in [k for k in current if k not in forced]:
            for inn in [k for k in pool if k not in current]:
                move = sorted([k for k in current if k != out] + [inn])
                c_move = pricer.multiple(move)
                if c_move < cost - 1e-9 * max(1.0, abs(cost)):
                    current, cost, improved = move, c_move, True
                    break
                if time.perf_counter() > t_end:
                    break
            if improved or time.perf_counter() > t_end:
                break
    return current, cost
