"""Hooghoudt steady-state spacing, head and recharge."""

import warnings

import numpy as np
import pytest
from hypothesis import assume, given, settings, strategies as st
from numpy.testing import assert_allclose

from drainplan.errors import ConvergenceWarning, InputError
from drainplan.spacing import (equivalent_depth, hooghoudt_head, hooghoudt_recharge,
                               hooghoudt_spacing)


def test_ilri_example_8_1():
    # Ritzema (1994), ILRI Publication 16, ch. 8, Example 8.1 (inputs and result as quoted
    # second-hand, not read in the book): homogeneous K = 0.14 m/d, q = 1 mm/d, h = 1.0 m,
    # D = 4.8 m, r0 = 0.1 m -> L ~ 65 m with Hooghoudt's table. Moody's d reproduces the
    # table (64.85 m); the exact series gives 64 m. Printed to whole metres.
    kw = dict(recharge=0.001, head=1.0, k_below=0.14, depth_to_barrier=4.8, drain_radius=0.1)
    assert round(float(hooghoudt_spacing(**kw, equivalent_depth_method="moody"))) == 65
    assert round(float(hooghoudt_spacing(**kw))) == 64


# Derived check cases (method notes C-H6; computed there by fixed-point iteration, a
# different algorithm from drainplan's bracketed solver): (q, K1, K2, h, D, r0) ->
# L exact series / L Moody, 2 decimals.
CASES = [
    ((0.010, 0.5, 0.5, 0.6, 3.0, 0.05), 20.34, 20.68),
    ((0.007, 0.2, 1.0, 0.5, 4.0, 0.10), 37.06, 37.78),
    ((0.007, 0.8, 0.8, 0.5, 5.0, 0.10), 35.52, 36.20),
    ((0.002, 0.3, 0.3, 1.0, 10.0, 0.059), 75.65, 76.85),
]


@pytest.mark.parametrize("case,exact,moody", CASES)
def test_spacing_cases(case, exact, moody):
    q, k1, k2, h, D, r0 = case
    kw = dict(recharge=q, head=h, k_above=k1, k_below=k2, depth_to_barrier=D, drain_radius=r0)
    assert_allclose(hooghoudt_spacing(**kw), exact, atol=0.006)
    assert_allclose(hooghoudt_spacing(**kw, equivalent_depth_method="moody"), moody, atol=0.006)


def test_spacing_satisfies_equation():
    # The solution must satisfy q L^2 = 8 K2 d h + 4 K1 h^2 with d at L.
    rng = np.random.default_rng(7)
    n = 2000
    q = rng.uniform(0.0005, 0.05, n)
    k1, k2 = rng.uniform(0.01, 20, n), rng.uniform(0.01, 20, n)
    h = rng.uniform(0.1, 1.5, n)
    D = rng.uniform(0.2, 30, n)
    L = hooghoudt_spacing(recharge=q, head=h, k_above=k1, k_below=k2, depth_to_barrier=D,
                          drain_radius=0.05)
    d = equivalent_depth(L, D, 0.05)
    assert_allclose(q * L**2, 8 * k2 * d * h + 4 * k1 * h**2, rtol=1e-6)


def test_donnan_limit():
    # D = 0: q L^2 = 4 K h^2 (Donnan); 'ellipse equation' with d = D when D is tiny.
    L = hooghoudt_spacing(recharge=0.01, head=0.5, k_below=1.0, depth_to_barrier=0.0,
                          drain_radius=0.05)
    assert_allclose(L, np.sqrt(4 * 1.0 * 0.25 / 0.01), rtol=1e-9)


def test_full_equation_wider_than_linear():
    # The 4 K1 h^2 term (flow above drain level) widens the spacing (method notes, findings).
    kw = dict(recharge=0.007, head=0.5, k_below=0.8, depth_to_barrier=5.0, drain_radius=0.1)
    L_full = hooghoudt_spacing(**kw)
    L_lin = hooghoudt_spacing(**kw, k_above=1e-12)
    assert L_full > L_lin


def test_inverse_modes_round_trip():
    kw = dict(k_below=0.5, k_above=0.3, depth_to_barrier=3.0, drain_radius=0.05)
    L = hooghoudt_spacing(recharge=0.01, head=0.6, **kw)
    assert_allclose(hooghoudt_head(spacing=L, recharge=0.01, **kw), 0.6, rtol=1e-7)
    assert_allclose(hooghoudt_recharge(spacing=L, head=0.6, **kw), 0.01, rtol=1e-7)


def test_arrays_and_broadcasting():
    L = hooghoudt_spacing(recharge=np.array([0.005, 0.01])[:, None], head=0.5,
                          k_below=np.array([0.2, 0.5, 1.0]), depth_to_barrier=3.0,
                          drain_radius=0.05)
    assert L.shape == (2, 3)
    assert np.all(np.diff(L, axis=1) > 0) and np.all(L[0] > L[1])


def test_no_solution_is_nan_with_warning():
    with pytest.warns(ConvergenceWarning):
        L = hooghoudt_spacing(recharge=1.0, head=0.01, k_below=0.001, depth_to_barrier=2.0,
                              drain_radius=0.1)
    assert np.isnan(L)


@pytest.mark.parametrize("name,value,match", [
    ("recharge", 0.0, "recharge"), ("recharge", -0.01, "recharge"),
    ("head", 0.0, "water-table height"), ("k_below", 0.0, "below drain level"),
    ("k_above", -1.0, "above drain level"), ("depth_to_barrier", -1.0, "barrier"),
    ("drain_radius", 0.0, "drain radius"), ("drain_radius", 5.0, "smaller than"),
])
def test_bad_input(name, value, match):
    kw = dict(recharge=0.01, head=0.5, k_below=0.5, k_above=0.5, depth_to_barrier=3.0,
              drain_radius=0.05)
    kw[name] = value
    with pytest.raises(InputError, match=match) as info:
        hooghoudt_spacing(**kw)
    assert info.value.param == name


# --- properties (hypothesis) ------------------------------------------------------------
practical = dict(
    q=st.floats(0.0005, 0.05), k=st.floats(0.01, 20.0), h=st.floats(0.1, 1.5),
    D=st.floats(0.2, 30.0), r0=st.sampled_from([0.01, 0.05, 0.1]),
)


def _L(q, k, h, D, r0):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        return float(hooghoudt_spacing(recharge=q, head=h, k_below=k, depth_to_barrier=D,
                                       drain_radius=r0))


@settings(max_examples=150, deadline=None)
@given(**practical, f=st.floats(1.05, 3.0))
def test_monotonic(q, k, h, D, r0, f):
    L = _L(q, k, h, D, r0)
    assume(L >= 2.0)   # the practical range of spacings (2-300 m)
    assert _L(q, k * f, h, D, r0) > L            # grows with K
    assert _L(q / f, k, h, D, r0) > L            # shrinks with q
    assert _L(q, k, h * f, D, r0) > L            # grows with h
    assert _L(q, k, h, D * f, r0) >= L - 2e-6    # grows (or saturates) with D; xtol 1e-6 m


@settings(max_examples=150, deadline=None)
@given(**practical)
def test_round_trip(q, k, h, D, r0):
    L = _L(q, k, h, D, r0)
    assume(L >= 2.0)
    kw = dict(k_below=k, depth_to_barrier=D, drain_radius=r0)
    assert_allclose(hooghoudt_head(spacing=L, recharge=q, **kw), h, rtol=1e-6)
    assert_allclose(hooghoudt_recharge(spacing=L, head=h, **kw), q, rtol=1e-6)
