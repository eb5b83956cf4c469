"""Fast starting plans for the MILP: local search over hub sets.

A good first plan lets the solver prune early and gives every run a plan
even when the time limit is short. Pure numpy; deterministic.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from itertools import combinations

import numpy as np

from hubnet.config import HubModelParams
from hubnet.data import NetworkData
from hubnet.model import allocation_costs, sort_capacities
from hubnet.solution import best_hub_pairs, unit_path_costs

#: Most rounds of moves and exchanges in a capacitated allocation
#: (:meth:`_Pricer._exchange`); each applies one.
EXCHANGE_ROUNDS = 500

#: Kicks of the iterated allocation search (:meth:`_Pricer.refine`), and
#: the fewest and most terminals one kick moves.
REFINE_KICKS = 100
KICK_SITES = (3, 14)

#: Kicks in a row without gain after which the starting search's
#: iterated allocation of a hub set stops.
REFINE_PATIENCE = 40

#: The iterated allocation search walks on from a kick's allocation when it
#: costs at most this share more than the one it came from, and goes back
#: to the best one when it has drifted three times as far.
WALK_SHARE = 0.002

#: Prices of a unit of sort overflow tried by a kick's descent, as
#: multiples of the plan's average cost per unit of volume: low ones let
#: the descent cross full hubs, high ones pull it back within capacity.
OVERFLOW_PRICES = (0.2, 0.5, 1.0, 2.0, 5.0)

#: Overflow price that brings an allocation back within the sort
#: capacities, as a multiple of an average cost per unit of volume (the
#: plan's in :meth:`_Pricer.refine`, the sites' own legs to their cheapest
#: hub in :meth:`_Pricer.allocate`).
REPAIR_PRICE = 1000.0

#: A hub set whose quick allocation costs up to this share more than the
#: plan in hand is allocated again by :meth:`_Pricer.refine`.
REFINE_MARGIN = 0.03

#: Kicks of the iterated allocation of the starting search's final hubs,
#: at most, and in a row without gain per terminal (AP, 50 sites, TT: 46
#: terminals, gains after 150 and 450 kicks).
FINAL_KICKS = 1000
FINAL_PATIENCE_PER_SITE = 10

#: Closed candidates the two-for-one moves of the starting search open
#: hubs from (:func:`_two_for_one`), and the most sets those moves make.
SHORTLIST = 20
TWO_FOR_ONE_SETS = 1_000


def _per_unit(cost: float, volume: float) -> float:
    """``cost`` per unit of ``volume`` (currency per unit), 1.0 when either is not positive."""
    return cost / volume if cost > 0 and volume > 0 else 1.0


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
        self.cap = sort_capacities(data)
        self.c, self.t, self.dist = unit_path_costs(d, params)
        # Collection, handling at the hub and distribution of each site's
        # volume for every hub, (n, n): the local part of an allocation.
        self.local = allocation_costs(data, d, params, list(range(len(self.w))))
        # Transfer plus handling at the second hub (none when k == m).
        self.t2 = self.t + self.handling[None, :]
        np.fill_diagonal(self.t2, 0.0)
        # Collection, handling and distribution per unit of volume, each
        # site on its cheapest other site as hub: the scale of the repair's
        # overflow price (its own row would count the fixed cost and no
        # distance, and is 0 without fixed and handling costs).
        n = len(self.w)
        other = np.where(np.eye(n, dtype=bool), np.inf, self.local).min(axis=1)
        self.unit = _per_unit(float(other[np.isfinite(other)].sum()), float(self.out_vol.sum()))

    def multiple(self, hubs: list[int]) -> float:
        cost, _, _ = best_hub_pairs(self.d, self.params, hubs, self.handling)
        return float((self.w * cost).sum() + self.fixed[hubs].sum())

    def allocate(self, hubs: list[int]) -> np.ndarray | None:
        """Single allocation for a hub set: cheapest feeder cost, then 1-opt moves.

        Under sort capacities the terminals are placed largest first; when
        no hub has room left one overflows, and moves and exchanges with
        the overflow priced high (:data:`REPAIR_PRICE`) bring it back within
        capacity where they can (``None`` where they cannot). The 1-opt
        moves are followed by the best moves and exchanges that fit
        (:meth:`_exchange`).
        """
        h = np.asarray(hubs)
        local, hubs_t, caps = self._on_hubs(h)
        order = np.argsort(-self.out_vol)
        assign = np.full(len(self.out_vol), -1)
        load = np.zeros(len(h))
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
                # No hub has room left for i: overflow the one with the
                # most, then repair by moves and exchanges below.
                k_pos = int(np.argmax(caps - load))
                assign[i] = k_pos
                load[k_pos] += self.out_vol[i]
        if (load > caps + 1e-9).any():
            # Largest first can leave no room under tight capacities where
            # a packing fits (AP, 50 sites, TT: many four-hub sets).
            self._exchange(
                assign, load, caps, local, hubs_t, overflow_price=REPAIR_PRICE * self.unit
            )
            if (load > caps + 1e-9).any():
                return None
        # 1-opt: move one terminal to another hub while it lowers the cost.
        # A move's cost change is priced in O(n p) from each terminal's
        # volume to and from each hub's terminals (``to_hub``, ``from_hub``,
        # (n, p), kept up to date), instead of re-pricing the plan.
        onehot = np.zeros((len(assign), len(h)))
        onehot[np.arange(len(assign)), assign] = 1.0
        to_hub = self.w @ onehot  # to_hub[i, b]: i's volume to the terminals on hub b
        from_hub = self.w.T @ onehot
        own_w = np.diag(self.w).astype(float)
        improved = True
        rounds = 0
        while improved and rounds < 20:
            improved = False
            rounds += 1
            for i in order:
                if i in h:
                    continue
                cur = assign[i]
                delta = self._move_costs(i, cur, local[i], hubs_t, to_hub[i], from_hub[i], own_w[i])
                for k_pos in range(len(h)):
                    if k_pos == cur or load[k_pos] + self.out_vol[i] > caps[k_pos] + 1e-9:
                        continue
                    if delta[k_pos] < -1e-9:
                        assign[i] = k_pos
                        load[cur] -= self.out_vol[i]
                        load[k_pos] += self.out_vol[i]
                        to_hub[:, cur] -= self.w[:, i]
                        to_hub[:, k_pos] += self.w[:, i]
                        from_hub[:, cur] -= self.w[i, :]
                        from_hub[:, k_pos] += self.w[i, :]
                        cur = k_pos
                        improved = True
                        delta = self._move_costs(
                            i, cur, local[i], hubs_t, to_hub[i], from_hub[i], own_w[i]
                        )
        if self.params.capacitated:
            self._exchange(assign, load, caps, local, hubs_t)
        return h[assign]

    def _on_hubs(self, h: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """The arrays an allocation to hubs ``h`` works on.

        ``local`` (n, p): each site's collection, handling and
        distribution cost on each hub, currency per day (``inf`` for the
        hubs' own rows but 0 on their own hub: hubs stay put); ``hubs_t``
        (p, p): transfer plus the second hub's handling per unit, 0 on the
        diagonal; ``caps`` (p,): sort capacities, units per day (``inf``
        when the model has none).
        """
        local = self.local[:, h]  # a copy
        local[h, :] = np.inf
        local[h, np.arange(len(h))] = 0.0
        caps = self.cap[h] if self.params.capacitated else np.full(len(h), np.inf)
        return local, self.t2[np.ix_(h, h)], caps

    def refine(
        self,
        hubs: list[int],
        assign: np.ndarray,
        kicks: int = REFINE_KICKS,
        seed: int = 0,
        deadline: float = np.inf,
        patience: int | None = None,
    ) -> np.ndarray:
        """Iterated search for a cheaper capacitated allocation to ``hubs``.

        When the sort capacities leave little room (AP, 50 sites, TT: 1 %
        over all hubs) moves and exchanges that fit stop far from the best
        allocation (when every hub has room for any terminal, nothing is
        done). Each kick sends a few terminals (:data:`KICK_SITES`)
        of the current allocation to random hubs, descends with overflow
        allowed at a price (one of :data:`OVERFLOW_PRICES`), repairs any
        overflow at :data:`REPAIR_PRICE`, and ends with the moves and
        exchanges that fit. The search walks on from a slightly dearer
        allocation (:data:`WALK_SHARE`). Seeded by ``seed``: the same hubs
        and start give the same result. ``hubs`` are matrix indices in
        ascending order; ``assign`` is each site's hub (matrix index) and
        fits the capacities; returns the cheapest
        allocation found, same form. Stops early at ``deadline`` (a
        ``time.perf_counter()`` value, s) or after ``patience`` kicks in a
        row without a cheaper allocation.
        """
        h = np.asarray(hubs)
        local, hubs_t, caps = self._on_hubs(h)
        vol = self.out_vol
        best = np.searchsorted(h, assign)
        best_cost = self.single_cost(h, best)
        here, here_cost = best, best_cost
        unit = _per_unit(best_cost, float(vol.sum()))
        free = np.setdiff1d(np.arange(len(vol)), h)
        if len(free) < 2 or len(h) < 2:
            return np.asarray(assign)
        load = np.bincount(best, weights=vol, minlength=len(h))
        if not (load + vol[free].max() > caps + 1e-9).any():
            # Every hub has room for any terminal: the capacities block
            # no move, and the descent's allocation stands as without them.
            return np.asarray(assign)
        rng = np.random.default_rng(seed)
        last_gain = -1  # the kick of the last gain
        idle = kicks if patience is None else patience
        for kick in range(kicks):
            if time.perf_counter() > deadline or kick - last_gain > idle:
                break
            cur = here.copy()
            size = min(len(free), int(rng.integers(KICK_SITES[0], KICK_SITES[1] + 1)))
            moved = rng.choice(free, size=size, replace=False)
            cur[moved] = rng.integers(len(h), size=len(moved))
            load = np.bincount(cur, weights=vol, minlength=len(h))
            price = float(rng.choice(OVERFLOW_PRICES)) * unit
            self._exchange(cur, load, caps, local, hubs_t, overflow_price=price)
            if (load > caps + 1e-9).any():
                self._exchange(cur, load, caps, local, hubs_t, overflow_price=REPAIR_PRICE * unit)
                if (load > caps + 1e-9).any():
                    continue
            self._exchange(cur, load, caps, local, hubs_t)
            cost = self.single_cost(h, cur)
            if cost < best_cost - 1e-9 * max(1.0, abs(best_cost)):
                best, best_cost, last_gain = cur, cost, kick
            if cost <= (1 + WALK_SHARE) * here_cost:
                here, here_cost = cur, cost
            if here_cost > (1 + 3 * WALK_SHARE) * best_cost:
                here, here_cost = best, best_cost
        return np.asarray(h[best])

    def _exchange(
        self,
        assign: np.ndarray,
        load: np.ndarray,
        caps: np.ndarray,
        local: np.ndarray,
        hubs_t: np.ndarray,
        overflow_price: float | None = None,
    ) -> None:
        """Improve a capacitated allocation by moves and exchanges, in place.

        Under tight sort capacities a single terminal often cannot move
        because the hub it should go to is full; exchanging two terminals
        of different hubs can. Each round takes the best of every move and
        every exchange that fits the capacities, until none lowers the
        cost (at most :data:`EXCHANGE_ROUNDS` rounds). ``assign`` holds
        hub positions; ``load`` (p,) each hub's volume sorted, ``caps``
        (p,) its capacity, units per day; ``local`` (n, p) each terminal's
        own cost on each hub (``inf`` for the hubs' own rows, which stay
        put), ``hubs_t`` (p, p) the transfer plus the second hub's handling
        per unit, currency. With an ``overflow_price`` (currency per unit
        of volume over a capacity) every move and exchange is open and
        overflow is priced instead: the allocation may then end over
        capacity, ``load`` says by how much.
        """
        n, p = local.shape
        vol = self.out_vol
        for _ in range(EXCHANGE_ROUNDS):
            move, swap, scale = self._step_costs(assign, load, caps, local, hubs_t, overflow_price)
            i_m = int(np.argmin(move))
            i_s = int(np.argmin(swap))
            best_move, best_swap = move.flat[i_m], swap.flat[i_s]
            if min(best_move, best_swap) >= -1e-9 * scale:
                break
            if best_move <= best_swap:
                i, k = divmod(i_m, p)
                load[assign[i]] -= vol[i]
                load[k] += vol[i]
                assign[i] = k
            else:
                i, j = divmod(i_s, n)
                ai, aj = assign[i], assign[j]
                load[ai] += vol[j] - vol[i]
                load[aj] += vol[i] - vol[j]
                assign[i], assign[j] = aj, ai

    def _step_costs(
        self,
        assign: np.ndarray,
        load: np.ndarray,
        caps: np.ndarray,
        local: np.ndarray,
        hubs_t: np.ndarray,
        overflow_price: float | None = None,
    ) -> tuple[np.ndarray, np.ndarray, float]:
        """Cost change of every move and every exchange, for :meth:`_exchange`.

        Returns ``move`` (n, p): terminal i to hub position k; ``swap`` (n,
        n): terminals i and j trade hubs; both currency per day, ``inf``
        where not allowed (a hub's own row, no change, or, without an
        ``overflow_price``, over a capacity); and the plan's cost scale
        for the stopping test. Arguments as in :meth:`_exchange`.
        """
        n, p = local.shape
        w = self.w
        vol = self.out_vol
        own = np.diag(w).astype(float)
        rows = np.arange(n)
        fixed = ~np.isfinite(local).all(axis=1)  # the hubs themselves
        onehot = np.zeros((n, p))
        onehot[rows, assign] = 1.0
        out = w @ onehot
        inn = w.T @ onehot
        out[rows, assign] -= own
        inn[rows, assign] -= own
        # Cost of terminal i on hub k with every other terminal where it is.
        on = local + out @ hubs_t.T + inn @ hubs_t
        a = assign
        here = on[rows, a]
        delta = on - here[:, None]  # moving i to hub k, the others staying
        # Exchange i (on a) and j (on b): both moves, plus the pair's own
        # transfers, which each move counted as if the other stayed.
        to_other = delta[:, a]  # [i, j]: i moved to j's hub
        between = hubs_t[np.ix_(a, a)]
        swap = to_other + to_other.T + (w + w.T) * (between + between.T)
        move = delta
        move[fixed] = np.inf
        move[rows, a] = np.inf
        ok = (a[:, None] != a[None, :]) & ~fixed[:, None] & ~fixed[None, :]
        # [i, j]: the load of i's hub with j in i's place.
        load_a = load[a][:, None] - vol[:, None] + vol[None, :]
        if overflow_price is None:
            move[load[None, :] + vol[:, None] > caps[None, :] + 1e-9] = np.inf
            room_a = load_a <= caps[a][:, None] + 1e-9
            ok &= room_a & room_a.T
        else:
            over = np.maximum(load - caps, 0.0)
            # Leaving i's hub, then joining hub k.
            move += overflow_price * (
                (np.maximum(load[a] - vol - caps[a], 0.0) - over[a])[:, None]
                + np.maximum(load[None, :] + vol[:, None] - caps[None, :], 0.0)
                - over[None, :]
            )
            change_a = np.maximum(load_a - caps[a][:, None], 0.0) - over[a][:, None]
            swap = swap + overflow_price * (change_a + change_a.T)
        swap = np.where(ok, swap, np.inf)
        return move, swap, max(1.0, float(np.abs(here).sum()))

    @staticmethod
    def _move_costs(
        i: int,
        cur: int,
        local_i: np.ndarray,
        hubs_t: np.ndarray,
        to_hub_i: np.ndarray,
        from_hub_i: np.ndarray,
        own: float,
    ) -> np.ndarray:
        """Cost change of moving terminal i from hub position ``cur`` to each, (p,).

        ``local_i`` (p,): i's collection, handling and distribution cost on
        each hub; ``hubs_t`` (p, p): transfer plus second-hub handling per
        unit; ``to_hub_i`` / ``from_hub_i`` (p,): i's volume to and from the
        terminals on each hub; ``own``: i's volume to itself, which stays on
        i's hub whichever it is. Currency per day.
        """
        out_i = to_hub_i.copy()
        in_i = from_hub_i.copy()
        out_i[cur] -= own
        in_i[cur] -= own
        return np.asarray(
            local_i
            - local_i[cur]
            + (hubs_t - hubs_t[cur][None, :]) @ out_i
            + (hubs_t.T - hubs_t[:, cur][None, :]) @ in_i
        )

    def assigned_cost(self, hubs: list[int], assign: np.ndarray) -> float:
        """Cost of allocation ``assign`` (each site's hub, a matrix index) to ascending ``hubs``."""
        h = np.asarray(hubs)
        return self.single_cost(h, np.searchsorted(h, assign))

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


#: Route costs priced in one batch by :meth:`_MultipleMoves.with_each`
#: (two work arrays of 8 bytes each: 1 MB).
BATCH_ELEMENTS = 65_536


class _MultipleMoves:
    """Exact costs of hub-set moves under multiple allocation, O(n^2) per move.

    For an open hub set S the state holds three ``(n, n)`` arrays of
    per-unit costs (currency per unit): ``cur[i, j]``, the cheapest route of
    OD pair (i, j) through hubs of S; ``reach[i, x]``, the cheapest way from
    origin i through a first hub of S to x taken as the second hub; and
    ``onward[x, j]``, the cheapest way from x taken as the first hub through
    a second hub of S to destination j. Opening one more hub x then prices
    every OD pair in O(1): through S alone, through x first, or through x
    second. That makes a whole swap neighbourhood cost O(p q n^2) instead
    of O(p^2 q n^2), which is what lets local search run on 200 sites.
    """

    def __init__(self, pricer: _Pricer):
        self.c = pricer.c + pricer.handling[None, :]  # i to first hub k, handling at k
        self.t2 = pricer.t2  # k to m with handling at m, 0 on the diagonal
        self.dist = pricer.dist  # m to j
        self.fixed = pricer.fixed
        self.mask = pricer.w > 0
        self.all_flows = bool(self.mask.all())
        self.w = np.where(self.mask, pricer.w, 0.0)
        self.n = pricer.w.shape[0]
        # Work arrays of :meth:`with_each`, ``(chunk, n, n)`` each.
        self._work: tuple[np.ndarray, np.ndarray] | None = None

    def empty(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """The state of no open hub: every cost infinite."""
        n = self.n
        return np.full((n, n), np.inf), np.full((n, n), np.inf), np.full((n, n), np.inf)

    def add(
        self, state: tuple[np.ndarray, np.ndarray, np.ndarray], x: int
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """The state with hub x opened as well."""
        cur, reach, onward = state
        return (
            self.priced(state, x),
            np.minimum(reach, self.c[:, x][:, None] + self.t2[x, :][None, :]),
            np.minimum(onward, self.t2[:, x][:, None] + self.dist[x, :][None, :]),
        )

    def state(self, hubs: list[int]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """The state of hub set ``hubs``."""
        st = self.empty()
        for x in hubs:
            st = self.add(st, x)
        return st

    def priced(self, state: tuple[np.ndarray, np.ndarray, np.ndarray], x: int) -> np.ndarray:
        """``(n, n)`` per-unit route costs once hub x is opened as well."""
        cur, reach, onward = state
        via_x_first = self.c[:, x][:, None] + np.minimum(onward[x, :], self.dist[x, :])[None, :]
        via_x_second = reach[:, x][:, None] + self.dist[x, :][None, :]
        return np.minimum(cur, np.minimum(via_x_first, via_x_second))

    def total(self, matrix: np.ndarray) -> float:
        """Routing cost of per-unit costs ``matrix``, currency per day."""
        if self.all_flows:
            return float((self.w * matrix).sum())
        with np.errstate(invalid="ignore"):
            return float(np.where(self.mask, self.w * matrix, 0.0).sum())

    def cost(self, hubs: list[int]) -> float:
        """Whole cost of hub set ``hubs`` (routing and fixed), currency per day."""
        return self.total(self.state(hubs)[0]) + float(self.fixed[hubs].sum())

    def with_each(
        self,
        state: tuple[np.ndarray, np.ndarray, np.ndarray],
        xs: list[int],
        chunk: int | None = None,
    ) -> np.ndarray:
        """Routing cost (currency per day) of the state's hubs plus each x in ``xs``.

        The x are priced ``chunk`` at a time (``None``: as many as keep a
        batch near :data:`BATCH_ELEMENTS` route costs, which stays in the
        processor's cache), in two work arrays kept from call to call: AP,
        100 sites, 2.3 ms for 100 candidates against 8.3 ms in batches of
        64 with fresh arrays.
        """
        cur, reach, onward = state
        n = self.n
        out = np.empty(len(xs))
        if not len(xs):
            return out
        if chunk is None:
            chunk = max(1, BATCH_ELEMENTS // (n * n))
        chunk = min(chunk, len(xs))
        if self._work is None or self._work[0].shape[0] < chunk:
            self._work = (np.empty((chunk, n, n)), np.empty((chunk, n, n)))
        w = self.w.ravel()
        for s in range(0, len(xs), chunk):
            x = np.asarray(xs[s : s + chunk])
            k = len(x)
            via_first, via_second = self._work[0][:k], self._work[1][:k]
            first_leg = np.minimum(onward[x, :], self.dist[x, :])  # x as first hub to j
            np.add(self.c[:, x].T[:, :, None], first_leg[:, None, :], out=via_first)
            np.add(reach[:, x].T[:, :, None], self.dist[x, :][:, None, :], out=via_second)
            m = np.minimum(via_first, via_second, out=via_first)
            np.minimum(m, cur[None], out=m)
            if not self.all_flows:
                m[:, ~self.mask] = 0.0
            out[s : s + k] = m.reshape(k, n * n) @ w
        return out


def _greedy_multiple(
    pricer: _Pricer, cand: list[int], forced: list[int], target: int | None
) -> list[int]:
    """Add hubs one at a time, each the one that lowers multiple-allocation cost most.

    Starts from the forced hubs; see :func:`_fill_multiple`.
    """
    return _fill_multiple(_MultipleMoves(pricer), cand, list(forced), target)


def _fill_multiple(
    moves: _MultipleMoves, cand: list[int], hubs: list[int], target: int | None
) -> list[int]:
    """Open hubs greedily on top of ``hubs``, each the one that lowers the cost most.

    Incremental (see :class:`_MultipleMoves`): a greedy step over all
    candidates is O(q n^2). With a hub count, hubs are added up to it;
    without, at least one hub is opened and then hubs are added while they
    pay their fixed cost.
    """
    state = moves.state(hubs)
    hubs = list(hubs)
    free = [k for k in cand if k not in hubs]
    current = moves.total(state[0]) + moves.fixed[hubs].sum() if hubs else np.inf
    while free and (target is None or len(hubs) < target):
        costs = np.array(
            [moves.total(moves.priced(state, k)) + moves.fixed[hubs + [k]].sum() for k in free]
        )
        best = int(np.argmin(costs))
        if target is None and hubs and costs[best] >= current:
            break
        current = float(costs[best])
        state = moves.add(state, free[best])
        hubs.append(free.pop(best))
    return hubs


def _below(cost: float) -> float:
    """The cost a move must beat to count as cheaper than ``cost`` (inf when it is inf)."""
    return cost - 1e-9 * max(1.0, abs(cost)) if np.isfinite(cost) else np.inf


def _descend_multiple(
    moves: _MultipleMoves,
    cand: list[int],
    hubs: list[int],
    forced: set[int],
    target: int | None,
    t_end: float,
    rng: np.random.Generator,
) -> tuple[list[int], float]:
    """Local search over hub sets for multiple allocation, exact costs.

    Moves: swap one open hub (not a forced one) for a closed candidate and,
    without a hub count, open or close one hub. First improvement over the
    hub taken out, in random order; for that hub the best move is taken.
    Stops at a local optimum or at ``t_end`` (``time.perf_counter``).

    Returns the hub set and its cost, currency per day.
    """
    import time

    current = list(hubs)
    cost = moves.cost(current)
    while time.perf_counter() < t_end:
        closed = [k for k in cand if k not in current]
        found: tuple[float, list[int]] | None = None
        if target is None and closed:
            # Open one more hub.
            vals = moves.with_each(moves.state(current), closed) + moves.fixed[current].sum()
            vals += moves.fixed[closed]
            a = int(np.argmin(vals))
            if vals[a] < _below(cost):
                found = (float(vals[a]), current + [closed[a]])
        order = [k for k in current if k not in forced]
        rng.shuffle(order)
        for out in order:
            if found is not None or time.perf_counter() > t_end:
                break
            rest = [k for k in current if k != out]
            state = moves.state(rest)
            rest_fixed = float(moves.fixed[rest].sum())
            if target is None and rest:
                dropped = moves.total(state[0]) + rest_fixed
                if dropped < _below(cost):
                    found = (dropped, rest)
            if closed:
                vals = moves.with_each(state, closed) + rest_fixed + moves.fixed[closed]
                a = int(np.argmin(vals))
                beat = _below(cost) if found is None else found[0]
                if vals[a] < beat:
                    found = (float(vals[a]), rest + [closed[a]])
        if found is None:
            break
        cost, current = found
    return sorted(current), float(cost)


def search_multiple(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    hubs: list[int],
    cand: list[int],
    max_seconds: float,
    max_idle: int = 0,
    seed: int = 0,
) -> tuple[list[int], float]:
    """Iterated local search over hub sets for multiple allocation.

    Descends from ``hubs`` to a local optimum (:func:`_descend_multiple`),
    then, ``max_idle`` times in a row at most without finding a cheaper
    plan, kicks the best plan (swaps one to three random open hubs for
    random closed candidates) and descends again. Deterministic for a seed when
    not cut short by ``max_seconds``.

    Parameters
    ----------
    data, d, params
        Network, distances (km), model parameters (multiple allocation).
    hubs
        Starting hub set (matrix indices).
    cand
        Candidate hubs the search may open.
    max_seconds
        Wall-clock budget (s).
    max_idle
        Kicks without improvement before stopping (0: descend only).
    seed
        Seed of the random kicks and move order.

    Returns
    -------
    tuple
        Best hub set (sorted matrix indices) and its cost, currency per day.
    """
    import time

    forced = {k for k, s in enumerate(data.sites) if s.hub_status == "open"}
    moves = _MultipleMoves(_Pricer(data, d, params))
    t_end = time.perf_counter() + max_seconds
    return _iterate_multiple(moves, cand, hubs, forced, params.hubs, t_end, max_idle, seed)


def _iterate_multiple(
    moves: _MultipleMoves,
    cand: list[int],
    hubs: list[int],
    forced: set[int],
    target: int | None,
    t_end: float,
    max_idle: int,
    seed: int,
) -> tuple[list[int], float]:
    """The iterated local search of :func:`search_multiple` on prepared moves."""
    import time

    rng = np.random.default_rng(seed)
    cand = sorted(set(cand) | set(hubs) | forced)
    # A start that lacks a forced hub or has the wrong hub count is repaired:
    # forced hubs in, the dearest-to-keep others out, then greedy fill.
    start = sorted(forced) + [k for k in hubs if k not in forced]
    while target is not None and len(start) > max(target, len(forced)):
        removable = [k for k in start if k not in forced]
        costs = [moves.cost([k for k in start if k != out]) for out in removable]
        start.remove(removable[int(np.argmin(costs))])
    start = _fill_multiple(moves, cand, start, target) if not start or target else start
    best, best_cost = _descend_multiple(moves, cand, start, forced, target, t_end, rng)
    idle = 0
    while idle < max_idle and time.perf_counter() < t_end:
        idle += 1
        free = [k for k in best if k not in forced]
        closed = [k for k in cand if k not in best]
        size = min(int(rng.integers(1, 4)), len(free), len(closed))
        if size == 0:
            break
        out = set(rng.choice(free, size=size, replace=False).tolist())
        inn = rng.choice(closed, size=size, replace=False).tolist()
        kicked = [k for k in best if k not in out] + inn
        found, cost = _descend_multiple(moves, cand, kicked, forced, target, t_end, rng)
        if cost < _below(best_cost):
            best, best_cost, idle = found, cost, 0
    return best, best_cost


def starting_plan(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    max_rounds: int = 50,
    max_seconds: float = 60.0,
    max_idle: int = 20,
    initial_hubs: list[int] | None = None,
) -> tuple[list[int], np.ndarray | None, float] | None:
    """Find a good plan by greedy construction then swap/add/drop local search.

    Single allocation: the swap search stops after ``max_rounds`` improving
    rounds or ``max_seconds`` of wall time, whichever comes first; with
    ``initial_hubs`` (matrix indices, forced-open hubs included, as many as
    asked) it starts from that hub set instead of the greedy one. Multiple
    allocation: iterated local search with exact O(n^2) move costs
    (:func:`search_multiple`), stopping after ``max_idle`` kicks in a row
    (at least twice the hub count) without a cheaper plan or at
    ``max_seconds``.

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
    spare = pricer.cap - pricer.out_vol  # an open hub sorts its own volume too
    if params.capacitated:
        # A site sending more than it can sort can never be an open hub.
        cand = [k for k in cand if spare[k] >= 0 or k in forced]
    single = params.allocation == "single"

    def price(hubs: list[int], incumbent: float = -np.inf) -> tuple[float, np.ndarray | None]:
        """Single-allocation cost and allocation of a hub set.

        Under sort capacities a set whose quick allocation lies within
        :data:`REFINE_MARGIN` of the ``incumbent`` cost is allocated again
        by the iterated search (AP, 50 sites, TT: the best known plan's
        hubs cost 424,430.55 by the quick rule, 417,719.67 so; their
        exact allocation costs 417,440.99).
        """
        if not hubs:
            return np.inf, None
        h = sorted(hubs)
        key = tuple(h)
        if key not in quick:
            got = pricer.allocate(h)
            quick[key] = (np.inf if got is None else pricer.assigned_cost(h, got), got)
        cost, assign = quick[key]
        if assign is None:
            return np.inf, None
        if params.capacitated and cost <= (1 + REFINE_MARGIN) * incumbent:
            assign = pricer.refine(h, assign, patience=REFINE_PATIENCE)
            cost = pricer.assigned_cost(h, assign)
        return cost, assign

    # The quick allocation of the sets priced this round, by hub set: the
    # capacitated search ranks by it, then refines the closest.
    quick: dict[tuple[int, ...], tuple[float, np.ndarray | None]] = {}

    # Cheap proxy for the greedy phase: multiple-allocation pricing.
    def proxy(hubs: list[int]) -> float:
        return pricer.multiple(sorted(hubs))

    t_end = time.perf_counter() + max_seconds
    target = params.hubs
    if initial_hubs is not None and single:
        hubs = sorted(set(initial_hubs) | set(forced))
    else:
        hubs = _greedy_multiple(pricer, cand, forced, target)
    if not single:
        # With many hubs a kick of one to three changes less of the plan:
        # allow twice as many kicks without gain as hubs (AP, 200 sites, 15
        # hubs: the 21st kick was the first to find a cheaper plan).
        idle = max(max_idle, 2 * (target or 0))
        hubs, cost = _iterate_multiple(
            _MultipleMoves(pricer), cand, hubs, set(forced), target, t_end, idle, seed=0
        )
        return (sorted(hubs), None, float(cost)) if np.isfinite(cost) else None
    cost, assign = price(hubs, np.inf)
    if not np.isfinite(cost) and target is None:
        hubs, cost, assign = _open_until_allocable(hubs, cand, price, spare)
        if np.isfinite(cost):
            cost, assign = price(hubs, np.inf)
    # Swap (and, without a fixed hub count, add/drop) local search.
    volume = float(pricer.out_vol.sum())

    def fits(hubs: list[int]) -> bool:
        """Whether the hubs' sort capacities could hold all the volume."""
        return not params.capacitated or float(pricer.cap[hubs].sum()) >= volume - 1e-9

    def first_gain(moves: list[list[int]]) -> tuple[list[int], float, np.ndarray | None] | None:
        """The first of ``moves`` cheaper than the plan in hand, priced."""
        for move in moves:
            if time.perf_counter() > t_end:
                break
            c_move, a_move = price(move, cost)
            # While no plan fits (cost inf) any plan that fits is a gain;
            # inf - 1e-9 * inf would be NaN and accept nothing.
            gain = not np.isfinite(cost) or c_move < cost - 1e-9 * max(1.0, abs(cost))
            if np.isfinite(c_move) and gain:
                return move, c_move, a_move
        return None

    for _ in range(max_rounds):
        if time.perf_counter() > t_end:
            break
        quick.clear()
        moves = _neighbours(hubs, cand, forced, target)
        if np.isfinite(cost):
            moves = [m for m in moves if fits(m)]
        if len(moves) > 40 and np.isfinite(cost):
            if params.capacitated:
                # The capacity-blind proxy ranks badly under tight sort
                # capacities (AP, 50 sites, TT: the best known hubs were 60th
                # of 234 swaps). Rank by the quick allocation, and go on only
                # with the sets close enough to be worth the iterated one.
                close = []
                for move in moves:
                    if time.perf_counter() > t_end:
                        break
                    c_quick = price(move)[0]
                    if c_quick <= (1 + REFINE_MARGIN) * cost:
                        close.append((c_quick, move))
                moves = [move for _, move in sorted(close, key=lambda q: q[0])]
            else:
                # Rank swaps with the cheap proxy; price only the most promising
                # exactly (all of them while no plan fits the sort capacities).
                moves = sorted(moves, key=proxy)[:40]
        found = first_gain(moves)
        if found is None and params.capacitated and np.isfinite(cost):
            # Under tight sort capacities the next better plan may need two
            # changes at once (AP, 50 sites, TT: from hubs 6 25 26 to the
            # best known 6 26 28 48, through dearer plans either way).
            ranked = []
            for move in _two_for_one(hubs, cand, forced, target, proxy):
                if time.perf_counter() > t_end:
                    break
                if fits(move):
                    ranked.append((proxy(move), move))
            found = first_gain([move for _, move in sorted(ranked, key=lambda r: r[0])[:40]])
        if found is None:
            break
        hubs, cost, assign = found
    if not np.isfinite(cost):
        return None
    if params.capacitated and assign is not None:
        # The search allocated each set with a few kicks; give the chosen
        # one more (AP, 50 sites, TT: 417,719.67 -> 417,440.99).
        h = sorted(hubs)
        patience = FINAL_PATIENCE_PER_SITE * (len(assign) - len(h))
        assign = pricer.refine(h, assign, kicks=FINAL_KICKS, deadline=t_end, patience=patience)
        cost = pricer.assigned_cost(h, assign)
    return sorted(hubs), assign, float(cost)


def _neighbours(
    hubs: list[int], cand: list[int], forced: list[int], target: int | None
) -> list[list[int]]:
    """Hub sets one swap away (and, without a fixed count ``target``, one add or drop)."""
    moves: list[list[int]] = []
    for out in [k for k in hubs if k not in forced]:
        for inn in [k for k in cand if k not in hubs]:
            moves.append([k for k in hubs if k != out] + [inn])
    if target is None:
        moves += [hubs + [k] for k in cand if k not in hubs]
        if len(hubs) > 1:
            moves += [[k for k in hubs if k != out] for out in hubs if out not in forced]
    return moves


def _two_for_one(
    hubs: list[int],
    cand: list[int],
    forced: list[int],
    target: int | None,
    proxy: Callable[[list[int]], float],
) -> list[list[int]]:
    """Hub sets with one hub (two, with a fixed count ``target``) closed and two opened.

    The two opened come from the closed candidates that the ``proxy`` cost
    likes best when added alone: :data:`SHORTLIST` of them, fewer when
    the hubs closed are many ways, so that the sets stay at most
    :data:`TWO_FOR_ONE_SETS` (the shortlist's pairs times the hubs, or
    times the pairs of hubs with a fixed count).
    """
    movable = [k for k in hubs if k not in forced]
    outs = [[k] for k in movable] if target is None else [list(c) for c in combinations(movable, 2)]
    if not outs:
        return []
    size = SHORTLIST
    while size > 2 and len(outs) * size * (size - 1) // 2 > TWO_FOR_ONE_SETS:
        size -= 1
    closed = [k for k in cand if k not in hubs]
    short = sorted(closed, key=lambda k: proxy(hubs + [k]))[:size]
    return [
        [k for k in hubs if k not in out] + list(pair)
        for out in outs
        for pair in combinations(short, 2)
    ]


def _open_until_allocable(
    hubs: list[int],
    cand: list[int],
    price: Callable[[list[int]], tuple[float, np.ndarray | None]],
    spare: np.ndarray,
) -> tuple[list[int], float, np.ndarray | None]:
    """Open hubs until the sites can be allocated within the sort capacities.

    For a free hub count: each round prices every one-hub addition exactly
    and keeps the cheapest that fits; when none fits yet, it opens the
    candidate with the most ``spare`` capacity (sort capacity less the
    site's own volume, units per day) and goes on.
    The greedy phase ranks hub sets by a capacity-blind proxy, so with
    tight capacities its set can leave no room for every site.
    """
    hubs = list(hubs)
    while len(hubs) < len(cand):
        rest = [k for k in cand if k not in hubs]
        priced = [(price(hubs + [k]), k) for k in rest]
        fits = [(c, a, k) for (c, a), k in priced if np.isfinite(c)]
        if fits:
            c, a, k = min(fits, key=lambda f: f[0])
            return hubs + [k], c, a
        hubs.append(max(rest, key=lambda k: spare[k]))
    cost, assign = price(hubs)
    return hubs, cost, assign


def allocate_to_hubs(
    data: NetworkData, d: np.ndarray, params: HubModelParams, hubs: list[int]
) -> np.ndarray | None:
    """Single allocation of every site to one of the given hubs (cheap, then 1-opt).

    Under sort capacities the iterated search (:meth:`_Pricer.refine`)
    follows. Returns the hub index of each site, or ``None`` when
    capacities cannot be met by these rules.
    """
    pricer = _Pricer(data, d, params)
    assign = pricer.allocate(sorted(hubs))
    if assign is not None and params.capacitated:
        assign = pricer.refine(sorted(hubs), assign)
    return assign


def single_allocation_cost(
    data: NetworkData, d: np.ndarray, params: HubModelParams, assign: np.ndarray
) -> float:
    """Cost of a single-allocation plan, currency per day.

    ``assign[i]`` is the hub (matrix index) of site i; the open hubs are
    those used. Collection, handling at each hub passed, transfer,
    distribution, and the open hubs' fixed costs.
    """
    a = np.asarray(assign, dtype=np.int64)
    return _Pricer(data, d, params).assigned_cost(np.unique(a).tolist(), a)


def polish_multiple(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    hubs: list[int],
    pool: list[int],
    max_seconds: float = 30.0,
) -> tuple[list[int], float]:
    """Local search for multiple allocation, opening hubs from ``pool`` only (no kicks).

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
    return search_multiple(data, d, params, hubs, sorted(set(pool) | set(hubs)), max_seconds)
