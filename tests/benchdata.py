"""Access to the published hub location benchmark data in ../shared/reference.

Everything that needs the data calls :func:`reference_dir`, which skips the
test with a clear reason when the folder is absent.
"""

from __future__ import annotations

import csv
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest

from hubnet.classic import read_ap_format, read_numbers, to_network
from hubnet.config import HubModelParams
from hubnet.data import NetworkData

REFERENCE = Path(__file__).resolve().parents[1].parent / "shared" / "reference"
BENCH = REFERENCE / "hub_benchmarks"


def reference_dir() -> Path:
    """The benchmark folder, or skip the calling test."""
    if not (BENCH / "published_optima.csv").is_file():
        pytest.skip(
            f"{BENCH} not found: the published benchmark data (../shared/reference) "
            "is not available here"
        )
    return BENCH


@dataclass(frozen=True)
class PublishedRow:
    """One row of published_optima.csv."""

    n: int
    setting: str
    problem: str
    objective: float
    decimals: int
    hubs: tuple[str, ...]
    best_known_only: bool

    @property
    def instance(self) -> str:
        """Short id for test names."""
        return f"{self.problem}-n{self.n}-{self.setting.split(' ')[0]}"


def published_rows() -> list[PublishedRow]:
    """Rows of published_optima.csv (empty when the data is absent)."""
    path = BENCH / "published_optima.csv"
    if not path.is_file():
        return []
    rows = []
    with path.open(newline="") as fh:
        for r in csv.DictReader(fh):
            text = r["objective"].strip()
            decimals = len(text.split(".")[1]) if "." in text else 0
            source = r["source"]
            rows.append(
                PublishedRow(
                    n=int(r["n"]),
                    setting=r["p_or_fixed_cost_setting"].strip(),
                    problem=r["problem"].strip(),
                    objective=float(text),
                    decimals=decimals,
                    # Hub ids are the leading integers; a note may follow
                    # them, e.g. "43 159 (APdata200 node order)".
                    hubs=tuple(re.match(r"[\d\s]*", r["hubs"]).group(0).split()),  # type: ignore[union-attr]
                    best_known_only="BEST KNOWN" in source.upper()
                    or "UNREVIEWED" in source.upper(),
                )
            )
    return rows


def ap_params(allocation: str, hubs: int | None, capacitated: bool = False) -> HubModelParams:
    """AP cost convention (SOURCES.md section 2; Ernst and Krishnamoorthy 1996).

    Collection 3, transfer 0.75, distribution 2, objective divided by 1000
    (a cost of 0.001 per unit-distance).
    """
    return HubModelParams(
        allocation="single" if allocation == "single" else "multiple",
        hubs=hubs,
        capacitated=capacitated,
        collection_factor=3.0,
        transfer_factor=0.75,
        distribution_factor=2.0,
        cost_per_unit_km=1e-3,
    )


def cab_params(allocation: str, p: int | None, alpha: float) -> HubModelParams:
    """CAB cost convention (SOURCES.md section 1, from the *.3.4 files).

    Collection = distribution = 1, transfer ``alpha``, raw flows and planar
    distances (a cost of 1 per unit-distance).
    """
    return HubModelParams(
        allocation="single" if allocation == "single" else "multiple",
        hubs=p,
        collection_factor=1.0,
        transfer_factor=alpha,
        distribution_factor=1.0,
        cost_per_unit_km=1.0,
    )


def ap_network(n: int, fixed: str | None = None, cap: str | None = None) -> NetworkData:
    """AP instance with n nodes through hubnet's own table reader.

    ``fixed`` and ``cap`` are ``"L"`` or ``"T"`` (the FcostL/FcostT and
    CapL/CapT files of the capacitated problem).
    """
    base = reference_dir() / "AP"
    name = f"{n}.3" if (base / f"{n}.3").is_file() else f"{n}.2"
    inst = read_ap_format(base / name)
    fixed_costs = read_numbers(base / f"Fcost{fixed}.{n}") if fixed else None
    capacities = read_numbers(base / f"Cap{cap}.{n}") if cap else None
    return to_network(inst, fixed_costs=fixed_costs, capacities=capacities)


def cab_network(n: int) -> NetworkData:
    """CAB instance: the top-left n x n block of the 25-city data (planar)."""
    inst = read_ap_format(reference_dir() / "CAB" / "25.3.4")
    return to_network(inst, n=n)


def euclid(data: NetworkData) -> np.ndarray:
    """Euclidean distances between planar sites (independent of hubnet)."""
    xy = np.array([[s.x, s.y] for s in data.sites], dtype=float)
    return np.sqrt(((xy[:, None, :] - xy[None, :, :]) ** 2).sum(axis=-1))
