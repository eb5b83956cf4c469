"""Small random planar networks for tests that check hubnet against brute force."""

from __future__ import annotations

import numpy as np

from hubnet.data import Demand, NetworkData, Site


def random_network(
    seed: int, n: int = 7, own: bool = False
) -> tuple[NetworkData, np.ndarray, np.ndarray, np.ndarray]:
    """Planar sites with flows in both directions, fixed and handling costs.

    About a fifth of the OD pairs carry nothing. With ``own`` sites also
    send volume to themselves (as in the AP data). Returns the network, its
    Euclidean distances, and the hub fixed and handling costs per site.
    """
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 100, size=(n, 2))
    w = rng.integers(0, 25, size=(n, n)).astype(float)
    w[rng.uniform(size=(n, n)) < 0.2] = 0.0  # some pairs one way only or not at all
    if not own:
        np.fill_diagonal(w, 0.0)
    fixed = rng.uniform(100, 900, size=n).round(1)
    handling = rng.uniform(0, 2, size=n).round(2)
    sites = tuple(
        Site(
            id=f"S{i}",
            name=f"site {i}",
            x=float(xy[i, 0]),
            y=float(xy[i, 1]),
            hub_fixed_cost=float(fixed[i]),
            handling_cost=float(handling[i]),
        )
        for i in range(n)
    )
    demand = tuple(
        Demand(f"S{i}", f"S{j}", float(w[i, j])) for i in range(n) for j in range(n) if w[i, j] > 0
    )
    d = np.sqrt(((xy[:, None] - xy[None]) ** 2).sum(-1))
    data = NetworkData(sites, demand, coordinates="planar", allow_same_site_demand=own)
    return data, d, fixed, handling
