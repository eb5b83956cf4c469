"""The path relaxation that single allocation tries first (hubnet/pathlp.py).

References outside hubnet's model code: tests/bruteforce.py enumerates every
hub set and allocation; the AP optima are the published values in
../shared/reference/hub_benchmarks/published_optima.csv (Ernst and
Krishnamoorthy 1996).
"""

from __future__ import annotations

import numpy as np
import pytest
from benchdata import ap_network, ap_params, euclid
from bruteforce import brute_force
from randomnet import random_network as _network

from hubnet.config import HubModelParams, SolverParams
from hubnet.data import NetworkData
from hubnet.heuristics import single_allocation_cost
from hubnet.pathlp import (
    fixable,
    relaxation_columns,
    satisfies_triangle,
    solve_path_relaxation,
)
from hubnet.solve import solve_network

PATH = "single-allocation path relaxation (integral, so optimal)"


def _enumerated(
    data: NetworkData,
    d: np.ndarray,
    fixed: np.ndarray,
    handling: np.ndarray,
    *,
    p: int | None,
    alpha: float,
    allocation: str = "single",
    forced: list[int] | None = None,
) -> tuple[float, tuple[int, ...]]:
    """Enumerated optimum and its hubs (tests/bruteforce.py), unit rates."""
    return brute_force(
        d,
        data.flow_matrix(),
        allocation=allocation,
        p=p,
        alpha=alpha,
        fixed=fixed,
        handling=handling,
        forced=forced,
    )


@pytest.mark.parametrize("form", ["flow", "transport"])
@pytest.mark.parametrize("p", [None, 2, 3])
def test_relaxation_bounds_the_optimum_and_is_it_when_integral(p: int | None, form: str) -> None:
    integral = 0
    for seed in range(8):
        data, d, fixed, handling = _network(seed)
        params = HubModelParams(
            allocation="single",
            hubs=p,
            collection_factor=1.0,
            transfer_factor=0.6,
            distribution_factor=1.3,
            cost_per_unit_km=0.5,
        )
        w = data.flow_matrix()
        # hubnet charges a hub's fixed cost with or without a hub count.
        want, hubs = brute_force(
            d,
            w,
            allocation="single",
            p=p,
            rate=0.5,
            chi=1.0,
            alpha=0.6,
            delta=1.3,
            fixed=fixed,
            handling=handling,
        )
        r = solve_path_relaxation(data, d, params, form=form)  # type: ignore[arg-type]
        assert r is not None and r.form == form
        if form == "transport":
            assert r.columns == relaxation_columns(data)
        else:
            pairs = (relaxation_columns(data) - data.n**2) // data.n**2
            assert r.columns == data.n**2 + pairs * data.n * (data.n - 1)
        assert r.objective <= want * (1 + 1e-9) + 1e-6, (seed, r.objective, want)
        if r.integral:
            integral += 1
            assert r.objective == pytest.approx(want, rel=1e-7), (seed, hubs, r.hubs)
            sol = solve_network(data, d, params, SolverParams())
            assert sol.stats.formulation == PATH and sol.stats.status == "optimal"
            assert sol.costs["total"] == pytest.approx(want, rel=1e-7)
    # The relaxation is integral on most of these (it is what makes it pay).
    assert integral >= 5


def test_flow_form_only_where_transfers_obey_the_triangle_inequality() -> None:
    # Planar distances are a metric, so the discounted transfers obey the
    # triangle inequality and "auto" picks the flow form; both forms have the
    # same optimum there. A user's matrix that breaks the inequality (one
    # hub-to-hub distance made far longer than going round by a third site)
    # gets the transport form, whose optimum still bounds the enumerated one
    # (tests/bruteforce.py) and is it when integral.
    for seed in range(3):
        data, d, fixed, handling = _network(seed)
        params = HubModelParams(allocation="single", hubs=2, transfer_factor=0.6)
        auto = solve_path_relaxation(data, d, params)
        transport = solve_path_relaxation(data, d, params, form="transport")
        assert auto is not None and transport is not None and auto.form == "flow"
        assert auto.objective == pytest.approx(transport.objective, rel=1e-9)
        bent = d.copy()
        bent[0, 1] = bent[1, 0] = 3.0 * (d[0, 2] + d[2, 1])
        want, _ = _enumerated(data, bent, fixed, handling, p=2, alpha=0.6)
        r = solve_path_relaxation(data, bent, params)
        assert r is not None and r.form == "transport"
        assert r.objective <= want * (1 + 1e-9)
        if r.integral:
            assert r.objective == pytest.approx(want, rel=1e-7)
        sol = solve_network(data, bent, params, SolverParams())
        assert sol.costs["total"] == pytest.approx(want, rel=1e-7)


def test_triangle_check_against_a_plain_loop() -> None:
    # Random costs mostly break it; discounted planar distances plus the
    # second hub's handling never do; a plain triple loop is the reference.
    rng = np.random.default_rng(5)
    seen = set()
    for k in range(60):
        if k % 2:
            xy = rng.uniform(0, 100, size=(5, 2))
            hop = 0.7 * np.sqrt(((xy[:, None] - xy[None]) ** 2).sum(-1))
            hop += rng.uniform(0, 2, size=5)[None, :]
        else:
            hop = rng.uniform(0, 10, size=(5, 5))
        np.fill_diagonal(hop, 0.0)
        plain = all(
            hop[a, m] + hop[m, b] >= hop[a, b] for a in range(5) for m in range(5) for b in range(5)
        )
        assert satisfies_triangle(hop) == plain
        seen.add(plain)
    assert seen == {True, False}


def test_start_pricing_and_fixing_agree_with_brute_force() -> None:
    # The cost the solver gives its starting plan (heuristics.
    # single_allocation_cost, used for reduced-cost fixing) must be the
    # plan's real cost: checked against tests/bruteforce.py, which
    # enumerates every allocation. And fixing by reduced cost against the
    # optimum never rules out the optimal plan's own allocations.
    for seed in range(4):
        data, d, fixed, handling = _network(seed)
        params = HubModelParams(allocation="single", hubs=3, transfer_factor=0.7)
        want, _ = _enumerated(data, d, fixed, handling, p=3, alpha=0.7)
        sol = solve_network(data, d, params, SolverParams(name="cbc"))
        hub_of = {t: h.id for h in sol.hubs for t in h.terminals}
        assign = np.array([data.index(hub_of[s.id]) for s in data.sites])
        assert single_allocation_cost(data, d, params, assign) == pytest.approx(want, rel=1e-9)
        relaxed = solve_path_relaxation(data, d, params)
        assert relaxed is not None
        out = fixable(relaxed, want)
        assert not out[np.arange(data.n), assign].any()


def test_sort_capacity_and_multiple_allocation_skip_it() -> None:
    data, d, _, _ = _network(1)
    assert solve_path_relaxation(data, d, HubModelParams(allocation="multiple", hubs=2)) is None
    assert (
        solve_path_relaxation(data, d, HubModelParams(allocation="single", capacitated=True))
        is None
    )


def test_cbc_by_name_solves_the_flow_model() -> None:
    # Asking for CBC must reach CBC: the second-solver cross-checks rely on it.
    data, d, _, _ = _network(2)
    params = HubModelParams(allocation="single", hubs=2)
    by_cbc = solve_network(data, d, params, SolverParams(name="cbc"))
    by_default = solve_network(data, d, params, SolverParams())
    assert by_cbc.stats.solver == "cbc" and by_cbc.stats.formulation != PATH
    assert by_cbc.costs["total"] == pytest.approx(by_default.costs["total"], rel=1e-7)


def test_published_optima_through_both_routes() -> None:
    # Published: AP n=10 p=2 167493.06, hubs 3 7 (1-based); p=3 136008.13,
    # hubs 3 4 7 (published_optima.csv, Ernst and Krishnamoorthy 1996). The
    # relaxation is integral for p=2; for p=3 it is not (136007.41), so
    # branching on it finishes the job.
    data = ap_network(10)
    d = euclid(data)
    two = solve_network(data, d, ap_params("single", 2), SolverParams())
    assert two.stats.formulation == PATH
    assert abs(two.costs["total"] - 167493.06) <= 0.005
    assert sorted(two.hub_ids, key=int) == ["3", "7"]
    three = solve_network(data, d, ap_params("single", 3), SolverParams())
    assert three.stats.formulation != PATH and three.stats.status == "optimal"
    assert abs(three.costs["total"] - 136008.13) <= 0.005
    assert sorted(three.hub_ids, key=int) == ["3", "4", "7"]
    relaxed = solve_path_relaxation(data, d, ap_params("single", 3))
    assert relaxed is not None and not relaxed.integral
    assert relaxed.objective <= 136008.13


def test_pass_columns_gives_highs_the_lp_as_written() -> None:
    # Worked by hand: min x + 2y s.t. x + y = 1.5, 0 <= x, y <= 1 has
    # x = 1, y = 0.5, cost 2.0; with y integer, y = 0 would need x = 1.5 > 1,
    # so y = 1, x = 0.5, cost 2.5.
    from hubnet._highs import pass_columns, quiet_highs

    cost = np.array([1.0, 2.0])
    bounds = (np.zeros(2), np.ones(2))
    rows = (np.array([1.5]), np.array([1.5]))
    matrix = (np.array([0, 1, 2], dtype=np.int32), np.array([0, 0]), np.array([1.0, 1.0]))
    for integer, want_x, want_cost in (
        (None, [1.0, 0.5], 2.0),
        (np.array([0, 1]), [0.5, 1.0], 2.5),
    ):
        h = quiet_highs(1)
        pass_columns(h, cost, bounds, rows, matrix, integer)
        h.run()
        assert list(np.round(h.getSolution().col_value, 9)) == want_x
        assert h.getInfo().objective_function_value == pytest.approx(want_cost)


@pytest.mark.parametrize("allocation", ["single", "multiple"])
def test_one_hub_is_priced_directly_and_matches_enumeration(allocation: str) -> None:
    # One hub: every candidate priced, no solver. Reference: tests/
    # bruteforce.py's enumeration, with fixed and handling costs, and with
    # a forced-open hub that is not the cheapest.
    from dataclasses import replace

    for seed in range(4):
        data, d, fixed, handling = _network(seed)
        params = HubModelParams(allocation=allocation, hubs=1, transfer_factor=0.6)  # type: ignore[arg-type]
        want, hubs = _enumerated(data, d, fixed, handling, p=1, alpha=0.6, allocation=allocation)
        sol = solve_network(data, d, params, SolverParams())
        assert sol.stats.solver == "enumeration" and sol.stats.status == "optimal"
        assert sol.costs["total"] == pytest.approx(want, rel=1e-9)
        assert sol.stats.objective == pytest.approx(want, rel=1e-9)
        assert [data.index(h) for h in sol.hub_ids] == list(hubs)
        other = (hubs[0] + 1) % data.n
        sites = list(data.sites)
        sites[other] = replace(sites[other], hub_status="open")
        forced = replace(data, sites=tuple(sites))
        want_forced, _ = _enumerated(
            data, d, fixed, handling, p=1, alpha=0.6, allocation=allocation, forced=[other]
        )
        sol = solve_network(forced, d, params, SolverParams())
        assert list(sol.hub_ids) == [data.sites[other].id]
        assert sol.costs["total"] == pytest.approx(want_forced, rel=1e-9) and want_forced > want


BRANCHED = "single-allocation path formulation, branch and bound on its relaxation"


def _fractional_cases() -> list[tuple[NetworkData, np.ndarray, HubModelParams, float]]:
    """Random networks whose path relaxation is fractional, with their enumerated optimum.

    Hub counts 2 and 3 (with fixed costs and a free hub count the relaxation
    of these networks came out integral every time).
    """
    cases = []
    for seed in range(12):
        data, d, fixed, handling = _network(seed, n=8)
        for p in (2, 3):
            params = HubModelParams(allocation="single", hubs=p, transfer_factor=0.9)
            relaxed = solve_path_relaxation(data, d, params)
            if relaxed is not None and not relaxed.integral:
                want, _ = _enumerated(data, d, fixed, handling, p=p, alpha=0.9)
                cases.append((data, d, params, want))
    return cases


def test_branching_on_a_fractional_relaxation_reaches_the_enumerated_optimum(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    # Reference: tests/bruteforce.py (every hub set and allocation). The
    # search starts from hubnet's local-search plan in solve_network, and
    # from no plan at all when called directly. Screening (hubnet.screen)
    # makes most of these relaxations integral: first with it, then without
    # it so that the branching itself is what is tested.
    import hubnet.solve
    from hubnet.pathlp import branch_on_path, relax_path

    cases = _fractional_cases()
    assert len(cases) >= 8  # enough fractional relaxations to mean something
    for data, d, params, want in cases:
        sol = solve_network(data, d, params, SolverParams(time_limit_s=60.0))
        assert sol.stats.status == "optimal"
        assert sol.costs["total"] == pytest.approx(want, rel=1e-7)
    monkeypatch.setattr(hubnet.solve, "_screening_applies", lambda *args: False)
    for data, d, params, want in cases:
        sol = solve_network(data, d, params, SolverParams(time_limit_s=60.0))
        assert sol.stats.formulation == BRANCHED and sol.stats.status == "optimal"
        # The summary reports the limit set and the starting search that ran.
        assert sol.stats.options["time_limit_s"] == 60.0 and sol.stats.start_seconds > 0
        assert sol.costs["total"] == pytest.approx(want, rel=1e-7)
        out = relax_path(data, d, params)
        assert out is not None
        found = branch_on_path(out[1], out[0], None)
        assert found.proven and found.nodes >= 1
        assert found.objective == pytest.approx(want, rel=1e-7)
        assert found.bound <= want * (1 + 1e-9)
        # Stopped at once, it proves nothing and its bound is the root's.
        out = relax_path(data, d, params)
        assert out is not None
        stopped = branch_on_path(out[1], out[0], None, max_nodes=0)
        assert not stopped.proven and stopped.assign is None
        assert stopped.bound == pytest.approx(out[0].objective) and stopped.bound <= want


def test_node_limit_hands_over_to_the_flow_model(monkeypatch: pytest.MonkeyPatch) -> None:
    # With no node allowed the search stops unproven and the flow model's
    # MILP finishes: same enumerated optimum (tests/bruteforce.py).
    import hubnet.pathlp

    monkeypatch.setattr(hubnet.pathlp, "MAX_NODES", 0)
    data, d, params, want = _fractional_cases()[0]
    sol = solve_network(data, d, params, SolverParams())
    assert sol.stats.formulation not in (BRANCHED, PATH) and sol.stats.status == "optimal"
    assert sol.costs["total"] == pytest.approx(want, rel=1e-7)


def test_forced_open_hub_survives_the_hand_over(monkeypatch: pytest.MonkeyPatch) -> None:
    # A forced-open hub's own allocation is fixed at 1 in the relaxation and
    # HiGHS may give it any reduced cost; fixing by reduced cost must not
    # close it in the MILP that takes over after the node limit (it did:
    # the MILP was infeasible). Reference: tests/bruteforce.py.
    from dataclasses import replace

    import hubnet.pathlp

    monkeypatch.setattr(hubnet.pathlp, "MAX_NODES", 0)
    checked = 0
    for seed in range(40):
        data, d, fixed, handling = _network(seed)
        k = seed % data.n
        sites = list(data.sites)
        sites[k] = replace(sites[k], hub_status="open")
        data = replace(data, sites=tuple(sites))
        params = HubModelParams(allocation="single", hubs=3, transfer_factor=0.9)
        relaxed = solve_path_relaxation(data, d, params)
        if relaxed is None or relaxed.integral:
            continue
        assert relaxed.reduced_cost[k, k] == 0.0
        want, _ = _enumerated(data, d, fixed, handling, p=3, alpha=0.9, forced=[k])
        sol = solve_network(data, d, params, SolverParams())
        assert sol.stats.status == "optimal" and data.sites[k].id in sol.hub_ids
        assert sol.costs["total"] == pytest.approx(want, rel=1e-7)
        checked += 1
    assert checked >= 3


def test_capacitated_start_with_a_fixed_hub_count() -> None:
    # Random capacities, 2 or 3 hubs: where enumeration (tests/bruteforce.py)
    # finds a plan within the capacities, the local search should find a
    # start on most, every start must fit and cost no less than the optimum.
    # (When the first hub set did not fit, the swap search accepted no move
    # at all: the cost test compared against inf - inf.)

    from hubnet.heuristics import starting_plan

    feasible = started = 0
    for seed in range(30):
        data, d, w, cap = _capacitated(seed, 0.5, (2, 4))
        for p in (2, 3):
            want = _capacitated_optimum(seed, w, cap, p)
            if not np.isfinite(want):
                continue
            feasible += 1
            params = HubModelParams(
                allocation="single", hubs=p, transfer_factor=0.8, capacitated=True
            )
            found = starting_plan(data, d, params, max_seconds=5)
            if found is None:
                continue
            started += 1
            hubs, assign, cost = found
            assert assign is not None and len(hubs) == p
            load = np.bincount(assign, weights=w.sum(axis=1), minlength=data.n)
            assert all(load[k] <= cap[k] + 1e-9 for k in hubs)
            assert cost >= want * (1 - 1e-9)
    # When written (other random capacities): 34 of 39, and 17 of 39 before the fix.
    assert feasible >= 20 and started >= 0.8 * feasible


def test_branching_time_limit_counts_from_the_search_not_the_object() -> None:
    # HiGHS measures its time limit against everything a Highs object has
    # run so far. Here the object has already run over 3.5 s (the root LP
    # re-solved from scratch); a search given 3 s must still finish its few
    # nodes (CAB n = 15, p = 3, alpha 1.0: 3 nodes, well under a second)
    # and reach the optimum the flow model's MILP on CBC finds.
    from benchdata import cab_network, cab_params

    from hubnet.pathlp import branch_on_path, relax_path

    data = cab_network(15)
    d = euclid(data)
    params = cab_params("single", 3, 1.0)
    out = relax_path(data, d, params, threads=1)
    assert out is not None and not out[0].integral
    relaxed, model = out
    while model.h.getRunTime() < 3.5:
        model.h.clearSolver()
        model.h.run()
    found = branch_on_path(model, relaxed, None, time_limit_s=3.0)
    assert found.proven and not found.out_of_time
    want = solve_network(data, d, params, SolverParams(name="cbc"))
    assert found.objective == pytest.approx(want.costs["total"], rel=1e-7)


def _narrowing(lines: list[str]) -> tuple[int, int] | None:
    """(allocations, hubs) ruled out, from solve_network's progress lines."""
    import re

    for line in lines:
        m = re.search(r"(\d+) of \d+ allocations ruled out, (\d+) of", line)
        if m:
            return int(m.group(1)), int(m.group(2))
    return None


NARROWED = {
    "cbc": "single-allocation flow (EK96)",
    "path": "single-allocation path formulation, branch and bound on its relaxation",
}


@pytest.mark.parametrize("route", ["cbc", "path"])
@pytest.mark.parametrize("p", [None, 2, 3])
def test_flow_model_narrowed_by_its_own_relaxation_keeps_the_optimum(
    monkeypatch: pytest.MonkeyPatch, p: int | None, route: str
) -> None:
    # Where the whole path relaxation is too large to build, the flow
    # model's LP rules out allocations and hubs (reduced costs, probing),
    # then either the path relaxation over the allocations left is branched
    # on ("path") or, when that too is too large, the flow model is built
    # again without the hubs ruled out and CBC solves it ("cbc").
    # Reference: tests/bruteforce.py (every hub set and allocation), with
    # fixed and handling costs.
    import hubnet.solve

    # The hub-set search (tests/test_setsearch.py) would take these first.
    monkeypatch.setattr(hubnet.solve, "_set_search_applies", lambda *args: False)
    if route == "cbc":
        monkeypatch.setattr(hubnet.solve, "PATH_MAX_COLUMNS", 0)
    else:
        monkeypatch.setattr(hubnet.solve, "_path_relaxation_applies", lambda *args: False)
    allocations = hubs = 0
    for seed in range(8):
        data, d, fixed, handling = _network(seed, n=8)
        params = HubModelParams(allocation="single", hubs=p, transfer_factor=0.8)
        lines: list[str] = []
        sol = solve_network(data, d, params, SolverParams(), progress=lines.append)
        want, _ = _enumerated(data, d, fixed, handling, p=p, alpha=0.8)
        assert sol.stats.formulation == NARROWED[route]
        assert sol.stats.status == "optimal"
        assert sol.costs["total"] == pytest.approx(want, rel=1e-7), seed
        narrowed = _narrowing(lines)
        assert narrowed is not None, lines
        allocations += narrowed[0]
        hubs += narrowed[1]
    # It rules out a share of the 8 x 8 allocations of each network, and
    # some hubs (measured: 225-428 allocations, 1-4 hubs over the 8 networks).
    assert allocations >= 100 and hubs >= 1


def test_narrowing_keeps_forced_hubs_and_bent_matrices(monkeypatch: pytest.MonkeyPatch) -> None:
    # A forced-open hub is never ruled out; a matrix that breaks the triangle
    # inequality keeps every hub's transfers (only allocations are fixed).
    # Reference: tests/bruteforce.py. CBC asked by name gets the model unnarrowed.
    from dataclasses import replace

    import hubnet.solve

    monkeypatch.setattr(hubnet.solve, "_set_search_applies", lambda *args: False)
    monkeypatch.setattr(hubnet.solve, "PATH_MAX_COLUMNS", 0)
    rebuilt = 0
    for seed in range(6):
        data, d, fixed, handling = _network(seed, n=8)
        k = (3 * seed) % data.n
        sites = list(data.sites)
        sites[k] = replace(sites[k], hub_status="open")
        data = replace(data, sites=tuple(sites))
        bent = d.copy()
        bent[0, 1] = bent[1, 0] = 3.0 * (d[0, 2] + d[2, 1])
        params = HubModelParams(allocation="single", hubs=3, transfer_factor=0.8)
        for dist in (d, bent):
            want, _ = _enumerated(data, dist, fixed, handling, p=3, alpha=0.8, forced=[k])
            lines: list[str] = []
            sol = solve_network(data, dist, params, SolverParams(), progress=lines.append)
            assert sol.stats.status == "optimal" and data.sites[k].id in sol.hub_ids
            assert sol.costs["total"] == pytest.approx(want, rel=1e-7), seed
            narrowed = _narrowing(lines)
            assert narrowed is not None
            built, left = _model_sizes(lines)
            # Rebuilt smaller only with hubs ruled out and a metric matrix.
            if dist is bent or narrowed[1] == 0:
                assert left == built
            else:
                assert left < built
                rebuilt += 1
        lines = []
        solve_network(data, d, params, SolverParams(name="cbc"), progress=lines.append)
        assert _narrowing(lines) is None
    assert rebuilt >= 1


def _model_sizes(lines: list[str]) -> tuple[int, int]:
    """Variables of the flow model as built and as left after narrowing."""
    import re

    text = "\n".join(lines)
    built = re.search(r"model built in [\d.]+ s: (\d+) variables", text)
    left = re.search(r"(\d+) variables left", text)
    assert built and left, lines
    return int(built.group(1)), int(left.group(1))


def test_probing_closes_only_hubs_no_cheaper_plan_opens() -> None:
    # Every hub that probing closes must be open in no plan cheaper than the
    # incumbent: the enumerated best plan with that hub forced open
    # (tests/bruteforce.py) costs at least as much. The incumbent is set 3 %
    # above the optimum so that some hubs open in cheaper plans must be kept.
    import pulp

    from hubnet.model import build_model
    from hubnet.solve import _probe_hubs

    closed_total = kept_near = 0
    for seed in range(10):
        data, d, fixed, handling = _network(seed, n=8)
        params = HubModelParams(allocation="single", hubs=2, transfer_factor=0.8)
        best, best_hubs = _enumerated(data, d, fixed, handling, p=2, alpha=0.8)
        incumbent = 1.03 * best
        model = build_model(data, d, params)
        model.problem.solve(pulp.HiGHS(msg=False, mip=False, presolve="off"))
        closed = _probe_hubs(model, set(best_hubs), incumbent, budget_s=30.0)
        for k in range(data.n):
            if k in best_hubs:
                continue
            forced, _ = _enumerated(data, d, fixed, handling, p=2, alpha=0.8, forced=[k])
            if k in closed:
                assert forced >= incumbent * (1 - 1e-9), (seed, k)
            elif forced < incumbent:
                kept_near += 1
        closed_total += len(closed)
    assert closed_total >= 10  # it does close hubs on these networks
    assert kept_near >= 5  # and there were hubs it had to keep


def test_swap_search_from_given_hubs_is_no_worse_than_they_are() -> None:
    # starting_plan(initial_hubs=...) starts its swap search from the hub set
    # given (the flow LP's favourites in solve_network): its plan costs no
    # more than that set allocated as is, and no less than the enumerated
    # optimum (tests/bruteforce.py).
    from hubnet.heuristics import allocate_to_hubs, starting_plan

    for seed in range(6):
        data, d, fixed, handling = _network(seed, n=8)
        params = HubModelParams(allocation="single", hubs=3, transfer_factor=0.8)
        best, _ = _enumerated(data, d, fixed, handling, p=3, alpha=0.8)
        given = [seed % 8, (seed + 3) % 8, (seed + 5) % 8]
        assign = allocate_to_hubs(data, d, params, given)
        assert assign is not None
        as_is = single_allocation_cost(data, d, params, assign)
        found = starting_plan(data, d, params, initial_hubs=given)
        assert found is not None and len(found[0]) == 3
        assert best * (1 - 1e-9) <= found[2] <= as_is * (1 + 1e-12)
        assert found[2] == pytest.approx(single_allocation_cost(data, d, params, found[1]))


def test_narrowing_gives_up_when_its_lp_would_eat_the_time_limit() -> None:
    # AP, 40 sites (published data): the flow model's LP takes seconds; with
    # 0.2 s left it may take 0.1 s, stops unsolved, and nothing may be ruled
    # out (PuLP reports such a stopped HiGHS run as solved, with the duals of
    # wherever the simplex stopped: fixing by them cut the optimum off).
    from hubnet.heuristics import starting_plan
    from hubnet.model import build_model
    from hubnet.solve import _narrow_by_flow_relaxation

    data = ap_network(40)
    d = euclid(data)
    params = ap_params("single", 3)
    start = starting_plan(data, d, params)
    assert start is not None
    lines: list[str] = []
    model = build_model(data, d, params)
    left = SolverParams(time_limit_s=0.2)
    out, allowed = _narrow_by_flow_relaxation(model, data, d, params, start, left, lines.append)
    assert allowed is None and out == start
    assert any("linear relaxation not solved in time" in x for x in lines), lines


def test_capacitated_runs_narrowed_reach_the_enumerated_optimum() -> None:
    # Sort capacities: the flow model's LP (with the capacity rows) rules out
    # allocations and hubs before CBC runs. Reference: tests/bruteforce.py
    # over every hub set and every allocation within the capacities.

    checked = 0
    for seed in range(12):
        data, d, w, cap = _capacitated(100 + seed, 0.6, (2, 3))
        for p in (None, 2):
            want = _capacitated_optimum(100 + seed, w, cap, p)
            if not np.isfinite(want):
                continue
            params = HubModelParams(
                allocation="single", hubs=p, transfer_factor=0.8, capacitated=True
            )
            lines: list[str] = []
            sol = solve_network(data, d, params, SolverParams(), progress=lines.append)
            if _narrowing(lines) is None:
                continue  # no start found: nothing to narrow against
            assert sol.stats.status == "optimal"
            assert sol.costs["total"] == pytest.approx(want, rel=1e-7), (seed, p)
            checked += 1
    assert checked >= 10


def _capacitated(
    seed: int, low: float, divisors: tuple[float, float]
) -> tuple[NetworkData, np.ndarray, np.ndarray, np.ndarray]:
    """A random network (``_network``) with random sort capacities.

    Each site sorts ``uniform(low, 1.6)`` times the total volume divided by
    ``uniform(*divisors)``, units per day. Returns the network, the
    distances, the flow matrix and the capacities.
    """
    from dataclasses import replace

    data, d, _fixed, _handling = _network(seed)
    rng = np.random.default_rng(seed)
    w = data.flow_matrix()
    cap = np.round(rng.uniform(low, 1.6, data.n) * w.sum() / rng.uniform(*divisors), 1)
    sites = tuple(replace(s, sort_capacity=float(cap[i])) for i, s in enumerate(data.sites))
    return replace(data, sites=sites), d, w, cap


def _capacitated_optimum(seed: int, w: np.ndarray, cap: np.ndarray, p: int | None) -> float:
    """Enumerated optimum within the capacities (tests/bruteforce.py), alpha 0.8."""
    _data, d, fixed, handling = _network(seed)
    want, _ = brute_force(
        d,
        w,
        allocation="single",
        p=p,
        alpha=0.8,
        fixed=fixed,
        handling=handling,
        capacity=cap,
    )
    return float(want)


def test_exact_allocation_of_given_hubs_matches_enumeration() -> None:
    # The capacitated start allocates the relaxation's hubs exactly.
    # Reference: tests/bruteforce.py, every allocation to the same hubs
    # within the sort capacities (candidates = those hubs, p = their count).
    from dataclasses import replace

    from hubnet.solve import _allocate_exactly

    checked = 0
    for seed in range(10):
        data, d, w, cap = _capacitated(200 + seed, 0.5, (2, 3))
        _data, _d, fixed, handling = _network(200 + seed)
        params = HubModelParams(allocation="single", transfer_factor=0.8, capacitated=True)
        for hubs in ([0, 3], [1, 4, 6]):
            want, _ = brute_force(
                d,
                w,
                allocation="single",
                p=len(hubs),
                alpha=0.8,
                fixed=fixed,
                handling=handling,
                capacity=cap,
                candidates=hubs,
            )
            got = _allocate_exactly(data, d, params, hubs, (5.0, None))
            if not np.isfinite(want):
                assert got is None  # no allocation fits: nothing returned
                continue
            assert got is not None
            assert got[0] == hubs
            assert got[2] == pytest.approx(want, rel=1e-7), (seed, hubs)
            load = np.bincount(got[1], weights=w.sum(axis=1), minlength=data.n)
            assert (load <= cap + 1e-6).all()
            checked += 1
            # With a hub count asked, only that many hubs are allocated to.
            counted = replace(params, hubs=len(hubs) + 1)
            assert _allocate_exactly(data, d, counted, hubs, (5.0, None)) is None
    assert checked >= 8
