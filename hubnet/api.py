"""Library entry points: load a scenario, solve it, write its run folder.

The CLI calls only these, so a notebook gets exactly what the command does.

Data flows one way: config -> :func:`hubnet.inputs.load_network` ->
:func:`hubnet.distances.distance_matrix` -> :func:`hubnet.solve.solve_network`
-> :func:`hubnet.runfolder.write_run`.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

from hubnet.config import ScenarioConfig, load_config
from hubnet.data import DistanceMatrix, NetworkData
from hubnet.distances import distance_matrix
from hubnet.inputs import load_network
from hubnet.solution import Solution
from hubnet.solve import Progress, _quiet, solve_network

if TYPE_CHECKING:
    from hubnet.freight import PlanBook


@dataclass(frozen=True, eq=False)
class LoadedScenario:
    """A validated scenario ready to solve.

    Attributes
    ----------
    config
        The frozen config.
    data
        Validated sites and demand.
    distances
        Distances (km) and optional hours used by the model.
    """

    config: ScenarioConfig
    data: NetworkData
    distances: DistanceMatrix


def load_scenario(
    config: str | Path | ScenarioConfig, overrides: Mapping[str, Any] | None = None
) -> LoadedScenario:
    """Read and validate a scenario (config, inputs and distances), solving nothing.

    Raises
    ------
    InputError
        With every problem found in the config and the input files.
    """
    cfg = config if isinstance(config, ScenarioConfig) else load_config(config, overrides)
    data = load_network(cfg)
    return LoadedScenario(cfg, data, distance_matrix(data, cfg.distances))


def solve_scenario(
    scenario: LoadedScenario,
    progress: Progress = _quiet,
    *,
    start_hubs: Sequence[str] | None = None,
    book: PlanBook | None = None,
) -> Solution:
    """Solve a loaded scenario and return the priced plan.

    ``start_hubs`` (site ids, for example an earlier run's hubs) replaces
    the local-search starting plan given to the solver as its MIP start.
    ``book`` (freight scenarios only) hands plans of earlier solves of the
    same network in and takes this one's out (:class:`hubnet.freight.PlanBook`).
    """
    cfg = scenario.config
    if scenario.data.vehicles:
        from hubnet.freight import solve_freight

        return solve_freight(
            scenario.data,
            scenario.distances,
            cfg.model,
            cfg.freight,
            cfg.solver,
            scenario=cfg.name,
            progress=progress,
            start_hubs=start_hubs,
            book=book,
        )
    return solve_network(
        scenario.data,
        scenario.distances.km,
        cfg.model,
        cfg.solver,
        scenario=cfg.name,
        progress=progress,
        start_hubs=start_hubs,
    )


def run_scenario(
    config: str | Path | ScenarioConfig | LoadedScenario,
    out_dir: str | Path,
    *,
    force: bool = False,
    overrides: Mapping[str, Any] | None = None,
    progress: Progress = _quiet,
    start_hubs: Sequence[str] | None = None,
    extra_files: Mapping[str, bytes | str] | None = None,
    book: PlanBook | None = None,
) -> tuple[Solution, Path]:
    """Load, solve and write a run folder atomically.

    The output folder is checked before any solving, so an existing folder
    is reported at once; it is never overwritten without ``force``. Besides
    the summary and the CSV tables, the folder gets ``sites.csv``,
    ``map.html`` and ``tables.xlsx`` (:mod:`hubnet.report.runfiles`).

    ``config`` may be a scenario already loaded (and edited) with
    :func:`load_scenario`; ``start_hubs`` and ``book`` are passed to :func:`solve_scenario`;
    ``extra_files`` are added to the run folder (by relative name).

    Returns
    -------
    tuple
        The solution and the run folder written.
    """
    from hubnet.report.runfiles import extra_run_files
    from hubnet.report.summary import summary_dict
    from hubnet.runfolder import preflight, write_run

    out = Path(out_dir)
    preflight(out, force)
    if isinstance(config, LoadedScenario):
        scenario = config
    else:
        scenario = load_scenario(config, overrides)
    sol = solve_scenario(scenario, progress, start_hubs=start_hubs, book=book)
    cfg = scenario.config
    text = cfg.source.read_text(encoding="utf-8") if cfg.source is not None else None
    summary = summary_dict(sol, cfg)
    extra: dict[str, bytes | str] = {"solver.log": sol.stats.log} if sol.stats.log else {}
    progress("drawing map.html and writing tables.xlsx")
    extra.update(extra_run_files(sol, scenario.data, summary, folder=out))
    extra.update(extra_files or {})
    path = write_run(out, sol, force=force, config_text=text, summary=summary, extra_files=extra)
    return sol, path
