"""Every scenario config shipped in configs/ loads, and its input files validate.

Also checks that the Iberia demo's demand file is exactly what its generator
script produces, so the demo data stays reproducible.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from hubnet.api import load_scenario
from hubnet.config import ScenarioConfig, load_config
from hubnet.units import VOLUME_UNITS

REPO = Path(__file__).resolve().parent.parent
CONFIGS = sorted((REPO / "configs").glob("*.toml"))
IBERIA = REPO / "demo_regions" / "iberia"


def test_configs_folder_is_not_empty() -> None:
    # The demo config the README runs must be among them.
    assert REPO / "configs" / "demo.toml" in CONFIGS


@pytest.mark.parametrize("path", CONFIGS, ids=[p.name for p in CONFIGS])
def test_config_loads_and_inputs_validate(path: Path) -> None:
    cfg = load_config(path)
    assert isinstance(cfg, ScenarioConfig)
    assert cfg.name
    assert cfg.source == path
    assert cfg.inputs.volume_unit in VOLUME_UNITS
    for named in (cfg.inputs.sites, cfg.inputs.demand, cfg.inputs.distances):
        assert named is None or named.is_file(), f"{path.name} names a missing file {named}"

    scenario = load_scenario(path)
    data = scenario.data
    n = data.n
    assert n >= 2
    assert len(data.demand) > 0
    assert int(data.candidates().sum()) >= (cfg.model.hubs or 1)
    km = scenario.distances.km
    assert km.shape == (n, n)
    off_diagonal = ~np.eye(n, dtype=bool)
    assert (km[off_diagonal] > 0).all(), "two different sites at zero distance"
    assert (km.diagonal() == 0).all()


def test_iberia_generator_reproduces_the_demand_file() -> None:
    result = subprocess.run(
        [sys.executable, str(IBERIA / "generate.py"), "--check"],
        capture_output=True,
        text=True,
        timeout=120,
        check=False,
    )
    assert result.returncode == 0, result.stdout + result.stderr
    assert "up to date" in result.stdout


@pytest.mark.parametrize("extra", [[], ["--small"]], ids=["france", "france_small"])
def test_france_generator_reproduces_its_files(extra: list[str]) -> None:
    # The national demo's sites, demand and vehicles are generated; the
    # committed CSV files must be exactly what the generator writes.
    result = subprocess.run(
        [sys.executable, str(REPO / "demo_regions" / "france" / "generate.py"), *extra, "--check"],
        capture_output=True,
        text=True,
        timeout=300,
        check=False,
    )
    assert result.returncode == 0, result.stdout + result.stderr
