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
from collections.abc import Iterator
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


def single_hub_choices(
    data: NetworkData, params: HubModelParams
) -> tuple[list[int], list[int], int] | None:
    """:func:`hub_choices` for single allocation with a hub left to choose, else ``None``."""
    found = hub_choices(data, params) if params.allocation == "single" else None
    return None if found is None or found[2] < 1 else found


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


def _leaves(
    moves: _MultipleMoves,
    found: tuple[list[int], list[int], int],
    deadline: float | None,
) -> Iterator[tuple[np.ndarray, list[int], list[int]]]:
    """Every set of the forced hubs plus ``need`` free ones, priced, in batches.

    Yields ``(costs, chosen, xs)``: the hub sets ``chosen + [x]`` for each x
    in ``xs`` cost ``costs`` (routing and fixed, currency per day, under
    multiple allocation). Stops early (``TimeoutError``) past ``deadline``
    (a ``time.perf_counter()`` value).
    """
    forced, free, need = found
    fixed = moves.fixed
    base = moves.state(forced) if forced else moves.empty()
    base_fixed = float(fixed[forced].sum())
    if need == 0:
        # The forced hubs are the set: as ``chosen`` plus the last of them.
        yield np.array([moves.total(base[0]) + base_fixed]), list(forced[:-1]), list(forced[-1:])
        return
    fixed_free = fixed[np.asarray(free, dtype=np.int64)]

    def walk(
        state: tuple[np.ndarray, np.ndarray, np.ndarray],
        chosen: list[int],
        idx: int,
        left: int,
        fixed_so_far: float,
    ) -> Iterator[tuple[np.ndarray, list[int], list[int]]]:
        if deadline is not None and time.perf_counter() > deadline:
            raise TimeoutError
        if left == 1:
            xs = free[idx:]
            priced = moves.with_each(state, xs)
            yield priced + fixed_so_far + fixed_free[idx:], chosen, xs
            return
        for i in range(idx, len(free) - left + 1):
            x = free[i]
            yield from walk(
                moves.add(state, x), [*chosen, x], i + 1, left - 1, fixed_so_far + float(fixed[x])
            )

    yield from walk(base, list(forced), 0, need, base_fixed)


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
    t0 = time.perf_counter()
    deadline = None if time_limit_s is None else t0 + time_limit_s
    moves = _MultipleMoves(_Pricer(data, d, params))
    best_cost, best_hubs = math.inf, None
    try:
        for costs, chosen, xs in _leaves(moves, found, deadline):
            j = int(np.argmin(costs))
            if costs[j] < best_cost:
                best_cost, best_hubs = float(costs[j]), [*chosen, xs[j]]
    except TimeoutError:
        return None
    if best_hubs is None:
        return None
    _forced, free, need = found
    return HubSetOptimum(
        sorted(best_hubs),
        best_cost,
        math.comb(len(free), need),
        time.perf_counter() - t0,
    )


def hub_sets_within(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    limit: float,
    *,
    time_limit_s: float | None = None,
) -> list[tuple[float, list[int]]] | None:
    """Every set of ``params.hubs`` hubs whose multiple-allocation cost is at most ``limit``.

    Under single allocation each OD pair of a hub set is routed through its
    origin's hub and its destination's, one of the routes multiple
    allocation chooses among, so a set's multiple-allocation cost is a lower
    bound on every single-allocation plan with those hubs (and the same
    for any allocation rule). ``params`` may say either allocation; the
    sets are priced under multiple allocation. ``limit`` is in currency per
    day.

    Returns
    -------
    list or None
        ``(cost, hubs)`` pairs (hubs as matrix indices, ascending), cheapest
        first; ``None`` without a fixed hub count, with sort capacities, or
        out of time (``time_limit_s``, s).
    """
    found = hub_choices(data, params)
    if found is None:
        return None
    deadline = None if time_limit_s is None else time.perf_counter() + time_limit_s
    moves = _MultipleMoves(_Pricer(data, d, params))
    out: list[tuple[float, list[int]]] = []
    try:
        for costs, chosen, xs in _leaves(moves, found, deadline):
            for j in np.flatnonzero(costs <= limit):
                out.append((float(costs[j]), sorted([*chosen, xs[j]])))
    except TimeoutError:
        return None
    out.sort()
    return out
