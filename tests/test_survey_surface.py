"""The survey surface against scipy's own interpolators (reference library: scipy
``Delaunay.transform``, ``LinearNDInterpolator``, ``NearestNDInterpolator``).

``PointSurface`` computes the triangles' barycentric transforms itself (numpy, no
LAPACK call per triangle) and reorders scattered query points; the numbers must be
scipy's. Invented survey points.
"""

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.interpolate import LinearNDInterpolator, NearestNDInterpolator
from scipy.spatial import Delaunay

from drainplan.terrain import PointSurface, _set_barycentric_transforms


def _survey(seed, n=1500):
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0.0, 2000.0, (n, 2))
    z = 100.0 + 0.002 * xy[:, 0] - 0.001 * xy[:, 1] + np.sin(xy[:, 0] / 150.0)
    return rng, xy, z


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_transforms_are_scipys(seed):
    _, xy, _ = _survey(seed)
    ours = Delaunay(xy)
    _set_barycentric_transforms(ours)
    theirs = Delaunay(xy).transform             # scipy's own (LAPACK per triangle)
    assert ours._transform is not None
    assert_allclose(ours.transform, theirs, rtol=1e-9, atol=1e-9)


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_values_are_scipys_for_scattered_and_lined_up_points(seed):
    rng, xy, z = _survey(seed)
    surf = PointSurface(xy, z)
    ref = LinearNDInterpolator(xy, z)
    scattered = rng.uniform(50.0, 1950.0, (4000, 2))          # looked up in cell order
    t = np.linspace(0.0, 1.0, 5000)[:, None]
    lined = np.array([100.0, 200.0]) + t * np.array([1700.0, 1500.0])   # along a pipe
    for q in (scattered, lined):
        assert_allclose(surf(q), ref(q), atol=1e-9, rtol=0)


def test_outside_the_hull_is_the_nearest_point():
    rng, xy, z = _survey(4, n=500)
    surf = PointSurface(xy, z)
    q = np.array([[-300.0, -300.0], [2500.0, 1000.0], [1000.0, 1000.0]])
    near = NearestNDInterpolator(xy, z)(q)
    lin = LinearNDInterpolator(xy, z)(q)
    expect = np.where(np.isnan(lin), near, lin)
    assert_allclose(surf(q), expect, atol=1e-9)
