"""Fast starting plans for the MILP: local search over hub sets.

A good first plan lets the solver prune early and gives every run a plan
even when the time limit is short. Pure numpy; deterministic.
"""

from __future__ import annotations

import numpy as np

from hubnet.config import HubModelParams
from hubnet.data import NetworkData
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
        # Transfer plus handling at the second hub (none when k == m).
        self.t2 = self.t + self.handling[None, :]
        np.fill_diagonal(self.t2, 0.0)

    def multiple(self, hubs: list[int]) -> float:
        cost, _, _ = best_hub_pairs(self.d, self.params, hubs, self.handling)
        return float((self.w * cost).sum() + self.fixed[hubs].sum())

    def allocate(self, hubs: list[int]) -> np.ndarray | None:
        """Single allocation for a hub set: cheapest feeder cost, then 1-opt moves."""
        h = np.asarray(hubs)
        local = (
            self.c[:, h] * self.out_vol[:, None]
            + self.dist[h, :].T * self.in_vol[:, None]
            + self.handling[h][None, :] * self.out_vol[:, None]
        )
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


def starting_plan(
    data: NetworkData, d: np.ndarray, params: HubModelParams, max_rounds: int = 50
) -> tuple[list[int], np.ndarray | None, float] | None:
    """Find a good plan by greedy construction then swap/add/drop local search.

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

    hubs = list(forced)
    target = params.hubs
    free = [k for k in cand if k not in hubs]
    if target is None:
        # Add hubs while they pay for themselves.
        cur = proxy(hubs) if hubs else np.inf
        while free:
            costs = [proxy(hubs + [k]) for k in free]
            best = int(np.argmin(costs))
            if costs[best] >= cur and hubs:
                break
            cur = costs[best]
            hubs.append(free.pop(best))
    else:
        while len(hubs) < target:
            costs = [proxy(hubs + [k]) for k in free]
            hubs.append(free.pop(int(np.argmin(costs))))
    cost, assign = price(hubs)
    # Swap (and, without a fixed hub count, add/drop) local search.
    for _ in range(max_rounds):
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
