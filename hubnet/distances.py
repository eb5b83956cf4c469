"""Leg distances between sites: geodesic times road circuity, Euclidean, or the user's matrix.

This module is pure: it maps a :class:`~hubnet.data.NetworkData` and a
:class:`~hubnet.config.DistanceParams` to a :class:`~hubnet.data.DistanceMatrix`
and reads no file, clock or global state.

Methods (config key ``distances.method``):

``auto``
    The user's matrix when one was supplied, else ``geodesic`` for
    latitude/longitude data and ``euclidean`` for planar x/y data.
``geodesic``
    Shortest distance on the WGS84 ellipsoid (Karney's algorithm, through
    :class:`pyproj.Geod`), in km, times the road circuity factor
    ``distances.circuity``.
``euclidean``
    Straight-line distance between planar x/y coordinates, in the data's own
    length unit, with no circuity factor: published hub location benchmark
    data is defined this way.
``matrix``
    The user's matrix, exactly as given (km and, when supplied, hours).

Drive times are taken from the user's matrix when it has them and are
``None`` otherwise; this module invents no speeds.
"""

from __future__ import annotations

import numpy as np
from pyproj import Geod

from hubnet.config import DistanceParams
from hubnet.data import DistanceMatrix, NetworkData
from hubnet.errors import InputError, Problem
from hubnet.units import M_PER_KM

#: Config keys named in error messages.
METHOD_KEY = "distances.method"
CIRCUITY_KEY = "distances.circuity"

#: At most this many bad matrix cells are listed in one error.
_MAX_CELL_PROBLEMS = 10


def geodesic_km(lat: np.ndarray, lon: np.ndarray) -> np.ndarray:
    """Geodesic distances between all pairs of points on the WGS84 ellipsoid.

    All ``n * (n - 1) / 2`` unordered pairs are solved in one vectorised
    call of :meth:`pyproj.Geod.inv`; the lower triangle mirrors the upper,
    so the result is exactly symmetric with a zero diagonal.

    Parameters
    ----------
    lat, lon
        1-D arrays of ``n`` latitudes and longitudes, degrees (WGS84).

    Returns
    -------
    numpy.ndarray
        ``(n, n)`` float array of distances, km, with no circuity factor.

    Examples
    --------
    One degree of longitude along the equator is ``a * pi / 180`` with
    ``a`` the WGS84 semi-major axis, 6378.137 km:

    >>> import numpy as np
    >>> km = geodesic_km(np.array([0.0, 0.0]), np.array([0.0, 1.0]))
    >>> round(float(km[0, 1]), 6)
    111.319491
    """
    lat = np.asarray(lat, dtype=float)
    lon = np.asarray(lon, dtype=float)
    n = lat.shape[0]
    km = np.zeros((n, n))
    if n < 2:
        return km
    i, j = np.triu_indices(n, k=1)
    geod = Geod(ellps="WGS84")
    _, _, metres = geod.inv(lon[i], lat[i], lon[j], lat[j])
    km[i, j] = np.asarray(metres) / M_PER_KM
    km[j, i] = km[i, j]
    return km


def euclidean(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Straight-line distances between all pairs of planar points.

    Parameters
    ----------
    x, y
        1-D arrays of ``n`` planar coordinates, in the data's length unit.

    Returns
    -------
    numpy.ndarray
        ``(n, n)`` float array of distances in the same unit; symmetric,
        zero diagonal.

    Examples
    --------
    >>> import numpy as np
    >>> euclidean(np.array([0.0, 3.0]), np.array([0.0, 4.0])).tolist()
    [[0.0, 5.0], [5.0, 0.0]]
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    return np.hypot(x[:, None] - x[None, :], y[:, None] - y[None, :])


def resolve_method(data: NetworkData, params: DistanceParams) -> str:
    """The method actually used, with ``auto`` resolved.

    Parameters
    ----------
    data
        The network (its coordinate system and any user matrix).
    params
        Distance parameters.

    Returns
    -------
    str
        ``geodesic``, ``euclidean`` or ``matrix``.

    Raises
    ------
    InputError
        When the method does not fit the data: ``geodesic`` on planar x/y,
        ``euclidean`` on latitude/longitude, ``matrix`` without a user
        matrix, or an unknown method name.
    """
    method = params.method
    planar = data.coordinates == "planar"
    if method == "auto":
        if data.distances is not None:
            return "matrix"
        return "euclidean" if planar else "geodesic"
    if method == "geodesic" and planar:
        raise InputError(
            _config_problem(
                METHOD_KEY,
                "'geodesic' needs latitude/longitude, but the sites have planar x/y "
                "coordinates; use 'euclidean' (or 'auto') for planar data",
            )
        )
    if method == "euclidean" and not planar:
        raise InputError(
            _config_problem(
                METHOD_KEY,
                "'euclidean' needs planar x/y coordinates, but the sites have "
                "latitude/longitude; use 'geodesic' (or 'auto') for geographic data",
            )
        )
    if method == "matrix" and data.distances is None:
        raise InputError(
            _config_problem(
                METHOD_KEY,
                "'matrix' needs a distance matrix file (inputs.distances), but none "
                "was supplied; add one or use 'auto'",
            )
        )
    if method not in ("geodesic", "euclidean", "matrix"):
        raise InputError(
            _config_problem(
                METHOD_KEY,
                f"expected one of auto, geodesic, euclidean, matrix, got {method!r}",
            )
        )
    return method


def distance_matrix(data: NetworkData, params: DistanceParams) -> DistanceMatrix:
    """Distances (and drive times, when known) between every pair of sites.

    Parameters
    ----------
    data
        The network. Rows and columns of the result follow
        ``data.sites`` order.
    params
        ``method`` (see the module notes) and ``circuity``, the road
        distance over geodesic distance (dimensionless, >= 1), applied to
        geodesic distances only.

    Returns
    -------
    DistanceMatrix
        ``km``: ``(n, n)`` distances in km (in the planar unit for
        ``euclidean``); ``hours``: the user's drive times when the user's
        matrix has them, else ``None``; ``source``: ``geodesic``,
        ``euclidean``, or the user matrix's own (``user``). With the
        ``matrix`` method the user's matrix object is returned as given.

    Raises
    ------
    InputError
        When the method does not fit the data (see :func:`resolve_method`),
        the circuity factor is below 1 or not finite, or the user's matrix
        holds a negative or non-finite value.

    Examples
    --------
    >>> from hubnet.config import DistanceParams
    >>> from hubnet.data import NetworkData, Site
    >>> sites = (Site("A", "A", x=0.0, y=0.0), Site("B", "B", x=3.0, y=4.0))
    >>> data = NetworkData(sites, (), coordinates="planar")
    >>> distance_matrix(data, DistanceParams()).km.tolist()
    [[0.0, 5.0], [5.0, 0.0]]
    """
    method = resolve_method(data, params)
    user = data.distances
    if user is not None:
        _check_user_matrix(data, user, check_km=method == "matrix")
    if method == "matrix":
        assert user is not None  # resolve_method guarantees it
        return user
    hours = user.hours if user is not None else None
    if method == "euclidean":
        x = np.array([s.x for s in data.sites], dtype=float)
        y = np.array([s.y for s in data.sites], dtype=float)
        return DistanceMatrix(km=euclidean(x, y), hours=hours, source="euclidean")
    circuity = float(params.circuity)
    if not np.isfinite(circuity) or circuity < 1.0:
        raise InputError(
            _config_problem(
                CIRCUITY_KEY, f"expected a road circuity factor >= 1, got {params.circuity!r}"
            )
        )
    lat = np.array([s.lat for s in data.sites], dtype=float)
    lon = np.array([s.lon for s in data.sites], dtype=float)
    return DistanceMatrix(km=geodesic_km(lat, lon) * circuity, hours=hours, source="geodesic")


def _config_problem(key: str, message: str) -> Problem:
    return Problem("config", None, key, message)


def _check_user_matrix(data: NetworkData, user: DistanceMatrix, *, check_km: bool) -> None:
    """Raise :class:`InputError` if the part of the user's matrix in use is unusable."""
    n = data.n
    ids = data.ids
    problems: list[Problem] = []
    for column, values in (("distance_km", user.km), ("hours", user.hours)):
        if values is None or (column == "distance_km" and not check_km):
            continue
        arr = np.asarray(values)
        if arr.shape != (n, n):
            problems.append(
                Problem("distances", None, column, f"matrix is {arr.shape}, expected ({n}, {n})")
            )
            continue
        try:
            arr = arr.astype(float)
        except (TypeError, ValueError):
            problems.append(Problem("distances", None, column, "matrix is not numeric"))
            continue
        bad = ~np.isfinite(arr) | (arr < 0)
        rows, cols = np.nonzero(bad)
        for i, j in zip(rows[:_MAX_CELL_PROBLEMS], cols[:_MAX_CELL_PROBLEMS], strict=True):
            problems.append(
                Problem(
                    "distances",
                    None,
                    column,
                    f"from {ids[i]!r} to {ids[j]!r}: expected a finite value >= 0, "
                    f"got {float(arr[i, j])!r}",
                )
            )
        if rows.size > _MAX_CELL_PROBLEMS:
            problems.append(
                Problem(
                    "distances",
                    None,
                    column,
                    f"... and {rows.size - _MAX_CELL_PROBLEMS} more bad values",
                )
            )
    if problems:
        raise InputError(problems)
