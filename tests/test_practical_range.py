"""Every method converges over the practical range of inputs (K 0.01-20 m/d,
q 0.5-50 mm/d, D 0-30 m, L 2-300 m) and its result satisfies its own equation."""

import warnings

import numpy as np
from numpy.testing import assert_allclose

from drainplan.errors import ConvergenceWarning
from drainplan.spacing import (equivalent_depth, ernst_head, ernst_profile_spacing,
                               ernst_profile_terms, glover_dumm_spacing, hooghoudt_spacing,
                               kirkham_head, kirkham_spacing)

K = np.array([0.01, 0.05, 0.3, 1.0, 5.0, 20.0])
Q = np.array([0.5, 2.0, 10.0, 50.0]) / 1000.0
D = np.array([0.0, 0.3, 1.0, 4.0, 12.0, 30.0])
H = np.array([0.2, 0.6, 1.2])
R0 = 0.05


def grid(*arrays):
    return [a.ravel() for a in np.meshgrid(*arrays, indexing="ij")]


def solve(fn, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        return fn(**kw)


def practical(L_lo, L_hi):
    """Cases whose solution brackets lie inside 2-300 m (so the answer is practical)."""
    return (L_lo >= 2.0) & (L_hi <= 300.0)


def test_hooghoudt_range():
    k, q, d, h = grid(K, Q, D, H)
    L = solve(hooghoudt_spacing, recharge=q, head=h, k_below=k, depth_to_barrier=d,
              drain_radius=R0)
    lo, hi = np.sqrt(4 * k * h * h / q), np.sqrt((8 * k * d * h + 4 * k * h * h) / q)
    sel = practical(lo, hi) & ((d == 0) | (d > R0))
    assert sel.sum() > 50
    assert np.all(np.isfinite(L[sel]))
    de = equivalent_depth(L[sel], d[sel], R0)
    assert_allclose(q[sel] * L[sel] ** 2, 8 * k[sel] * de * h[sel] + 4 * k[sel] * h[sel] ** 2,
                    rtol=1e-6)


def test_kirkham_range():
    k, q, d, h = grid(K, Q, D[D > R0], H)
    L = solve(kirkham_spacing, head=h, recharge=q, k=k, depth_to_barrier=d, drain_radius=R0)
    hi = np.sqrt(8 * k * d * h / q)
    sel = practical(np.full_like(hi, 2.0), hi) & (hi > 4.0)
    assert sel.sum() > 30
    assert np.all(np.isfinite(L[sel]))
    assert_allclose(kirkham_head(spacing=L[sel], recharge=q[sel], k=k[sel],
                                 depth_to_barrier=d[sel], drain_radius=R0), h[sel], rtol=1e-6)


def test_ernst_range():
    k, q, d, h = grid(K, Q, D[D > R0], H)
    L = solve(ernst_profile_spacing, head=h, recharge=q, drain_depth=1.5,
              barrier_depth=1.5 + d, k_top=k, drain_radius=R0)
    hi = np.sqrt((8 * k * (d + h) * h) / q)
    sel = practical(np.full_like(hi, 2.0), hi) & (hi > 5.0) & (q * h / k < 0.5 * h)
    assert sel.sum() > 30
    assert np.all(np.isfinite(L[sel]))
    t = ernst_profile_terms(spacing=L[sel], head=h[sel], drain_depth=1.5,
                            barrier_depth=1.5 + d[sel], k_top=k[sel], drain_radius=R0)
    assert_allclose(q[sel] * (t["vertical"] + t["horizontal"] + t["radial"]), h[sel],
                    rtol=1e-6)
    # the equation itself, with fixed parameters, against its quadratic solution
    assert np.isfinite(ernst_head(spacing=30.0, recharge=0.005, transmissivity=2.0,
                                  k_radial=1.0, radial_thickness=2.0, wet_perimeter=0.16))


def test_glover_dumm_range():
    k, d, mu, t = grid(K, D[D > R0], np.array([0.02, 0.06, 0.15]), np.array([0.5, 2.0, 10.0]))
    L = solve(glover_dumm_spacing, initial_head=1.0, final_head=0.5, time=t, k=k,
              drainable_porosity=mu, depth_to_barrier=d, drain_radius=R0)
    hi = np.pi * np.sqrt(k * d * t / (mu * np.log(1.16 * 2)))
    sel = practical(np.full_like(hi, 2.0), hi) & (hi > 4.0)
    assert sel.sum() > 30
    assert np.all(np.isfinite(L[sel]))
    de = equivalent_depth(L[sel], d[sel], R0)
    assert_allclose(L[sel], np.pi * np.sqrt(k[sel] * de * t[sel] /
                                            (mu[sel] * np.log(1.16 * 2))), rtol=1e-6)
