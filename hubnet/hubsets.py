"""Multiple allocation with a fixed number of hubs: every hub set priced, exactly.

Under multiple allocation without sort capacities each OD pair simply takes
its cheapest route through the open hubs, so a hub set's cost is a sum of
minima that :class:`~hubnet.heuristics._MultipleMoves` computes exactly in
O(n^2) per added hub. With p hubs out of q candidates there are C(q, p)
sets; when that times n^2 is small (CAB, 25 cities, 4 hubs: 12,650 sets of
625 pairs) pricing them all is a proof of optimality that needs no solver
and takes a fraction of a second, where the MILP (Benders) needs 1-2 s.

The sets are walked depth first in index order. A node holds the route
costs of its hubs so far (one O(n^2) step from its parent); its last level
prices every remaining candidate at once, so the work is about C(q, p) n^2.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np

from hubnet.config import HubModelParams
from hubnet.data import NetworkData
from hubnet.heuristics import _MultipleMoves, _Pricer

#: Work allowed for the enumeration, in (hub sets) x (OD pairs) priced:
#: about 1e8 per second on the benchmark machine. AP, 40 sites, 4 hubs
#: (1.5e8): 1.2-1.7 s, where Benders took 3.7 s; AP, 50 sites, 4 hubs
#: (5.8e8): 3.8-10 s against Benders' 7.8 s, so left to Benders.
MAX_WORK = 200_000_000
#: Candidates priced in one numpy pass at the last level: on small networks
#: the per-call overhead dominates (AP, 25 sites, 5 hubs: 64 instead of 16
#: took the enumeration from 1.06 s to 0.62-0.93 s).
LEAF_CHUNK = 64
#: Work priced per second, for deciding whether the enumeration fits a
#: time limit: half the rate measured on the benchmark machine (1e8).
WORK_PER_S = 50_000_000


@dataclass(frozen=True)
class HubSetOptimum:
    """The cheapest hub set and how it was found.

    Attributes
    ----------
    hubs
        Matrix indices of the open hubs, ascending.
    cost
        Its cost, currency per day (routing, handling and hub fixed costs).
    sets
        Number of hub sets priced: all of them, C(q - forced, p - forced).
    seconds
        Wall time, s.
    """

    hubs: list[int]
    cost: float
    sets: int
    seconds: float


def hub_choices(
    data: NetworkData, params: HubModelParams
) -> tuple[list[int], list[int], int] | None:
    """Forced hubs, the free candidates, and how many of those to open.

    ``None`` unless a fixed hub count without sort capacities, or when the
    forced hubs and the candidates cannot make that count.
    """
    if params.capacitated or params.hubs is None:
        return None
    cand = [k for k, s in enumerate(data.sites) if s.is_candidate]
    forced = [k for k in cand if data.sites[k].hub_status == "open"]
    free = [k for k in cand if data.sites[k].hub_status != "open"]
    need = params.hubs - len(forced)
    if need < 0 or need > len(free):
        return None
    return forced, free, need


def _choices(data: NetworkData, params: HubModelParams) -> tuple[list[int], list[int], int] | None:
    """:func:`hub_choices` for multiple allocation, else ``None``."""
    return hub_choices(data, params) if params.allocation == "multiple" else None


def enumeration_work(data: NetworkData, params: HubModelParams) -> int | None:
    """(hub sets) x (OD pairs) that :func:`cheapest_hub_set` would price at most.

    ``None`` when enumeration does not apply: not multiple allocation, sort
    capacities, or a free number of hubs.
    """
    found = _choices(data, params)
    if found is None:
        return None
    _forced, free, need = found
    return math.comb(len(free), need) * data.n * data.n


def cheapest_hub_set(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    *,
    time_limit_s: float | None = None,
) -> HubSetOptimum | None:
    """The cheapest set of ``params.hubs`` hubs under multiple allocation, proven.

    Parameters
    ----------
    data
        Validated network.
    d
        ``(n, n)`` distances, km.
    params
        Multiple allocation, a fixed hub count, no sort capacities.
    time_limit_s
        Give up (``None`` returned) after this long, s.

    Returns
    -------
    HubSetOptimum or None
        ``None`` when enumeration does not apply or ran out of time.
    """
    found = _choices(data, params)
    if found is None:
        return None
    forced, free, need = found
    t0 = time.perf_counter()
    deadline = None if time_limit_s is None else t0 + time_limit_s
    moves = _MultipleMoves(_Pricer(data, d, params))
    fixed = moves.fixed
    best_cost, best_hubs = math.inf, None
    base = moves.state(forced) if forced else moves.empty()
    base_fixed = float(fixed[forced].sum())
    if need == 0:
        cost = moves.total(base[0]) + base_fixed
        return HubSetOptimum(sorted(forced), cost, 1, time.perf_counter() - t0)
    fixed_free = fixed[np.asarray(free, dtype=np.int64)]

    out_of_time = False

    def walk(
        state: tuple[np.ndarray, np.ndarray, np.ndarray],
        chosen: list[int],
        idx: int,
        left: int,
        fixed_so_far: float,
    ) -> None:
        nonlocal best_cost, best_hubs, out_of_time
        if out_of_time:
            return
        if deadline is not None and time.perf_counter() > deadline:
            out_of_time = True
            return
        if left == 1:
            xs = free[idx:]
            priced = moves.with_each(state, xs, chunk=LEAF_CHUNK)
            costs = priced + fixed_so_far + fixed_free[idx:]
            j = int(np.argmin(costs))
            if costs[j] < best_cost:
                best_cost, best_hubs = float(costs[j]), [*chosen, xs[j]]
            return
        for i in range(idx, len(free) - left + 1):
            if out_of_time:
                return
            x = free[i]
            walk(moves.add(state, x), [*chosen, x], i + 1, left - 1, fixed_so_far + float(fixed[x]))

    walk(base, list(forced), 0, need, base_fixed)
    if out_of_time or best_hubs is None:
        return None
    return HubSetOptimum(
        sorted(best_hubs),
        best_cost,
        math.comb(len(free), need),
        time.perf_counter() - t0,
    )
