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
