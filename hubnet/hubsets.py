"""Multiple allocation with a fixed number of hubs: every hub set priced or bounded, exactly.

Under multiple allocation without sort capacities each OD pair simply takes
its cheapest route through the open hubs, so a hub set's cost is a sum of
minima that :class:`~hubnet.heuristics._MultipleMoves` computes exactly in
O(n^2) per added hub. With p hubs out of q candidates there are C(q, p)
sets; when that times n^2 is small (CAB, 25 cities, 4 hubs: 12,650 sets of
625 pairs) pricing them all is a proof of optimality that needs no solver
and takes a fraction of a second, where the MILP (Benders) needs 1-2 s.

The sets are walked depth first. A node holds the route
costs of its hubs so far (one O(n^2) step from its parent); its last level
prices every remaining candidate at once, so the work is about C(q, p) n^2.

Most sets need not be priced at all. Every route from i to j through hubs
k and m costs at least the way from i to its nearest open hub plus the
way from j's nearest open hub to j (the transfer is not negative), and,
on a metric, at least ``alpha * d(i, j) + (chi - alpha) * d(i, k) +
(delta - alpha) * d(m, j)`` (triangle inequality). Both
bounds are sums over sites of a distance to the nearest open hub, priced
in O(n) per set (:class:`_NearestHubBound`), and a p-median sum gains less
from each added hub the more hubs are open, which bounds whole subtrees.
Only the sets whose bound is within the limit are priced exactly (AP, 100
sites, 4 hubs, the single-allocation start as the limit: 213,137 of
3,921,225).
"""

from __future__ import annotations

import math
import multiprocessing
import os
import time
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from hubnet.config import HubModelParams
from hubnet.data import NetworkData
from hubnet.heuristics import _MultipleMoves, _Pricer

#: Largest enumeration, in (hub sets) x (OD pairs), C(q, p) n^2 (the work
#: without the bound). With the bound, on the benchmark machine: AP, 50
#: sites, 5 hubs (5.3e9) 4.2 s, where Benders took 6.5 s; AP, 100 sites, 4
#: hubs (3.9e10) 9.8 s against 31 s. AP, 100 sites, 5 hubs (7.5e11) is
#: left to Benders.
MAX_WORK = 50_000_000_000
#: Work per second, for deciding whether the enumeration fits a time
#: limit: 0.6-4e9 measured on AP with the bound.
WORK_PER_S = 1_000_000_000
#: Shortest walk (likely seconds on one process) worth splitting over
#: processes: starting one takes about half a second.
SPLIT_MIN_S = 2.0
#: Relative difference under which two hub sets' costs count as tied
#: (below :data:`BOUND_TOL`, so that no tied set is pruned).
TIE_TOL = 1e-11
#: Relative slack before a bound counts as above the limit (rounding in
#: the sums).
BOUND_TOL = 1e-9


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
        Number of hub sets covered: all of them, C(q - forced, p - forced),
        each priced or bounded above the cheapest.
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
    return None if found is None else walk_work(found, data.n)


def walk_work(found: tuple[list[int], list[int], int], n: int) -> int:
    """(hub sets) x (OD pairs), C(q, p) n^2, of a walk over the choices ``found``.

    ``found``: forced hubs, free candidates and how many of those to open
    (:func:`hub_choices`); ``n``: sites.
    """
    _forced, free, need = found
    return math.comb(len(free), need) * n * n


def _metric_through(d: np.ndarray, via: list[int], *, rel_tol: float = 1e-12) -> bool:
    """Whether ``d[a, b] <= d[a, c] + d[c, b]`` for all sites a, b and every c in ``via``.

    Then a route from i through hubs k and m of ``via`` to j is at least
    ``d[i, j]`` long, which is all the triangle bound of
    :class:`_NearestHubBound` needs. O(len(via) n^2), stopping at the first
    violation; ``rel_tol`` is relative to the largest distance.
    """
    scale = max(float(np.abs(d).max()), 1.0)
    for c in via:
        if np.any(d[:, c][:, None] + d[c, :][None, :] < d - rel_tol * scale):
            return False
    return True


class _NearestHubBound:
    """Lower bounds on hub sets' multiple-allocation routing costs, O(n) per set.

    Each bound b is ``const[b] + sum_r min_{k in H} matrix[b * 2n + r, k]``
    over 2n rows: row i the volume site i sends times a per-unit cost from
    i to hub k, row n + j the volume j receives times a per-unit cost from
    hub k to j (currency per day).

    * Transfers and handling not negative: collection with the first hub's
      handling, plus distribution; the transfer and the second hub's
      handling are left out.
    * Transfer factor and handling not negative, and distances obeying the
      triangle inequality through the candidate hubs: as ``d(i, k) + d(k,
      m) + d(m, j) >= d(i, j)``, a route costs at least ``rate * (alpha
      d(i, j) + (chi - alpha) d(i, k) + (delta - alpha) d(m, j))`` plus the
      handling at k, and each term's minimum over the set's hubs is below
      its value at the route's own hubs, whatever the factors' signs.

    The sum of per-row minima of a set gains less from each hub added the
    more hubs it has (its savings are submodular), so a set's savings also
    bound those of its supersets. How much the bounds rule out depends on
    the data: on AP, 7 % of the sets of 3 hubs of 40 are left to price; with
    a transfer factor far above the collection and distribution factors,
    or distances that break the triangle inequality, a quarter to a third.
    """

    def __init__(
        self,
        moves: _MultipleMoves,
        d: np.ndarray,
        params: HubModelParams,
        handling: np.ndarray,
        hubs: list[int],
    ) -> None:
        """Build the bounds of one network.

        ``d``: ``(n, n)`` distances, km; ``handling``: each site's handling
        cost as a hub, currency per unit; ``hubs``: the candidate hubs
        (matrix indices) the sets are drawn from.
        """
        w = moves.w
        sent, received = w.sum(axis=1), w.sum(axis=0)
        blocks: list[np.ndarray] = []
        consts: list[float] = []
        if moves.t2.min() >= 0:
            blocks.append(np.vstack([sent[:, None] * moves.c, received[:, None] * moves.dist.T]))
            consts.append(0.0)
        rate = params.cost_per_unit_km
        chi, alpha = params.collection_factor, params.transfer_factor
        delta = params.distribution_factor
        if rate * alpha >= 0 and handling.min() >= 0 and _metric_through(d, hubs):
            collect = rate * (chi - alpha) * d + handling[None, :]
            deliver = rate * (delta - alpha) * d.T
            blocks.append(np.vstack([sent[:, None] * collect, received[:, None] * deliver]))
            consts.append(rate * alpha * float(np.where(w > 0, w * d, 0.0).sum()))
        #: ``(b * 2n, n)``: the bounds' weighted costs stacked, one column per hub.
        self.matrix = np.vstack(blocks) if blocks else np.zeros((0, len(w)))
        #: ``(b,)``: the bounds' constant parts, currency per day.
        self.const = np.array(consts)

    def __bool__(self) -> bool:
        return len(self.const) > 0

    def savings(self, rows: np.ndarray, cols: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """A set's bounds and what each hub added to it would save.

        ``rows``: the set's ``(b * 2n,)`` nearest-hub costs (the minimum of
        its hubs' columns of :attr:`matrix`); ``cols``: ``(b * 2n, m)``,
        the columns of m hubs. Returns the bounds ``(b,)`` and the savings
        ``(b, m)``, currency per day.
        """
        b = len(self.const)
        values = self.const + rows.reshape(b, -1).sum(axis=1)
        gain = np.maximum(rows[:, None] - cols, 0.0)
        return values, gain.reshape(b, len(rows) // b, cols.shape[1]).sum(axis=1)


class _LazyState:
    """A node's route-cost state (:meth:`_MultipleMoves.add`), computed when first asked for."""

    __slots__ = ("_moves", "_parent", "_x", "_value")

    def __init__(
        self,
        moves: _MultipleMoves,
        parent: _LazyState | None,
        x: int,
        value: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None,
    ) -> None:
        self._moves, self._parent, self._x, self._value = moves, parent, x, value

    def get(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """The state: route costs, currency per unit (see :class:`_MultipleMoves`)."""
        if self._value is None:
            assert self._parent is not None
            self._value = self._moves.add(self._parent.get(), self._x)
            self._parent = None
        return self._value


def _leaves(
    moves: _MultipleMoves,
    found: tuple[list[int], list[int], int],
    deadline: float | None,
    bound: _NearestHubBound | None = None,
    limit: Callable[[], float] | None = None,
    part: tuple[int, int] = (0, 1),
) -> Iterator[tuple[np.ndarray, list[int], list[int]]]:
    """The sets of the forced hubs plus ``need`` free ones, priced, in batches.

    Yields ``(costs, chosen, xs)``: the hub sets ``chosen + [x]`` for each x
    in ``xs`` cost ``costs`` (routing and fixed, currency per day, under
    multiple allocation). With ``bound`` and ``limit`` (the current limit,
    currency per day), sets and whole subtrees whose bound is above the
    limit are left out; every set within it is yielded. Stops early
    (``TimeoutError``) past ``deadline`` (a ``time.perf_counter()`` value).

    ``part = (r, parts)`` walks only part r of ``parts``: the sets whose
    first two free hubs (the first one when only one is free) sit at
    positions adding up to r modulo ``parts`` in the walk's candidate
    order. The parts are disjoint and together hold every set, whatever
    the limit does in each, and split the work about evenly.
    """
    forced, free, need = found
    fixed = moves.fixed
    base = moves.state(forced) if forced else moves.empty()
    base_fixed = float(fixed[forced].sum())
    if need == 0:
        if part[0] != 0:
            return  # the one set is part 0's
        # The forced hubs are the set: as ``chosen`` plus the last of them.
        yield np.array([moves.total(base[0]) + base_fixed]), list(forced[:-1]), list(forced[-1:])
        return
    free_arr = np.asarray(free, dtype=np.int64)
    use_bound = bound is not None and bool(bound) and limit is not None
    cols = None
    rows0 = None
    if bound is not None and use_bound:
        rows0 = bound.matrix[:, forced].min(axis=1) if forced else None
        # Candidates of smallest bound first: a subtree holds only the
        # candidates after its last hub, so the late subtrees, of weak
        # candidates, are ruled out whole (AP, 100 sites, 4 hubs: 40,884
        # sets of 3 hubs visited instead of 107,182 in index order).
        cols = bound.matrix[:, free_arr]
        if rows0 is None:
            alone = bound.const[:, None] + cols.reshape(len(bound.const), -1, len(free)).sum(axis=1)
        else:
            values, saved = bound.savings(rows0, cols)
            alone = values[:, None] - saved
        order = np.argsort(alone.max(axis=0), kind="stable")
        free, free_arr, cols = [free[i] for i in order], free_arr[order], cols[:, order]
    fixed_free = fixed[free_arr]
    # Smallest fixed cost from each position on, for the subtrees' bounds.
    fixed_after = np.minimum.accumulate(fixed_free[::-1])[::-1]

    def over(values: np.ndarray) -> np.ndarray:
        assert limit is not None
        lim = limit()
        return values > lim + BOUND_TOL * max(1.0, abs(lim))

    r, parts = part
    # The level (free hubs chosen) whose positions decide a set's part.
    split_level = min(2, need)

    def mine(key: int, first: int, count: int) -> np.ndarray:
        """Which of the children at positions first.. belong to this part."""
        return (key + first + np.arange(count)) % parts == r

    def walk(
        state: _LazyState,
        rows: np.ndarray | None,
        chosen: list[int],
        idx: int,
        left: int,
        fixed_so_far: float,
        key: int,
    ) -> Iterator[tuple[np.ndarray, list[int], list[int]]]:
        if deadline is not None and time.perf_counter() > deadline:
            raise TimeoutError
        priced_bound = rows is not None
        if priced_bound:
            assert bound is not None and rows is not None and cols is not None
            values, saved = bound.savings(rows, cols[:, idx:])
        # Children at the split level outside this part are left to the others.
        split_here = parts > 1 and need - left + 1 == split_level
        if left == 1:
            xs = free[idx:]
            extra = fixed_free[idx:]
            if split_here:
                keep = np.flatnonzero(mine(key, idx, len(xs)))
                if not len(keep):
                    return
                xs, extra = [xs[i] for i in keep], extra[keep]
                if priced_bound:
                    saved = saved[:, keep]
            if priced_bound:
                lb = (values[:, None] - saved).max(axis=0) + fixed_so_far + extra
                keep = np.flatnonzero(~over(lb))
                if not len(keep):
                    return
                xs, extra = [xs[i] for i in keep], extra[keep]
            priced = moves.with_each(state.get(), xs)
            yield priced + fixed_so_far + extra, chosen, xs
            return
        last = len(free) - left + 1
        skip = np.zeros(last - idx, dtype=bool)
        if priced_bound:
            # A child x's subtree adds left - 1 more hubs after it, each
            # saving at most the most any later candidate saves now.
            more = left - 1
            most = np.maximum.accumulate(saved[:, ::-1], axis=1)[:, ::-1]
            t = np.arange(last - idx)
            sub = (values[:, None] - saved[:, t] - more * most[:, t + 1]).max(axis=0)
            skip = over(
                sub + fixed_so_far + fixed_free[idx:last] + more * fixed_after[idx + 1 : last + 1]
            )
        if split_here:
            skip |= ~mine(key, idx, last - idx)
        for i in range(idx, last):
            if skip[i - idx]:
                continue
            x = free[i]
            yield from walk(
                _LazyState(moves, state, x),
                None
                if cols is None
                else cols[:, i]
                if rows is None
                else np.minimum(rows, cols[:, i]),
                [*chosen, x],
                i + 1,
                left - 1,
                fixed_so_far + float(fixed[x]),
                key + i,
            )

    yield from walk(_LazyState(moves, None, -1, base), rows0, list(forced), 0, need, base_fixed, 0)


def cheapest_hub_set(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    *,
    time_limit_s: float | None = None,
    workers: int = 1,
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
    workers
        Processes to split the walk over (see :func:`split_workers`); the
        parts share the cheapest cost found so far.

    Returns
    -------
    HubSetOptimum or None
        ``None`` when enumeration does not apply or ran out of time.
    """
    found = _choices(data, params)
    if found is None:
        return None
    t0 = time.perf_counter()
    parts = split_workers(workers, walk_work(found, data.n))
    job = _Job("cheapest", data, d, params, math.inf, _wall_deadline(time_limit_s))
    results = _run_parts(job, parts)
    if results is None:
        return None
    pairs = [pair for res in results for pair in res]
    if not pairs:
        return None
    low = min(cost for cost, _hubs in pairs)
    # Ties (to rounding) go to the smallest hub list, whichever part found it.
    best = min((hubs, cost) for cost, hubs in pairs if _tied(cost, low))[::-1]
    _forced, free, need = found
    return HubSetOptimum(
        sorted(best[1]),
        best[0],
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
    workers: int = 1,
) -> list[tuple[float, list[int]]] | None:
    """Every set of ``params.hubs`` hubs whose multiple-allocation cost is at most ``limit``.

    Under single allocation each OD pair of a hub set is routed through its
    origin's hub and its destination's, one of the routes multiple
    allocation chooses among, so a set's multiple-allocation cost is a lower
    bound on every single-allocation plan with those hubs (and the same
    for any allocation rule). ``params`` may say either allocation; the
    sets are priced under multiple allocation. ``limit`` is in currency per
    day. ``workers``: processes to split the walk over (see
    :func:`split_workers`).

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
    job = _Job("within", data, d, params, limit, _wall_deadline(time_limit_s))
    results = _run_parts(job, split_workers(workers, walk_work(found, data.n)))
    if results is None:
        return None
    out = [pair for res in results for pair in res]
    out.sort()
    return out


# --------------------------------------------------------------------------
# The walk split over processes
# --------------------------------------------------------------------------


def split_workers(workers: int, work: int) -> int:
    """Processes worth splitting a walk of ``work`` over, at most ``workers``.

    One unless the walk likely takes :data:`SPLIT_MIN_S` or more on one
    (at :data:`WORK_PER_S`: starting a process costs about half a second),
    the processor has more than one core for this process, and this
    process may fork others (a daemon process, such as a Dask worker,
    may not; nor can a process on a platform without ``fork``).
    """
    if workers <= 1 or work < SPLIT_MIN_S * WORK_PER_S:
        return 1
    if multiprocessing.current_process().daemon or not _CAN_FORK:
        return 1
    return max(1, min(workers, usable_cores()))


#: Parts run in forked children, which need no re-import of the caller's
#: script (a script without a ``__main__`` guard, a notebook): on platforms
#: without ``fork`` the walk stays in one process.
_CAN_FORK = "fork" in multiprocessing.get_all_start_methods()


def usable_cores() -> int:
    """Cores this process may run on: its CPU affinity, cut to its cgroup's CPU quota.

    A container limited to 2 CPUs on a 64-core host sees all 64 in its
    affinity; walks split over 64 processes would then share 2 CPUs' time.
    """
    if hasattr(os, "sched_getaffinity"):
        cores = len(os.sched_getaffinity(0))
    else:
        cores = os.cpu_count() or 1
    quota = cpu_quota()
    return max(1, cores if quota is None else min(cores, quota))


#: Where the cgroup file system is mounted (Linux).
CGROUP_ROOT = Path("/sys/fs/cgroup")


def cpu_quota(root: Path = CGROUP_ROOT) -> int | None:
    """Whole CPUs the cgroup's CPU quota allows (rounded up), ``None`` when unlimited or unknown.

    cgroup v2: ``cpu.max`` holds ``$MAX $PERIOD`` (a newer kernel adds
    ``$BURST``), ``max`` for no limit; cgroup v1: ``cpu/cpu.cfs_quota_us``
    (-1 for no limit) over ``cpu/cpu.cfs_period_us``; both in
    microseconds (Linux kernel documentation: admin-guide/cgroup-v2.rst,
    scheduler/sched-bwc.rst). Inside a container ``root`` is the
    container's own group.
    """
    try:
        v2 = root / "cpu.max"
        if v2.is_file():
            fields = v2.read_text().split()
            if len(fields) < 2 or fields[0] == "max":
                return None
            quota, period = float(fields[0]), float(fields[1])
        else:
            v1 = root / "cpu"
            quota = float((v1 / "cpu.cfs_quota_us").read_text().strip())
            period = float((v1 / "cpu.cfs_period_us").read_text().strip())
    except (OSError, ValueError):
        return None
    if quota <= 0 or period <= 0:
        return None
    return max(1, math.ceil(quota / period - 1e-9))


@dataclass(frozen=True)
class _Job:
    """One walk to split: what each part needs (picklable).

    ``kind`` is ``"cheapest"`` (limit: the cheapest cost so far, starting
    at ``limit``) or ``"within"`` (a fixed ``limit``); ``deadline`` is a
    ``time.time()`` value (comparable across processes) or ``None``.
    """

    kind: str
    data: NetworkData
    d: np.ndarray
    params: HubModelParams
    limit: float
    deadline: float | None


def _wall_deadline(time_limit_s: float | None) -> float | None:
    return None if time_limit_s is None else time.time() + time_limit_s


def _walk_part(
    job: _Job, part: tuple[int, int], shared: Any = None
) -> list[tuple[float, list[int]]]:
    """Part ``part`` of the walk: its sets within the limit, or its cheapest.

    ``shared``: a lock-free ``multiprocessing.RawValue`` holding the
    cheapest cost any part has found (``"cheapest"`` only). Raises ``TimeoutError`` past the
    deadline.
    """
    found = hub_choices(job.data, job.params)
    assert found is not None
    deadline = None if job.deadline is None else time.perf_counter() + (job.deadline - time.time())
    pricer = _Pricer(job.data, job.d, job.params)
    moves = _MultipleMoves(pricer)
    bound = _NearestHubBound(moves, job.d, job.params, pricer.handling, [*found[0], *found[1]])
    out: list[tuple[float, list[int]]] = []
    if job.kind == "within":
        lim = job.limit
        for costs, chosen, xs in _leaves(moves, found, deadline, bound, lambda: lim, part):
            for j in np.flatnonzero(costs <= lim):
                out.append((float(costs[j]), sorted([*chosen, xs[j]])))
        return out
    # The cheapest cost so far (here or, shared, in any part) is the limit
    # of the sets still worth pricing.
    best = [job.limit]

    def limit() -> float:
        return best[0] if shared is None else min(best[0], shared.value)

    for costs, chosen, xs in _leaves(moves, found, deadline, bound, limit, part):
        low = float(costs.min())
        if low < best[0]:
            best[0] = low
            out = [pair for pair in out if _tied(pair[0], low)]
            if shared is not None and low < shared.value:
                # Unlocked: a lost update only prunes less.
                shared.value = low
        # Every set tied with the cheapest: a set's cost may differ in its
        # last bits with the batch it was priced in, so ties are broken by
        # the hub lists, the same however the walk was split.
        out += [
            (float(costs[j]), sorted([*chosen, xs[j]]))
            for j in np.flatnonzero(_tied(costs, best[0]))
        ]
    return out


def _tied(cost: Any, best: float) -> Any:
    """Whether ``cost`` (a number or an array) ties with ``best`` to within :data:`TIE_TOL`."""
    return cost <= best + TIE_TOL * abs(best)


def _part_main(conn: Any, job: _Job, part: tuple[int, int], shared: Any) -> None:
    """A forked child: walk one part, send its result (``None``: out of time).

    It leaves by ``os._exit``, without the interpreter's clean-up: a lock
    another thread of the parent held at the fork (its standard output,
    say) would otherwise hang the child's exit.
    """
    try:
        conn.send(_walk_part(job, part, shared))
    except TimeoutError:
        conn.send(None)
    except BaseException as exc:  # reported by the parent, not mistaken for a timeout
        conn.send(f"{type(exc).__name__}: {exc}")
    finally:
        conn.close()
        os._exit(0)


def _run_parts(job: _Job, parts: int) -> list[list[tuple[float, list[int]]]] | None:
    """Walk ``job`` in ``parts`` parts: this process one, a child process each other.

    Returns every part's result, or ``None`` when any part ran out of time
    or its process failed (the caller then has no proof and falls back).
    """
    if parts <= 1:
        try:
            return [_walk_part(job, (0, 1))]
        except TimeoutError:
            return None
    ctx = multiprocessing.get_context("fork")
    # Lock-free: a child killed while holding a lock would hang the others.
    shared = ctx.RawValue("d", job.limit) if job.kind == "cheapest" else None
    children: list[tuple[Any, Any]] = []
    results: list[list[tuple[float, list[int]]]] = []
    ok = True
    try:
        for r in range(1, parts):
            here, there = ctx.Pipe(duplex=False)
            proc = ctx.Process(target=_part_main, args=(there, job, (r, parts), shared))
            proc.daemon = True
            children.append((proc, here))
            proc.start()
            there.close()
        try:
            results.append(_walk_part(job, (0, parts), shared))
        except TimeoutError:
            ok = False
        for _proc, conn in children:
            if not ok:
                break
            wait = None if job.deadline is None else max(job.deadline - time.time(), 0.0) + 5.0
            got = conn.recv() if conn.poll(wait) else None
            if isinstance(got, str):
                raise RuntimeError(f"a part of the hub-set walk failed: {got}")
            if got is None:
                ok = False
            else:
                results.append(got)
    except (EOFError, OSError):
        ok = False  # a child died without an answer
    finally:
        for proc, conn in children:
            if proc.pid is not None:
                if proc.is_alive():
                    proc.terminate()
                proc.join()
            conn.close()
    return results if ok else None
