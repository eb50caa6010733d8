"""Kirkham (1958) steady rain into drains."""

import numpy as np
import pytest
from numpy.testing import assert_allclose

from drainplan.errors import InputError
from drainplan.spacing import (equivalent_depth, hooghoudt_spacing, kirkham_f, kirkham_head,
                               kirkham_spacing)


def _kirkham_f_reference(L, D, r, terms=200000):
    """Independent straightforward summation of Kirkham's (1958) series (Trans. AGU 39(5):
    892-908, as given in the method notes, Eq. 2.1)."""
    m = np.arange(1, terms + 1, dtype=float)
    with np.errstate(over="ignore"):
        coth_m1 = 2.0 / np.expm1(4 * np.pi * m * D / L)
    s = np.sum((np.cos(2 * np.pi * m * r / L) - np.cos(m * np.pi)) * coth_m1 / m)
    return (np.log(L / (np.pi * r)) + s) / np.pi


# Method notes C-K1 (derived): F_K values to 6 decimals.
@pytest.mark.parametrize("L,D,r,expected", [
    (20, 2, 0.1, 1.838977), (40, 5, 0.1, 1.880824), (80, 10, 0.05, 2.322124),
    (10, 1, 0.05, 1.838977),
])
def test_f_values(L, D, r, expected):
    assert_allclose(kirkham_f(L, D, r), expected, atol=6e-7)
    assert_allclose(kirkham_f(L, D, r), _kirkham_f_reference(L, D, r), rtol=1e-12)


def test_shallow_barrier_many_terms():
    # D/L = 0.001 needs thousands of terms; compare with the plain summation.
    assert_allclose(kirkham_f(300, 0.3, 0.05), _kirkham_f_reference(300, 0.3, 0.05), rtol=1e-10)


def test_scale_invariance():
    # F_K depends on D/L and r/L only.
    assert_allclose(kirkham_f(20, 2, 0.1), kirkham_f(10, 1, 0.05), rtol=1e-13)


def test_agrees_with_hooghoudt_linear_term():
    # With the water table linearised, Kirkham's h = q L F_K / K equals Hooghoudt's linear
    # form q L^2 / (8 K d) (van der Molen & Wesseling series) within 0.05 %.
    q, K = 0.007, 0.8
    for L, D in [(20, 2), (35, 5), (60, 3)]:
        h_k = kirkham_head(spacing=L, recharge=q, k=K, depth_to_barrier=D, drain_radius=0.1)
        h_h = q * L**2 / (8 * K * equivalent_depth(L, D, 0.1))
        assert_allclose(h_k, h_h, rtol=5e-4)
    # and so do the spacings, against Hooghoudt without the flow above drain level
    L_k = kirkham_spacing(head=0.5, recharge=q, k=K, depth_to_barrier=5.0, drain_radius=0.1)
    L_h = hooghoudt_spacing(recharge=q, head=0.5, k_below=K, k_above=1e-12,
                            depth_to_barrier=5.0, drain_radius=0.1)
    assert_allclose(L_k, L_h, rtol=3e-4)


def test_spacing_round_trip_vectorised():
    K = np.array([0.1, 0.5, 2.0, 10.0])
    L = kirkham_spacing(head=0.6, recharge=0.01, k=K, depth_to_barrier=2.5, drain_radius=0.05)
    assert np.all(np.diff(L) > 0)
    h = kirkham_head(spacing=L, recharge=0.01, k=K, depth_to_barrier=2.5, drain_radius=0.05)
    assert_allclose(h, 0.6, rtol=1e-6)


@pytest.mark.parametrize("kw,match", [
    (dict(depth_to_barrier=0.0), "barrier"), (dict(k=0.0), "conductivity"),
    (dict(recharge=-1.0), "recharge"), (dict(drain_radius=3.0), "smaller than"),
])
def test_bad_input(kw, match):
    args = dict(head=0.5, recharge=0.01, k=0.5, depth_to_barrier=2.0, drain_radius=0.05)
    args.update(kw)
    with pytest.raises(InputError, match=match):
        kirkham_spacing(**args)
