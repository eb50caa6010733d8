"""The shared vectorised bracketed root finder."""

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.optimize import brentq

from drainplan._solve import bracketed_root
from drainplan.errors import ConvergenceWarning


def test_matches_scipy_brentq():
    # scipy's scalar brentq is the reference.
    c = np.linspace(0.5, 50, 300)
    f = lambda x, c: np.cos(x) - x / c  # noqa: E731
    r = bracketed_root(f, 0.0, np.pi / 2, (c,), xtol=1e-12)
    ref = [brentq(lambda x: np.cos(x) - x / ci, 0, np.pi / 2, xtol=1e-14) for ci in c]
    assert_allclose(r.root, ref, atol=1e-11)
    assert r.converged.all() and r.iterations < 20


def test_blocks_and_shape():
    c = np.linspace(1, 3, 70007).reshape(7, 10001)   # more than one block
    r = bracketed_root(lambda x, c: x * x - c, 0.0, 2.0, (c,), xtol=1e-13)
    assert r.root.shape == (7, 10001)
    assert_allclose(r.root, np.sqrt(c), rtol=5e-12)   # solver rtol 1e-12 (x2 margin)


def test_no_sign_change_gives_nan_and_warning():
    with pytest.warns(ConvergenceWarning, match="1 of 3"):
        r = bracketed_root(lambda x, c: x - c, 0.0, 1.0, (np.array([0.5, 2.0, 0.25]),))
    assert np.isnan(r.root[1]) and not r.converged[1]
    assert_allclose(r.root[[0, 2]], [0.5, 0.25], atol=1e-6)


def test_root_at_bracket_end():
    r = bracketed_root(lambda x: x - 1.0, 1.0, 3.0)
    assert r.root == 1.0 and r.converged


# --- newton_root: Newton/Halley from an estimate, the bracketed solver as fallback -----

from drainplan._solve import newton_root  # noqa: E402


def test_newton_matches_scipy_brentq():
    # Kepler's equation E - e sin E = M (scipy's scalar brentq is the reference)
    e = np.linspace(0.0, 0.9, 200)
    M = np.linspace(0.1, 3.0, 200)

    def fn(x, e, M):
        return x - e * np.sin(x) - M, 1.0 - e * np.cos(x), e * np.sin(x)

    r = newton_root(fn, M, 0.0, np.pi, (e, M), xtol=1e-12)
    ref = [brentq(lambda x: x - ei * np.sin(x) - mi, 0.0, np.pi, xtol=1e-14)
           for ei, mi in zip(e, M)]
    assert_allclose(r.root, ref, atol=1e-11)
    assert r.converged.all() and r.iterations <= 6


def test_newton_without_second_derivative():
    c = np.linspace(1.0, 1e4, 5000)
    r = newton_root(lambda x, c: (x * x - c, 2.0 * x), c / 2 + 1, 0.0, c + 1, (c,), xtol=1e-10)
    assert_allclose(r.root, np.sqrt(c), rtol=0, atol=1e-9)


def test_newton_falls_back_to_the_bracket_and_warns():
    # |x|^(1/3) sign(x) - c: Newton diverges from any start (the steps double); the
    # bracketed solver finishes it. c = 5 has no root in [-2, 2]: NaN and a warning.
    c = np.array([0.5, -1.2, 5.0])

    def fn(x, c):
        return np.cbrt(x) - c, 1.0 / (3.0 * np.cbrt(x) ** 2)

    with pytest.warns(ConvergenceWarning, match="1 of 3"):
        r = newton_root(fn, 0.9, -2.0, 2.0, (c,), fallback=lambda x, c: np.cbrt(x) - c,
                        xtol=1e-10)
    assert_allclose(r.root[:2], c[:2] ** 3, atol=1e-9)
    assert np.isnan(r.root[2]) and not r.converged[2]


def test_newton_without_fallback_warns_and_gives_nan():
    with pytest.warns(ConvergenceWarning):
        r = newton_root(lambda x: (np.cbrt(x) - 0.5, 1.0 / (3.0 * np.cbrt(x) ** 2)), 0.9,
                        -2.0, 2.0)
    assert np.isnan(r.root)


def test_newton_blocks_and_shape():
    c = np.linspace(1, 3, 30000).reshape(3, 10000)    # several blocks
    r = newton_root(lambda x, c: (x ** 3 - c, 3 * x * x, 6 * x), 1.0, 0.5, 2.0, (c,),
                    xtol=1e-13)
    assert r.root.shape == (3, 10000)
    assert_allclose(r.root, np.cbrt(c), rtol=1e-12)
