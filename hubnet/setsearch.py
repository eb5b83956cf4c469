"""Single allocation with p hubs on larger networks: few hub sets left, each allocated exactly.

Above about 30 sites the path relaxation (:mod:`hubnet.pathlp`) has too
many columns to build and the per-set screen (:mod:`hubnet.screen`) too
large a table, and the flow model's MILP takes minutes (AP, 100 sites,
2 hubs: its LP alone not solved in 150 s). But a hub set's cost under
multiple allocation is a lower bound on its cost under single allocation
(every single-allocation route is one of the routes multiple allocation
chooses among), and on the AP networks that bound is within 1-3 % of the
single-allocation optimum: of the 1,225-230,300 hub sets of AP, 50 sites,
2-4 hubs, only 5-20 have a bound below a good starting plan's cost.

So:

1. every hub set is priced under multiple allocation
   (:func:`~hubnet.hubsets.hub_sets_within`: at most O(C(q, p) n^2), but
   most sets are ruled out by an O(n) bound first), keeping those whose
   bound is below the plan in hand;
2. the sets kept are bounded again, each by the screen's tighter per-set
   bound (:func:`~hubnet.screen.set_bound`, O(n^2 p^2));
3. those still below the best plan are allocated exactly, cheapest bound first: the path
   relaxation with only that set's hubs open (a few thousand to a hundred
   thousand columns, 0.01-0.2 s), branched on when it is fractional, with
   the best plan so far as the cut-off;
4. the search stops when the next set's bound reaches the best plan's cost.

Every hub set is then either allocated exactly or bounded above the best
plan, so that plan is optimal. It applies when the enumeration's work,
C(q, p) n^2, is at most :data:`MAX_WORK`; the enumeration gets at most
half the time limit.
"""

from __future__ import annotations

import dataclasses
import math
import time
from dataclasses import dataclass

import numpy as np

from hubnet.config import HubModelParams
from hubnet.data import NetworkData
from hubnet.heuristics import _Pricer, single_allocation_cost
from hubnet.hubsets import hub_sets_within, single_hub_choices, split_workers, walk_work
from hubnet.pathlp import branch_on_path, relax_path
from hubnet.screen import set_bound

#: Largest enumeration, in (hub sets) x (OD pairs), C(q, p) n^2: AP, 100
#: sites, 4 hubs is 3.9e10 (11 s on the benchmark machine, most sets
#: ruled out by the bound of :mod:`hubnet.hubsets`); 5 hubs, 7.5e11, took
#: 225 s on one process and 129 s on two, then 71 s of exact allocations,
#: where the flow model proves nothing in 300 s. Larger walks are left to
#: the flow model.
MAX_WORK = 1_000_000_000_000
#: Work the enumeration gets through per second and process, for deciding
#: whether it fits the time limit: below the 1-4e9 measured on AP with the
#: bound.
WORK_PER_S = 1_000_000_000
#: Most hub sets kept by the first bound that the search goes on with.
MAX_KEPT = 5_000
#: Wall time the exact allocations may take: this share of the
#: enumeration's time (on one process: its wall time times the processes
#: it was split over), and at least :data:`MIN_ALLOCATE_S` (AP, 100
#: sites, 3 hubs: 1.4 s after 4.3 s).
ALLOCATE_SHARE = 2.0
MIN_ALLOCATE_S = 5.0
#: Relative tolerance when comparing a bound with a plan's cost (rounding
#: in the sums).
REL_TOL = 1e-9


@dataclass(frozen=True)
class SetSearch:
    """The outcome of the search.

    Attributes
    ----------
    hubs, assign, cost
        The best plan found: hubs (matrix indices, ascending), each site's
        hub, its cost in currency per day.
    stopped
        Why not every hub set was allocated exactly or bounded at or above
        ``cost`` (see :attr:`proven`): ``"time limit"``, ``"too many hub sets"`` (more
        than :data:`MAX_KEPT` kept, or the allocations past their budget),
        or ``"a plan priced unlike its relaxation"``; else empty.
    sets
        Hub sets priced under multiple allocation.
    kept
        Of those, the sets whose bound was below the starting plan's cost.
    ruled_out
        Sets kept whose per-set bound (:func:`~hubnet.screen.set_bound`)
        then reached the best plan's cost.
    allocated
        Sets allocated exactly before the search stopped.
    nodes
        Branch-and-bound nodes over all exact allocations.
    bound_seconds, allocate_seconds
        Wall time of the enumeration and of the exact allocations, s.
    """

    hubs: list[int]
    assign: np.ndarray
    cost: float
    stopped: str
    sets: int
    kept: int
    ruled_out: int
    allocated: int
    nodes: int
    bound_seconds: float
    allocate_seconds: float

    @property
    def proven(self) -> bool:
        """Every hub set was allocated exactly or bounded at or above ``cost``."""
        return not self.stopped


def search_work(data: NetworkData, params: HubModelParams) -> int | None:
    """(hub sets) x (OD pairs) the enumeration prices; ``None`` when the search does not apply.

    It applies to single allocation with a fixed hub count, no sort
    capacities and a hub left to choose.
    """
    found = single_hub_choices(data, params)
    return None if found is None else walk_work(found, data.n)


def allocate_hub_set(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    hubs: list[int],
    cutoff: float,
    *,
    threads: int | None = None,
    time_limit_s: float | None = None,
) -> tuple[float, np.ndarray | None, int] | None:
    """The cheapest single allocation to exactly ``hubs``, if it is below ``cutoff``.

    The path relaxation with only these hubs open (the others closed, these
    forced open), branched on when fractional, with ``cutoff`` (currency
    per day) as the incumbent's cost. Returns ``(cost, assign, nodes)``:
    the plan's cost and each site's hub when one below ``cutoff`` exists,
    else ``(bound, None, nodes)`` with a bound at or above ``cutoff``;
    ``None`` when the relaxation or the search did not finish in
    ``time_limit_s`` (s).
    """
    t0 = time.perf_counter()
    chosen = set(hubs)
    sites = tuple(
        dataclasses.replace(s, hub_status="open" if k in chosen else "closed")
        for k, s in enumerate(data.sites)
    )
    out = relax_path(
        dataclasses.replace(data, sites=sites),
        d,
        params,
        threads=threads,
        time_limit_s=time_limit_s,
    )
    if out is None:
        return None
    relaxed, model = out
    limit = cutoff - REL_TOL * max(1.0, abs(cutoff))
    if relaxed.objective >= limit:
        return relaxed.objective, None, 0
    if relaxed.assign is not None:
        return relaxed.objective, relaxed.assign, 0
    left = None if time_limit_s is None else max(time_limit_s - (time.perf_counter() - t0), 0.01)
    plan = branch_on_path(model, relaxed, (cutoff, None), time_limit_s=left, gap=REL_TOL)
    if not plan.proven:
        return None
    if plan.assign is None:
        return max(plan.bound, cutoff), None, plan.nodes
    return plan.objective, plan.assign, plan.nodes


def search_hub_sets(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    start: tuple[list[int], np.ndarray, float],
    *,
    threads: int | None = None,
    time_limit_s: float | None = None,
    workers: int = 1,
) -> SetSearch | None:
    """The optimal single-allocation plan with ``params.hubs`` hubs, or the best found in time.

    Parameters
    ----------
    data
        Validated network.
    d
        ``(n, n)`` distances, km.
    params
        Single allocation, a fixed hub count, no sort capacities.
    start
        A plan in hand: hubs, each site's hub (matrix indices) and its cost
        (currency per day), e.g. from local search.
    threads
        HiGHS threads for the exact allocations.
    time_limit_s
        Wall time the search may take, s.
    workers
        Processes the hub sets' pricing may be split over
        (:func:`~hubnet.hubsets.split_workers`).

    Returns
    -------
    SetSearch or None
        ``None`` when the search does not apply or the enumeration did not
        finish in half of ``time_limit_s``; a :class:`SetSearch` with ``proven`` False when
        the exact allocations ran out of time (its plan is the best found).
    """
    choices = single_hub_choices(data, params)
    if choices is None:
        return None
    t0 = time.perf_counter()
    deadline = None if time_limit_s is None else t0 + time_limit_s
    best_hubs, best_assign, best = list(start[0]), np.asarray(start[1]), float(start[2])
    limit = best + REL_TOL * max(1.0, abs(best))
    # At most half the time: cut short, the flow model gets the rest.
    sets = hub_sets_within(
        data,
        d,
        params,
        limit,
        time_limit_s=None if time_limit_s is None else 0.5 * time_limit_s,
        workers=workers,
    )
    if sets is None:
        return None
    t1 = time.perf_counter()
    # Where the bound is weak (transfer factor near 1: CAB, 25 cities, 4
    # hubs, alpha 1.0: 8,371 sets kept, 2,985 to allocate, 42 s) the flow
    # model is the better tool: give up early rather than allocate them all.
    # Measured on one process: a walk split over several ends sooner, and
    # the allocations after it stay on one.
    parts = split_workers(workers, walk_work(choices, data.n))
    budget = max(MIN_ALLOCATE_S, ALLOCATE_SHARE * parts * (t1 - t0))
    stopped = "too many hub sets" if len(sets) > MAX_KEPT else ""
    pr = _Pricer(data, d, params)
    allocated = nodes = ruled_out = 0
    for bound, hubs in [] if stopped else sets:
        if bound >= best - REL_TOL * max(1.0, abs(best)):
            break
        now = time.perf_counter()
        left = None if deadline is None else deadline - now
        if left is not None and left <= 0:
            stopped = "time limit"
            break
        if now - t1 > budget:
            stopped = "too many hub sets"
            break
        if set_bound(pr, hubs) >= best - REL_TOL * max(1.0, abs(best)):
            ruled_out += 1
            continue
        found = allocate_hub_set(data, d, params, hubs, best, threads=threads, time_limit_s=left)
        if found is None:
            stopped = "time limit"
            break
        cost, assign, used = found
        allocated += 1
        nodes += used
        if assign is not None:
            # Priced again from the allocation: the relaxation's objective
            # must be the plan's cost.
            priced = single_allocation_cost(data, d, params, assign)
            if abs(priced - cost) > 1e-6 * max(1.0, abs(cost)):
                stopped = "a plan priced unlike its relaxation"
                break
            if priced < best:
                best_hubs, best_assign, best = sorted(set(assign.tolist())), assign, priced
    return SetSearch(
        hubs=[int(k) for k in best_hubs],
        assign=np.asarray(best_assign, dtype=np.int64),
        cost=best,
        stopped=stopped,
        sets=math.comb(len(choices[1]), choices[2]),
        kept=len(sets),
        ruled_out=ruled_out,
        allocated=allocated,
        nodes=nodes,
        bound_seconds=t1 - t0,
        allocate_seconds=time.perf_counter() - t1,
    )


__all__ = [
    "MAX_WORK",
    "WORK_PER_S",
    "SetSearch",
    "allocate_hub_set",
    "search_hub_sets",
    "search_work",
]
