"""hubnet: design hub-and-spoke freight networks.

The library API a notebook or a script uses; the ``hubnet`` command is a
thin layer over it.

>>> import hubnet
>>> callable(hubnet.run_scenario)
True
"""

from __future__ import annotations

from hubnet.api import load_scenario, run_scenario, solve_scenario
from hubnet.config import ScenarioConfig, load_config
from hubnet.errors import HubnetError, InfeasibleError, InputError, NoSolutionError
from hubnet.solution import Solution

__version__ = "0.1.0"

__all__ = [
    "HubnetError",
    "InfeasibleError",
    "InputError",
    "NoSolutionError",
    "ScenarioConfig",
    "Solution",
    "__version__",
    "load_config",
    "load_scenario",
    "run_scenario",
    "solve_scenario",
]
