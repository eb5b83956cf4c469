"""Readers for the published hub location benchmark files (OR-Library AP and CAB).

They turn the benchmark formats into the same sites and demand tables a
user would give, and pass them through hubnet's own validation, so tests
and benchmarks exercise the real input path. Conventions (see the data's
SOURCES.md): planar coordinates with Euclidean distances; AP flows are used
as given, the non-zero diagonal included (same-site volume is routed via
the site's hub); AP objectives are reported divided by 1000, which is a
cost per unit-distance of 0.001.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from hubnet.data import Demand, NetworkData, Site


@dataclass(frozen=True, slots=True)
class ClassicInstance:
    """Coordinates, flows and the cost factors printed in a benchmark file.

    Attributes
    ----------
    xy
        ``(n, 2)`` planar coordinates.
    flows
        ``(n, n)`` flows, ``flows[i, j]`` from i to j.
    collection, transfer, distribution
        Cost factors from the file (chi, alpha, delta).
    p
        Hub count printed in the file.
    """

    xy: np.ndarray
    flows: np.ndarray
    collection: float
    transfer: float
    distribution: float
    p: int


def read_ap_format(path: str | Path) -> ClassicInstance:
    """Read a file in the OR-Library AP layout (also used by the CAB ``*.3.4`` files).

    Layout: ``n``; ``n`` lines ``x y``; the ``n x n`` flow matrix; ``p``;
    collection, transfer and distribution factors.
    """
    tokens = Path(path).read_text().split()
    n = int(tokens[0])
    pos = 1
    xy = np.array(tokens[pos : pos + 2 * n], dtype=float).reshape(n, 2)
    pos += 2 * n
    flows = np.array(tokens[pos : pos + n * n], dtype=float).reshape(n, n)
    pos += n * n
    p = int(float(tokens[pos]))
    chi, alpha, delta = (float(v) for v in tokens[pos + 1 : pos + 4])
    return ClassicInstance(xy, flows, chi, alpha, delta, p)


def read_numbers(path: str | Path) -> np.ndarray:
    """Read a whitespace-separated list of numbers (Fcost and Cap files)."""
    return np.array(Path(path).read_text().split(), dtype=float)


def to_network(
    inst: ClassicInstance,
    *,
    n: int | None = None,
    fixed_costs: np.ndarray | None = None,
    capacities: np.ndarray | None = None,
) -> NetworkData:
    """Build validated :class:`NetworkData` (planar) from a benchmark instance.

    Parameters
    ----------
    inst
        The instance.
    n
        Keep the first ``n`` nodes only (CAB subsets are the top-left block).
    fixed_costs, capacities
        Per-node hub fixed costs and sort capacities, if any.
    """
    import pandas as pd

    from hubnet.inputs import network_from_frames

    size = inst.xy.shape[0] if n is None else n
    ids = [str(i + 1) for i in range(size)]
    sites = pd.DataFrame(
        {
            "id": ids,
            "name": [f"node {i}" for i in ids],
            "x": inst.xy[:size, 0],
            "y": inst.xy[:size, 1],
            "can_be_hub": True,
            "hub_fixed_cost": 0.0 if fixed_costs is None else fixed_costs[:size],
        }
    )
    if capacities is not None:
        sites["sort_capacity"] = capacities[:size]
    w = inst.flows[:size, :size]
    rows, cols = np.nonzero(w)
    demand = pd.DataFrame(
        {
            "origin": [ids[i] for i in rows],
            "destination": [ids[j] for j in cols],
            "volume": w[rows, cols],
        }
    )
    return network_from_frames(sites, demand, allow_same_site_demand=True, volume_unit="units")


def to_network_direct(inst: ClassicInstance, n: int | None = None) -> NetworkData:
    """Build :class:`NetworkData` without the table reader (for quick experiments)."""
    size = inst.xy.shape[0] if n is None else n
    sites = tuple(
        Site(id=str(i + 1), name=f"node {i + 1}", x=float(x), y=float(y))
        for i, (x, y) in enumerate(inst.xy[:size])
    )
    w = inst.flows[:size, :size]
    demand = tuple(
        Demand(str(i + 1), str(j + 1), float(w[i, j])) for i, j in zip(*np.nonzero(w), strict=True)
    )
    return NetworkData(sites, demand, coordinates="planar", allow_same_site_demand=True)
