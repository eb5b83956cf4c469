"""Tests of hubnet.distances against independent references.

References used (each named again beside its check):

- geographiclib (C. F. F. Karney's own Python implementation of geodesics
  on the ellipsoid), ``Geodesic.WGS84.Inverse``: a second library,
  independent of PROJ's C code that pyproj calls.
- C. F. F. Karney (2013), "Algorithms for geodesics", J. Geodesy 87,
  43-55: the worked inverse example of the paper.
- The GeographicLib documentation example (Wellington to Salamanca).
- NIMA TR8350.2: the WGS84 semi-major axis and flattening.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from geographiclib.geodesic import Geodesic
from pyproj import Geod

from hubnet.config import DistanceParams
from hubnet.data import DistanceMatrix, NetworkData, Site
from hubnet.distances import distance_matrix, euclidean, geodesic_km, resolve_method
from hubnet.errors import InputError
from hubnet.units import DEFAULT_CIRCUITY, WGS84_A_M, WGS84_F

# Real city pairs (city-centre coordinates, degrees, WGS84; from memory, to
# about 0.01 degree -- only the comparison between libraries matters here).
CITIES = {
    "MAD": ("Madrid", 40.4168, -3.7038),
    "BCN": ("Barcelona", 41.3874, 2.1686),
    "LIS": ("Lisboa", 38.7223, -9.1393),
    "OPO": ("Porto", 41.1579, -8.6291),
    "LON": ("London", 51.5074, -0.1278),
    "NYC": ("New York", 40.7128, -74.0060),
    "SYD": ("Sydney", -33.8688, 151.2093),
    "SCL": ("Santiago de Chile", -33.4489, -70.6693),
    "ANC": ("Anchorage", 61.2181, -149.9003),
    "OSL": ("Oslo", 59.9139, 10.7522),
    "UIO": ("Quito", -0.1807, -78.4678),
    "SIN": ("Singapore", 1.3521, 103.8198),
}

#: Geodesic distances agree with the reference to 1 mm (both libraries
#: claim round-off accuracy, about 15 nm, for the WGS84 ellipsoid).
MM_IN_KM = 1e-6


def geo_sites(points: dict[str, tuple[str, float, float]]) -> tuple[Site, ...]:
    return tuple(Site(k, name, lat=lat, lon=lon) for k, (name, lat, lon) in points.items())


def geo_data(points: dict[str, tuple[str, float, float]], **kwargs: object) -> NetworkData:
    return NetworkData(geo_sites(points), (), **kwargs)  # type: ignore[arg-type]


def planar_data(xy: list[tuple[float, float]], **kwargs: object) -> NetworkData:
    sites = tuple(Site(f"P{i}", f"P{i}", x=x, y=y) for i, (x, y) in enumerate(xy))
    return NetworkData(sites, (), coordinates="planar", **kwargs)  # type: ignore[arg-type]


def random_geo_data(n: int, seed: int) -> NetworkData:
    rng = np.random.default_rng(seed)
    lat = np.degrees(np.arcsin(rng.uniform(-1.0, 1.0, n)))  # uniform on the sphere
    lon = rng.uniform(-180.0, 180.0, n)
    pts = {
        f"R{i}": (f"R{i}", float(a), float(b))
        for i, (a, b) in enumerate(zip(lat, lon, strict=True))
    }
    return geo_data(pts)


def two_points(lat1: float, lon1: float, lat2: float, lon2: float) -> NetworkData:
    return geo_data({"A": ("A", lat1, lon1), "B": ("B", lat2, lon2)})


NO_CIRCUITY = DistanceParams(method="geodesic", circuity=1.0)


# --------------------------------------------------------------------------
# Geodesic distances against independent references
# --------------------------------------------------------------------------


def test_geodesic_matches_geographiclib_for_city_pairs() -> None:
    # Reference: geographiclib.geodesic.Geodesic.WGS84.Inverse (Karney's
    # Python implementation), every ordered pair of the cities above. The
    # pairs include antimeridian crossings (Sydney-Santiago, Anchorage-
    # Singapore), high latitudes and equatorial lines.
    data = geo_data(CITIES)
    km = distance_matrix(data, NO_CIRCUITY).km
    ids = data.ids
    for i, a in enumerate(ids):
        for j, b in enumerate(ids):
            _, lat1, lon1 = CITIES[a]
            _, lat2, lon2 = CITIES[b]
            ref_km = Geodesic.WGS84.Inverse(lat1, lon1, lat2, lon2)["s12"] / 1000.0
            assert km[i, j] == pytest.approx(ref_km, abs=MM_IN_KM), (a, b)


def test_geodesic_matches_geographiclib_for_random_points_worldwide() -> None:
    # Reference: geographiclib Geodesic.WGS84.Inverse on 40 points spread
    # uniformly over the globe (780 pairs, some nearly antipodal).
    data = random_geo_data(40, seed=20240521)
    km = distance_matrix(data, NO_CIRCUITY).km
    lat = [s.lat for s in data.sites]
    lon = [s.lon for s in data.sites]
    worst = 0.0
    for i in range(data.n):
        for j in range(i + 1, data.n):
            ref = Geodesic.WGS84.Inverse(lat[i], lon[i], lat[j], lon[j])["s12"] / 1000.0
            worst = max(worst, abs(km[i, j] - ref))
    assert worst < MM_IN_KM


def test_geodesic_karney_2013_worked_inverse_example() -> None:
    # C. F. F. Karney (2013), "Algorithms for geodesics", J. Geodesy 87,
    # 43-55, worked inverse example: lat1 = -30, lat2 = 29.9, lon12 = 179.8
    # degrees on WGS84 gives s12 = 19 989 832.827 61 m. Value from memory,
    # confirmed against geographiclib 2.1 (19989832.82760953 m).
    km = distance_matrix(two_points(-30.0, 0.0, 29.9, 179.8), NO_CIRCUITY).km
    assert km[0, 1] == pytest.approx(19_989.832_827_61, abs=MM_IN_KM)


@pytest.mark.parametrize(
    ("lat1", "lon1", "lat2", "lon2", "metres"),
    [
        # GeographicLib documentation, Geodesic.Inverse example (also in the
        # docstring of geographiclib.geodesic): Wellington, NZ (41.32S,
        # 174.81E) to Salamanca, Spain (40.96N, 5.50W): 19959679.267 m.
        (-41.32, 174.81, 40.96, -5.50, 19_959_679.267),
        # GeographicLib test suite, GeodSolve76 (the same cities in degrees
        # and minutes, a classic failure of Vincenty's method):
        # 19960543.857179 m.
        (-(41 + 19 / 60), 174 + 49 / 60, 40 + 58 / 60, -(5 + 30 / 60), 19_960_543.857179),
    ],
)
def test_geodesic_published_values(
    lat1: float, lon1: float, lat2: float, lon2: float, metres: float
) -> None:
    km = distance_matrix(two_points(lat1, lon1, lat2, lon2), NO_CIRCUITY).km
    assert km[0, 1] == pytest.approx(metres / 1000.0, abs=MM_IN_KM)
    assert km[1, 0] == km[0, 1]


def test_one_degree_of_equator_is_a_times_pi_over_180() -> None:
    # NIMA TR8350.2: WGS84 semi-major axis a = 6 378 137 m. The equator is a
    # geodesic (a circle of radius a), so one degree along it is a * pi / 180.
    km = distance_matrix(two_points(0.0, 10.0, 0.0, 11.0), NO_CIRCUITY).km
    assert km[0, 1] == pytest.approx(6378.137 * math.pi / 180.0, abs=MM_IN_KM)


def test_pyproj_wgs84_matches_the_constants_in_units() -> None:
    # NIMA TR8350.2: a = 6378137 m, f = 1/298.257223563; the ellipsoid pyproj
    # uses must be the one hubnet.units documents.
    geod = Geod(ellps="WGS84")
    assert geod.a == WGS84_A_M
    assert geod.f == pytest.approx(WGS84_F, rel=1e-15)


def test_geodesic_km_vectorised_equals_pairwise_calls() -> None:
    # Reference: pyproj Geod.inv called one pair at a time.
    data = geo_data(CITIES)
    lat = np.array([s.lat for s in data.sites])
    lon = np.array([s.lon for s in data.sites])
    km = geodesic_km(lat, lon)
    geod = Geod(ellps="WGS84")
    for i in range(data.n):
        for j in range(data.n):
            if i != j:
                _, _, m = geod.inv(lon[i], lat[i], lon[j], lat[j])
                assert km[i, j] == pytest.approx(m / 1000.0, abs=MM_IN_KM)


# --------------------------------------------------------------------------
# Circuity, symmetry, diagonal
# --------------------------------------------------------------------------


@pytest.mark.parametrize("circuity", [1.0, 1.2, 1.37, 2.5])
def test_circuity_scales_linearly(circuity: float) -> None:
    data = geo_data(CITIES)
    base = distance_matrix(data, NO_CIRCUITY).km
    scaled = distance_matrix(data, DistanceParams(method="geodesic", circuity=circuity)).km
    np.testing.assert_allclose(scaled, circuity * base, rtol=1e-14, atol=0.0)


def test_default_circuity_is_applied() -> None:
    data = two_points(40.4168, -3.7038, 41.3874, 2.1686)
    default = distance_matrix(data, DistanceParams()).km[0, 1]
    plain = distance_matrix(data, NO_CIRCUITY).km[0, 1]
    assert DEFAULT_CIRCUITY != 1.0
    assert default == pytest.approx(DEFAULT_CIRCUITY * plain, rel=1e-14)


@pytest.mark.parametrize("method", ["geodesic", "auto"])
def test_geodesic_symmetric_with_zero_diagonal(method: str) -> None:
    dm = distance_matrix(random_geo_data(60, seed=7), DistanceParams(method=method))  # type: ignore[arg-type]
    assert dm.source == "geodesic"
    assert np.array_equal(dm.km, dm.km.T)
    assert np.all(np.diag(dm.km) == 0.0)
    off = dm.km[~np.eye(60, dtype=bool)]
    assert np.all(off > 0.0)
    assert dm.hours is None


def test_coincident_sites_are_zero_apart() -> None:
    km = distance_matrix(two_points(38.7223, -9.1393, 38.7223, -9.1393), NO_CIRCUITY).km
    assert km.tolist() == [[0.0, 0.0], [0.0, 0.0]]


def test_one_site_gives_a_1x1_zero_matrix() -> None:
    data = geo_data({"MAD": CITIES["MAD"]})
    assert distance_matrix(data, DistanceParams()).km.tolist() == [[0.0]]


def test_200_sites_full_matrix() -> None:
    # 200 sites, 40,000 ordered pairs in one call; a sample checked against
    # geographiclib Geodesic.WGS84.Inverse. (Speed is measured in the
    # report, not asserted here.)
    data = random_geo_data(200, seed=11)
    dm = distance_matrix(data, NO_CIRCUITY)
    assert dm.km.shape == (200, 200)
    assert np.array_equal(dm.km, dm.km.T)
    rng = np.random.default_rng(3)
    for i, j in rng.integers(0, 200, size=(50, 2)):
        a, b = data.sites[i], data.sites[j]
        ref = Geodesic.WGS84.Inverse(a.lat, a.lon, b.lat, b.lon)["s12"] / 1000.0
        assert dm.km[i, j] == pytest.approx(ref, abs=MM_IN_KM)


# --------------------------------------------------------------------------
# Euclidean (planar benchmark data)
# --------------------------------------------------------------------------


def test_euclidean_3_4_5_triangle() -> None:
    # Hand-computed: (0,0)-(3,0) = 3, (3,0)-(3,4) = 4, (0,0)-(3,4) = 5.
    dm = distance_matrix(planar_data([(0.0, 0.0), (3.0, 0.0), (3.0, 4.0)]), DistanceParams())
    assert dm.source == "euclidean"
    assert dm.km.tolist() == [[0.0, 3.0, 5.0], [3.0, 0.0, 4.0], [5.0, 4.0, 0.0]]
    assert dm.hours is None


def test_euclidean_ignores_circuity() -> None:
    data = planar_data([(1.0, 1.0), (4.0, 5.0)])
    dm = distance_matrix(data, DistanceParams(method="euclidean", circuity=1.5))
    assert dm.km[0, 1] == 5.0


def test_euclidean_symmetric_with_zero_diagonal() -> None:
    rng = np.random.default_rng(5)
    xy = rng.uniform(-1000.0, 1000.0, size=(50, 2))
    km = euclidean(xy[:, 0], xy[:, 1])
    assert np.array_equal(km, km.T)
    assert np.all(np.diag(km) == 0.0)
    # Reference: math.dist (Python standard library).
    assert km[3, 17] == pytest.approx(math.dist(xy[3], xy[17]), rel=1e-15)


# --------------------------------------------------------------------------
# The user's matrix
# --------------------------------------------------------------------------


def user_matrix(hours: bool) -> DistanceMatrix:
    km = np.array([[0.0, 620.0, 640.0], [615.0, 0.0, 1250.0], [645.0, 1240.0, 0.0]])
    h = km / 70.0 if hours else None
    return DistanceMatrix(km=km, hours=h, source="user")


THREE = {k: CITIES[k] for k in ("MAD", "BCN", "LIS")}


@pytest.mark.parametrize("method", ["auto", "matrix"])
@pytest.mark.parametrize("hours", [True, False])
def test_user_matrix_used_as_given(method: str, hours: bool) -> None:
    user = user_matrix(hours)
    data = geo_data(THREE, distances=user)
    dm = distance_matrix(data, DistanceParams(method=method))  # type: ignore[arg-type]
    assert dm.source == "user"
    assert np.array_equal(dm.km, user.km)  # asymmetric road distances kept
    if hours:
        assert dm.hours is not None and user.hours is not None
        assert np.array_equal(dm.hours, user.hours)
    else:
        assert dm.hours is None


def test_user_matrix_for_planar_data() -> None:
    user = DistanceMatrix(km=np.array([[0.0, 9.0], [9.0, 0.0]]), source="user")
    data = planar_data([(0.0, 0.0), (3.0, 4.0)], distances=user)
    assert distance_matrix(data, DistanceParams()).km[0, 1] == 9.0
    assert distance_matrix(data, DistanceParams(method="euclidean")).km[0, 1] == 5.0


def test_geodesic_requested_with_user_matrix_keeps_user_hours() -> None:
    user = user_matrix(hours=True)
    data = geo_data(THREE, distances=user)
    dm = distance_matrix(data, NO_CIRCUITY)
    assert dm.source == "geodesic"
    assert dm.km[0, 1] == pytest.approx(
        Geodesic.WGS84.Inverse(*THREE["MAD"][1:], *THREE["BCN"][1:])["s12"] / 1000.0,
        abs=MM_IN_KM,
    )
    assert dm.hours is not None and user.hours is not None
    assert np.array_equal(dm.hours, user.hours)


@pytest.mark.parametrize("bad", [-1.0, float("nan"), float("inf")])
def test_user_matrix_bad_value(bad: float) -> None:
    user = user_matrix(hours=False)
    km = user.km.copy()
    km[1, 2] = bad
    data = geo_data(THREE, distances=dataclasses.replace(user, km=km))
    with pytest.raises(InputError, match=r"from 'BCN' to 'LIS'.*finite value >= 0"):
        distance_matrix(data, DistanceParams(method="matrix"))


def test_user_hours_wrong_shape() -> None:
    user = dataclasses.replace(user_matrix(hours=False), hours=np.zeros((2, 2)))
    data = geo_data(THREE, distances=user)
    with pytest.raises(InputError, match=r"column hours: matrix is \(2, 2\), expected \(3, 3\)"):
        distance_matrix(data, DistanceParams())


def test_many_bad_cells_are_summarised() -> None:
    user = DistanceMatrix(km=-np.ones((5, 5)), source="user")
    pts = {f"S{i}": (f"S{i}", 40.0 + i, -3.0) for i in range(5)}
    data = geo_data(pts, distances=user)
    with pytest.raises(InputError, match="and 15 more bad values") as info:
        distance_matrix(data, DistanceParams())
    assert len(info.value.problems) == 11


# --------------------------------------------------------------------------
# Method does not fit the data
# --------------------------------------------------------------------------


def test_geodesic_on_planar_data_is_an_input_error() -> None:
    data = planar_data([(0.0, 0.0), (3.0, 4.0)])
    with pytest.raises(InputError, match=r"distances\.method.*'geodesic' needs latitude"):
        distance_matrix(data, DistanceParams(method="geodesic"))


def test_euclidean_on_geographic_data_is_an_input_error() -> None:
    with pytest.raises(InputError, match=r"distances\.method.*'euclidean' needs planar"):
        distance_matrix(geo_data(THREE), DistanceParams(method="euclidean"))


def test_matrix_without_user_matrix_is_an_input_error() -> None:
    with pytest.raises(InputError, match=r"distances\.method.*'matrix' needs a distance"):
        distance_matrix(geo_data(THREE), DistanceParams(method="matrix"))


def test_unknown_method_is_an_input_error() -> None:
    params = DistanceParams(method="haversine")  # type: ignore[arg-type]
    with pytest.raises(InputError, match=r"distances\.method.*got 'haversine'"):
        distance_matrix(geo_data(THREE), params)


@pytest.mark.parametrize("circuity", [0.9, 0.0, float("nan")])
def test_circuity_below_one_is_an_input_error(circuity: float) -> None:
    params = DistanceParams(method="geodesic", circuity=circuity)
    with pytest.raises(InputError, match=r"distances\.circuity"):
        distance_matrix(geo_data(THREE), params)


@pytest.mark.parametrize(
    ("coordinates", "has_matrix", "expected"),
    [
        ("geographic", False, "geodesic"),
        ("planar", False, "euclidean"),
        ("geographic", True, "matrix"),
        ("planar", True, "matrix"),
    ],
)
def test_auto_resolution(coordinates: str, has_matrix: bool, expected: str) -> None:
    user = DistanceMatrix(km=np.array([[0.0, 1.0], [1.0, 0.0]])) if has_matrix else None
    if coordinates == "planar":
        data = planar_data([(0.0, 0.0), (1.0, 0.0)], distances=user)
    else:
        data = geo_data({k: CITIES[k] for k in ("MAD", "BCN")}, distances=user)
    assert resolve_method(data, DistanceParams()) == expected
