"""Elevation surfaces and plane fitting."""

import numpy as np
import pytest
import shapely
from numpy.testing import assert_allclose

from drainplan.errors import InputError
from drainplan.terrain import (PointSurface, RasterSurface, check_coverage, fall_bearing,
                               fit_plane)


def plane(xy):
    return 100.0 + 0.004 * xy[:, 0] - 0.002 * xy[:, 1]


def test_linear_interpolation_reproduces_a_plane():
    # Piecewise-linear (barycentric) interpolation on a triangulation is exact for any plane
    # (scipy.interpolate.LinearNDInterpolator documentation: linear barycentric
    # interpolation on the Delaunay triangulation).
    rng = np.random.default_rng(3)
    xy = rng.uniform(0, 500, (200, 2))
    surf = PointSurface(xy, plane(xy))
    q = rng.uniform(100, 400, (50, 2))
    assert_allclose(surf(q), plane(q), atol=1e-9)
    # outside the hull: nearest point, finite
    assert np.all(np.isfinite(surf(np.array([[-50.0, -50.0]]))))


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_survey_surface_equals_scipy(seed):
    """The survey surface interpolates as scipy's ``LinearNDInterpolator`` (reference
    library): bit for bit on the same triangulation (a last-bit difference in the
    ground has been seen to change which sub-main a piece joins), within 1e-9 m of one
    built afresh (its barycentric transforms come from LAPACK); outside the hull it
    takes the nearest survey point, as ``NearestNDInterpolator`` does. The points
    include some far outside the hull."""
    from scipy.interpolate import LinearNDInterpolator, NearestNDInterpolator

    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 800, (400, 2)) + [381_000.0, 4_731_000.0]
    z = rng.uniform(290.0, 305.0, 400)
    surf = PointSurface(xy, z)
    q = rng.uniform(-60, 860, (20_000, 2)) + [381_000.0, 4_731_000.0]
    same = LinearNDInterpolator(surf._tri, z)(q)
    out = np.isnan(same)
    assert out.any() and not out.all()
    got = surf(q)
    assert np.array_equal(got[~out], same[~out])
    assert_allclose(got[~out], LinearNDInterpolator(xy, z)(q[~out]), rtol=0, atol=1e-9)
    assert np.array_equal(got[out], NearestNDInterpolator(xy, z)(q[out]))


def test_fit_plane_and_fall():
    # Least squares recovers an exact plane; the direction of steepest descent of
    # z = a x + b y is -(a, b) (the gradient), expressed as a bearing from north.
    rng = np.random.default_rng(4)
    xy = rng.uniform(0, 500, (100, 2))
    a, b, c = fit_plane(xy, plane(xy))
    assert_allclose([a, b, c], [0.004, -0.002, 100.0], atol=1e-9)
    bearing, slope = fall_bearing(a, b)
    # descent direction (-a, -b) = (-0.004, 0.002): west-north-west
    assert_allclose(bearing, np.degrees(np.arctan2(-0.004, 0.002)) % 360)
    assert_allclose(slope, np.hypot(0.004, 0.002))


def test_raster_surface_bilinear():
    # Bilinear interpolation between cell centres is exact for a plane (scipy
    # RegularGridInterpolator, method "linear").
    xs = np.arange(0, 100, 10.0) + 5
    ys = np.arange(0, 100, 10.0) + 5
    X, Y = np.meshgrid(xs, ys[::-1])                 # north-up grid
    vals = plane(np.c_[X.ravel(), Y.ravel()]).reshape(X.shape)
    surf = RasterSurface(vals, (10.0, 0.0, 0.0, 0.0, -10.0, 100.0))
    q = np.array([[20.0, 30.0], [51.3, 77.7]])
    assert_allclose(surf(q), plane(q), atol=1e-9)


def test_coverage_and_bad_points():
    xy = np.array([[0, 0], [100, 0], [0, 100], [100, 100]], float)
    surf = PointSurface(xy, np.zeros(4))
    check_coverage(surf, [shapely.box(5, 5, 95, 95)], ["in"])
    with pytest.raises(InputError, match="do not cover field 'big'"):
        check_coverage(surf, [shapely.box(0, 0, 300, 300)], ["big"])
    with pytest.raises(InputError, match="one line"):
        PointSurface(np.array([[0, 0], [1, 1], [2, 2]], float), np.zeros(3))
    with pytest.raises(InputError, match="missing"):
        PointSurface(xy, np.array([0, 1, np.nan, 2]))
