"""Single allocation with p hubs: allocations screened out before the path relaxation.

The path relaxation (:mod:`hubnet.pathlp`) proves single-allocation plans
optimal, but at 25 sites it has 180,000 columns and HiGHS needs 1-3 s for
it. Most of those columns cannot be in any plan cheaper than a good
starting plan, and a bound computed for every hub set finds which.

For a hub set H, a plan's cost splits over the terminals: each pair {i, j}
is priced half from i's side and half from j's. From i's side, with i on
hub k, the pair costs at least the cheapest way through some hub m of H for
j (its own collection and distribution of the pair's volume included);
each terminal then takes its cheapest hub. So

    LB(H) = sum_i min_{k in H} A_H[i, k] + sum_{k in H} fixed[k],
    A_H[i, k] = 1/2 L[i, k] + 1/2 l[i, i, k]
                + 1/2 sum_{j != i} min_{m in H} (T[i, j, k, m] + l[j, i, m]),

where ``l[i, j, k]`` is the part of terminal i's collection, handling and
distribution cost with hub k that belongs to its volume to and from j
(``L[i, k]`` its sum over j), and ``T`` the transfer of the pair's two
directions between hubs k and m (with the second hub's handling). A hub of
H is allocated to itself, for i and for j. The bound is at least the
multiple-allocation optimum of H (each pair takes its own cheapest route in
that), and much closer to single allocation: on CAB, 25 cities, it lies
within 1-6 % of the optimum where the multiple-allocation bound is 20-50 %
off at transfer factor 1.0.

An allocation "i to hub k" can be in a plan cheaper than the start only if
some hub set H that holds k has ``LB(H) - min_k' A_H[i, k'] + A_H[i, k]``
at most the start's cost. The others are left out of the relaxation
(AP, 25 sites, 3 hubs: 75 of 625 allocations left, the relaxation solved
in 0.03 s instead of 1.0 s).

The sets are walked depth first in index order. A node keeps, for every
pair and every hub k, the cheapest ``T + l`` over its hubs so far (one
O(n^2 q) step from its parent); the last level is priced for all remaining
candidates in one numpy pass, so the work is about C(q, p) n^2 p.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np

from hubnet.config import HubModelParams
from hubnet.data import NetworkData
from hubnet.heuristics import _Pricer
from hubnet.hubsets import single_hub_choices

#: Largest screening done, in (hub sets) x (site pairs) x (hubs per set):
#: CAB, 25 cities, 4 hubs is 3.2e7.
MAX_WORK = 40_000_000
#: Largest pair-by-hub-pair table kept in memory, elements (8 bytes each).
MAX_TABLE = 2_000_000
#: Relative slack on the start's cost when comparing bounds with it, for
#: rounding in the sums.
REL_TOL = 1e-9
#: Hub sets of smallest bound priced exactly when no plan is in hand.
TOP_SETS = 20


@dataclass(frozen=True)
class Screen:
    """Which allocations a plan cheaper than the start may use.

    Attributes
    ----------
    allowed
        ``(n, n)`` booleans: ``allowed[i, k]`` when terminal i on hub k may
        be in a plan costing no more than the start.
    bound
        The smallest LB(H) over every hub set: a lower bound on every
        plan's cost, currency per day.
    sets
        Hub sets priced.
    sets_kept
        Hub sets whose bound is at most the start's cost.
    seconds
        Wall time, s.
    plan
        Without an incumbent given: the plan priced to serve as one, as
        ``(hubs, assign, cost)`` (site indices; currency per day).
    """

    allowed: np.ndarray
    bound: float
    sets: int
    sets_kept: int
    seconds: float
    plan: tuple[list[int], np.ndarray, float] | None = None


def screening_work(data: NetworkData, params: HubModelParams) -> int | None:
    """(hub sets) x (site pairs) x (hubs per set) that :func:`screen_allocations` prices.

    ``None`` when screening does not apply (not single allocation, sort
    capacities, a free number of hubs, nothing left to choose) or its table
    of pair costs would be too large.
    """
    found = single_hub_choices(data, params)
    return None if found is None else _work(data, params, found)


def _work(
    data: NetworkData, params: HubModelParams, found: tuple[list[int], list[int], int]
) -> int | None:
    """:func:`screening_work` once the hub choices ``found`` are known."""
    forced, free, need = found
    q = len(forced) + len(free)
    if data.n * data.n * q * q > MAX_TABLE:
        return None
    return math.comb(len(free), need) * data.n * data.n * (params.hubs or 1)


def _pair_terms(pr: _Pricer, hubs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The bound's terms over the hubs ``hubs`` (site indices), currency per day.

    Returns ``half_own[i, a]`` (``(n, p)``): half of terminal i's own
    collection, handling and distribution with hub ``hubs[a]``, its volume
    to itself counted whole; and ``Q[i, j, a, b]`` (``(n, n, p, p)``): half
    of the pair's transfer via hubs a (i) and b (j) plus j's own cost of
    the pair with hub b; 0 for j == i.
    """
    n = pr.w.shape[0]
    ar = np.arange(n)
    w = np.asarray(pr.w, dtype=float)
    # share[i, j, a]: terminal i's cost with hub hubs[a] for its volume to and from j.
    share = (
        w[:, :, None] * (pr.c[:, hubs] + pr.handling[hubs][None, :])[:, None, :]
        + w.T[:, :, None] * pr.dist[hubs, :].T[:, None, :]
    )
    half_own = 0.5 * (share.sum(axis=1) + share[ar, ar])
    t2 = pr.t2[np.ix_(hubs, hubs)]
    q = 0.5 * (
        w[:, :, None, None] * t2[None, None, :, :]
        + w.T[:, :, None, None] * t2.T[None, None, :, :]
        + np.transpose(share, (1, 0, 2))[:, :, None, :]
    )
    q[ar, ar] = 0.0
    return half_own, q


def screen_allocations(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    incumbent: float | None,
    *,
    time_limit_s: float | None = None,
    allowed: np.ndarray | None = None,
) -> Screen | None:
    """Screen the allocations against a plan in hand costing ``incumbent``.

    With no plan in hand (``incumbent`` ``None``) the :data:`TOP_SETS` hub
    sets of smallest bound are allocated by the local search's rule and
    priced exactly, and the cheapest of those plans is the incumbent (and
    :attr:`Screen.plan`): on AP and CAB, 25 sites, it equalled or beat the
    swap search's start in 26 of 28 cases (1 % dearer at transfer factor
    1.0, 3 and 4 hubs), at a fifth of its time.

    Parameters
    ----------
    data
        Validated network.
    d
        ``(n, n)`` distances, km.
    params
        Single allocation, a fixed hub count, no sort capacities.
    incumbent
        Cost of a plan in hand, currency per day; ``None``: none.
    time_limit_s
        Give up (``None`` returned) after this long, s.
    allowed
        ``(n, n)`` booleans from an earlier round (``None``: all): the
        allocations ruled out there are left out of both ends of every
        pair, which tightens every set's bound (CAB, 25 cities, 2 hubs,
        transfer factor 0.8: 306 allocations left, then 274, then 243).

    Returns
    -------
    Screen or None
        ``None`` when screening does not apply, is too large
        (:data:`MAX_WORK`) or ran out of time.
    """
    found = single_hub_choices(data, params)
    work = None if found is None else _work(data, params, found)
    if found is None or work is None or work > MAX_WORK:
        return None
    if incumbent is not None and not np.isfinite(incumbent):
        return None
    forced, free, need = found
    t0 = time.perf_counter()
    deadline = None if time_limit_s is None else t0 + time_limit_s
    n = data.n
    cand = np.array(sorted(forced + free), dtype=np.int64)
    q = len(cand)
    pos = {int(k): a for a, k in enumerate(cand)}

    pr = _Pricer(data, d, params)
    half_own, Q = _pair_terms(pr, cand)
    if allowed is not None:
        # Allocations already ruled out: neither end of a pair may use them.
        ruled_out = ~allowed[:, cand]  # (n, q)
        half_own = np.where(ruled_out, np.inf, half_own)
        Q = np.where(ruled_out[None, :, None, :], np.inf, Q)
    # Hub-major, so that a hub's (n, n) block is contiguous: Qt[b, a, i, j].
    Qt = np.ascontiguousarray(np.transpose(Q, (3, 2, 0, 1)))
    del Q
    fixed = pr.fixed[cand]

    keep = np.zeros((n, q), dtype=bool)
    best = math.inf
    kept = 0
    out_of_time = False
    # Without an incumbent every set is kept until one is priced: its
    # bound, its (n, p) table and its hubs' candidate positions.
    stored: list[tuple[np.ndarray, np.ndarray, np.ndarray]] = []

    def keep_fitting(lb: np.ndarray, a: np.ndarray, sets: np.ndarray, limit: float) -> None:
        """Mark the allocations of sets whose bound, with the allocation, is within ``limit``.

        ``lb`` (sets,), ``a`` (sets, n, p) the terminals' terms, ``sets``
        (sets, p) the hubs' candidate positions, in ``a``'s column order.
        """
        nonlocal kept
        ok = np.flatnonzero(lb <= limit)
        kept += len(ok)
        if not len(ok):
            return
        rowmin = a[ok].min(axis=2)  # (sets, n)
        # Terminal i on hub c, given the set: the bound with i's term on c.
        fits = lb[ok, None, None] - rowmin[:, :, None] + a[ok] <= limit  # (sets, n, p)
        for c in range(sets.shape[1]):
            col = sets[ok, c]
            if np.all(col == col[0]):
                keep[:, col[0]] |= fits[:, :, c].any(axis=0)
            else:  # each set's own hub: at most once per position in a batch
                np.logical_or.at(keep.T, col, fits[:, :, c])

    free_pos = [pos[k] for k in free]

    def add(m: np.ndarray, hub_pos: list[int], b: int) -> np.ndarray:
        """The node's table with hub b added; ``m[a, i, j]``: cheapest over its hubs.

        A terminal j that is a hub itself uses its own hub.
        """
        out = np.minimum(m, Qt[b])
        for c in [*hub_pos, b]:
            out[:, :, cand[c]] = Qt[c, :, :, cand[c]]
        return out

    def leaves(m: np.ndarray, hub_pos: list[int], xs: np.ndarray) -> None:
        """Price H + {x} for every x in ``xs`` (candidate positions)."""
        nonlocal best
        hp = np.asarray(hub_pos, dtype=np.int64)
        h = len(hp)
        sites_h = cand[hp]
        sx = cand[xs]  # the sites of the new hubs
        nx = len(xs)
        ar = np.arange(nx)
        # a[x, i, c]: terminal i on hub hp[c] (c < h) or on the new hub x (c == h).
        a = np.empty((nx, n, h + 1))
        if h:
            mh = m[hp]  # (h, n, n)
            g = np.minimum(mh[None], Qt[xs[:, None], hp[None, :]])  # (nx, h, n, n)
            g[:, :, :, sites_h] = mh[None][:, :, :, sites_h]
            g[ar, :, :, sx] = Qt[xs[:, None], hp[None, :], :, sx[:, None]]
            a[:, :, :h] = np.transpose(g.sum(axis=3), (0, 2, 1)) + half_own[:, hp][None]
        mx = m[xs]  # (nx, n, n)
        gx = np.minimum(mx, Qt[xs, xs])
        gx[:, :, sites_h] = mx[:, :, sites_h]
        gx[ar, :, sx] = Qt[xs, xs, :, sx]
        a[:, :, h] = gx.sum(axis=2) + half_own[:, xs].T
        # Hubs allocate to themselves.
        for c, s in enumerate(sites_h):
            own = a[:, s, c].copy()
            a[:, s, :] = np.inf
            a[:, s, c] = own
        own_x = a[ar, sx, h].copy()
        a[ar, sx, :] = np.inf
        a[ar, sx, h] = own_x
        rowmin = a.min(axis=2)  # (nx, n)
        lb = rowmin.sum(axis=1) + fixed[hp].sum() + fixed[xs]
        best = min(best, float(lb.min()))
        sets = np.concatenate([np.broadcast_to(hp, (nx, h)), xs[:, None]], axis=1)
        if incumbent is None:
            stored.append((lb, a, sets))
        else:
            keep_fitting(lb, a, sets, _limit(incumbent))

    def walk(m: np.ndarray, hub_pos: list[int], idx: int, left: int) -> None:
        nonlocal out_of_time
        if out_of_time:
            return
        if deadline is not None and time.perf_counter() > deadline:
            out_of_time = True
            return
        if left == 1:
            leaves(m, hub_pos, np.asarray(free_pos[idx:], dtype=np.int64))
            return
        for t in range(idx, len(free_pos) - left + 1):
            b = free_pos[t]
            walk(add(m, hub_pos, b), [*hub_pos, b], t + 1, left - 1)

    forced_pos = [pos[k] for k in forced]
    m0 = np.full((q, n, n), np.inf)
    for t, b in enumerate(forced_pos):
        m0 = add(m0, forced_pos[:t], b)
    walk(m0, forced_pos, 0, need)
    if out_of_time:
        return None
    plan = None
    if incumbent is None:
        lb = np.concatenate([t[0] for t in stored])
        a = np.concatenate([t[1] for t in stored])
        sets = np.concatenate([t[2] for t in stored])
        plan = _cheapest_of(pr, cand, sets[np.argsort(lb, kind="stable")[:TOP_SETS]])
        if plan is None:
            return None
        incumbent = plan[2]
        keep_fitting(lb, a, sets, _limit(incumbent))
    full = np.zeros((n, n), dtype=bool)
    full[:, cand] = keep
    return Screen(
        allowed=full,
        bound=best,
        sets=math.comb(len(free), need),
        sets_kept=kept,
        seconds=time.perf_counter() - t0,
        plan=plan,
    )


def set_bound(pr: _Pricer, hubs: list[int]) -> float:
    """LB(H) of the module's docstring for one hub set, currency per day.

    ``pr`` prices the network; ``hubs`` are site indices. The same bound
    the screen computes for every set, here for one set at O(n^2 p^2):
    AP, 100 sites, 3 hubs, about 5 ms. It is at most the cost of every
    single-allocation plan with exactly these hubs.
    """
    h = np.asarray(sorted(hubs), dtype=np.int64)
    half_own, q = _pair_terms(pr, h)
    for b, site in enumerate(h):  # a hub is allocated to itself: j = site uses h[b] only
        q[:, site, :, :b] = np.inf
        q[:, site, :, b + 1 :] = np.inf
    a = half_own + q.min(axis=3).sum(axis=1)  # (n, p)
    for c, site in enumerate(h):
        own = a[site, c]
        a[site, :] = np.inf
        a[site, c] = own
    return float(a.min(axis=1).sum() + pr.fixed[h].sum())


def _limit(incumbent: float) -> float:
    """The incumbent's cost with :data:`REL_TOL` of slack for rounding."""
    return incumbent + REL_TOL * max(1.0, abs(incumbent))


def _cheapest_of(
    pr: _Pricer, cand: np.ndarray, sets: np.ndarray
) -> tuple[list[int], np.ndarray, float] | None:
    """The cheapest plan over ``sets`` (rows of candidate positions), each allocated.

    Each set's terminals are allocated as the local search allocates them
    (cheapest collection and distribution, then single moves) and the plan
    priced exactly. Returns hubs and allocation (site indices) and cost,
    currency per day; ``None`` when no set could be allocated.
    """
    best: tuple[list[int], np.ndarray, float] | None = None
    for row in sets:
        hubs = sorted(int(k) for k in cand[row])
        assign = pr.allocate(hubs)
        if assign is None:
            continue
        cost = pr.assigned_cost(hubs, assign)
        if best is None or cost < best[2]:
            best = (hubs, np.asarray(assign, dtype=np.int64), cost)
    return best
