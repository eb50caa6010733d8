"""The spacing solvers against independent references, over the practical range.

Two references, both outside the solvers under test:

* the numbers of the previous implementation (the bracketed Chandrupatla solver,
  captured by tests/data/make_solver_reference.py at commit f12b689 with xtol 1e-9 m,
  over a seeded sample: K 0.05-5 m/d, q 1-10 mm/d, h 0.2-1 m, D 0.5-20 m, r 0.05-0.15 m);
* scipy's scalar ``brentq`` on each equation, written here with the ``math`` module: the
  equivalent depth from van der Molen & Wesseling's (1991) published series summed term by
  term, and Kirkham's (1958) series summed term by term (method notes, Eqs. 1.2 and 2.1).

Tolerance: 1e-6 m, the solvers' default xtol (the previous implementation's numbers were
solved to 1e-9 m).
"""

import math
import warnings
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy.optimize import brentq

from drainplan._solve import bracketed_root
from drainplan.errors import ConvergenceWarning
from drainplan.spacing import glover_dumm_spacing, hooghoudt_spacing, kirkham_spacing
from drainplan.spacing.equivalent_depth import _equivalent_depth_unchecked
from drainplan.spacing.glover_dumm import INITIAL_SHAPES

DATA = Path(__file__).with_name("data") / "solver_reference.csv"


@pytest.fixture(scope="module")
def ref():
    return np.genfromtxt(DATA, delimiter=",", names=True, skip_header=1, deletechars="")


# ---------------------------------------------------------------------------------------
# Previous implementation's numbers
# ---------------------------------------------------------------------------------------

@pytest.mark.parametrize("method", ["series", "moody"])
def test_hooghoudt_matches_previous_implementation(ref, method):
    L1 = hooghoudt_spacing(recharge=ref["q"], head=ref["h"], k_below=ref["k"],
                           depth_to_barrier=ref["D"], drain_radius=ref["r"],
                           equivalent_depth_method=method)
    L2 = hooghoudt_spacing(recharge=ref["q"], head=ref["h"], k_below=ref["k"],
                           k_above=ref["k_above"], depth_to_barrier=ref["D"],
                           drain_radius=ref["r"], equivalent_depth_method=method)
    assert_allclose(L1, ref[f"hooghoudt_{method}"], rtol=0, atol=1e-6)
    assert_allclose(L2, ref[f"hooghoudt2_{method}"], rtol=0, atol=1e-6)


@pytest.mark.parametrize("method", ["series", "moody"])
@pytest.mark.parametrize("shape", ["parabolic", "flat"])
@pytest.mark.parametrize("flow_depth", ["equivalent", "equivalent-plus-half-head"])
def test_glover_dumm_matches_previous_implementation(ref, method, shape, flow_depth):
    L = glover_dumm_spacing(initial_head=ref["h"], final_head=ref["h"] * ref["ratio"],
                            time=ref["days"], k=ref["k"], drainable_porosity=ref["mu"],
                            depth_to_barrier=ref["D"], drain_radius=ref["r"], shape=shape,
                            flow_depth=flow_depth, equivalent_depth_method=method)
    assert_allclose(L, ref[f"glover_{method}_{shape}_{flow_depth}"], rtol=0, atol=1e-6)


def test_kirkham_matches_previous_implementation(ref):
    L = kirkham_spacing(head=ref["h"], recharge=ref["q"], k=ref["k"],
                        depth_to_barrier=ref["D"], drain_radius=ref["r"])
    assert_allclose(L, ref["kirkham"], rtol=0, atol=1e-6)


# ---------------------------------------------------------------------------------------
# scipy brentq on the equations, written with the math module
# ---------------------------------------------------------------------------------------

def _f_vdmw(x):
    """van der Molen & Wesseling (1991) F(x) = sum over odd n of 4 e^(-2nx) / (n (1 - e^(-2nx))),
    summed term by term until the terms no longer change the sum."""
    total, n = 0.0, 1
    while True:
        e = math.exp(-2.0 * n * x)
        term = 4.0 * e / (n * (1.0 - e))
        total += term
        if term < 1e-17 * total or e == 0.0:
            return total
        n += 2


def _d_reference(L, D, r0):
    """Equivalent depth, Eq. (1.2): (pi L / 8) / (ln(L / (pi r0)) + F), limited to D."""
    if D == 0:
        return 0.0
    w = math.log(L / (math.pi * r0)) + _f_vdmw(2.0 * math.pi * D / L)
    d = math.pi * L / (8.0 * w)
    return min(d, D) if d >= 0 else D


def _kirkham_f_reference(L, D, r):
    """Kirkham's (1958) series (method notes Eq. 2.1), summed term by term."""
    total, m = 0.0, 1
    while True:
        e = math.exp(-4.0 * math.pi * m * D / L)
        term = (math.cos(2.0 * math.pi * m * r / L) - math.cos(m * math.pi)) * 2.0 * e / (
            (1.0 - e) * m)
        total += term
        if e < 1e-18:
            return (math.log(L / (math.pi * r)) + total) / math.pi
        m += 1


def _sample(n, seed):
    rng = np.random.default_rng(seed)
    return dict(k=10 ** rng.uniform(math.log10(0.05), math.log10(5.0), n),
                k_above=10 ** rng.uniform(math.log10(0.05), math.log10(5.0), n),
                q=10 ** rng.uniform(-3, -2, n), h=rng.uniform(0.2, 1.0, n),
                D=rng.uniform(0.5, 20.0, n), r=rng.uniform(0.05, 0.15, n),
                mu=rng.uniform(0.02, 0.15, n), days=rng.uniform(0.5, 5.0, n),
                ratio=rng.uniform(0.2, 0.8, n))


def test_hooghoudt_matches_brentq():
    s = _sample(60, 101)
    L = hooghoudt_spacing(recharge=s["q"], head=s["h"], k_below=s["k"], k_above=s["k_above"],
                          depth_to_barrier=s["D"], drain_radius=s["r"])
    for i in range(60):
        q, h, k1, k2, D, r0 = (float(s[v][i]) for v in ("q", "h", "k_above", "k", "D", "r"))

        def f(x):
            return q * x * x - 8.0 * k2 * _d_reference(x, D, r0) * h - 4.0 * k1 * h * h

        lo = max(math.sqrt(4.0 * k1 * h * h / q), math.pi * r0 * (1 + 1e-6))
        hi = math.sqrt((8.0 * k2 * D * h + 4.0 * k1 * h * h) / q) * (1 + 1e-9)
        assert abs(L[i] - brentq(f, lo, hi, xtol=1e-12)) <= 1e-6


@pytest.mark.parametrize("shape", ["parabolic", "flat"])
def test_glover_dumm_matches_brentq(shape):
    s = _sample(40, 202)
    L = glover_dumm_spacing(initial_head=s["h"], final_head=s["h"] * s["ratio"],
                            time=s["days"], k=s["k"], drainable_porosity=s["mu"],
                            depth_to_barrier=s["D"], drain_radius=s["r"], shape=shape)
    c = INITIAL_SHAPES[shape]
    for i in range(40):
        y0, ratio, t, K, mu, D, r0 = (float(s[v][i]) for v in
                                      ("h", "ratio", "days", "k", "mu", "D", "r"))
        factor = K * t / (mu * math.log(c / ratio))     # Eq. (4.1): L^2 = pi^2 factor d

        def f(x):
            return x * x - math.pi ** 2 * factor * _d_reference(x, D, r0)

        hi = math.pi * math.sqrt(factor * D) * (1 + 1e-9)
        assert abs(L[i] - brentq(f, math.pi * r0 * (1 + 1e-6), hi, xtol=1e-12)) <= 1e-6


def test_kirkham_matches_brentq():
    s = _sample(25, 303)
    L = kirkham_spacing(head=s["h"], recharge=s["q"], k=s["k"], depth_to_barrier=s["D"],
                        drain_radius=s["r"])
    for i in range(25):
        h, q, K, D, r = (float(s[v][i]) for v in ("h", "q", "k", "D", "r"))

        def f(x):
            return q * x * _kirkham_f_reference(x, D, r) / K - h

        hi = 1.05 * math.sqrt(8.0 * K * D * h / q) + 8.0 * math.pi * r
        assert abs(L[i] - brentq(f, 2.0 * math.pi * r, hi, xtol=1e-12)) <= 1e-6


# ---------------------------------------------------------------------------------------
# Beyond the practical range: against the bracketed solver on the library's own equation
# ---------------------------------------------------------------------------------------

def _bracketed_hooghoudt(q, h, k1, k2, D, r0, method):
    c_a, c_b = 4.0 * k1 * h * h, 8.0 * k2 * h
    lo = np.maximum(np.sqrt(c_a / q), np.pi * r0 * (1 + 1e-6))
    hi = np.sqrt((c_b * D + c_a) / q) * (1 + 1e-9)

    def f(L, q, c_a, c_b, D, r0):
        return q * L * L - c_b * _equivalent_depth_unchecked(L, D, r0, method) - c_a

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        return bracketed_root(f, lo, hi, (q, c_a, c_b, D, r0), xtol=1e-10).root


@settings(max_examples=40, deadline=None)
@given(q=st.floats(1e-4, 0.1), k1=st.floats(0.005, 50.0), k2=st.floats(0.005, 50.0),
       h=st.floats(0.05, 3.0), D=st.floats(0.01, 200.0), r0=st.floats(0.002, 0.5),
       method=st.sampled_from(["series", "moody"]))
def test_hooghoudt_wide_range_matches_bracketed_solver(q, k1, k2, h, D, r0, method):
    if 0 < D <= r0:
        D = 2 * r0
    ref = _bracketed_hooghoudt(*(np.array([v]) for v in (q, h, k1, k2, D, r0)), method)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        L = hooghoudt_spacing(recharge=q, head=h, k_above=k1, k_below=k2, depth_to_barrier=D,
                              drain_radius=r0, equivalent_depth_method=method)
    if np.isnan(ref[0]):
        assert np.isnan(L)
    else:
        assert abs(L - ref[0]) <= 1e-6 + 1e-12 * ref[0]


def test_kirkham_wide_range_against_series():
    """Deep and very shallow barriers, radii up to half the barrier depth."""
    rng = np.random.default_rng(404)
    n = 12
    h, q, K = rng.uniform(0.05, 2, n), 10 ** rng.uniform(-4, -1, n), 10 ** rng.uniform(-2, 1.5, n)
    D = 10 ** rng.uniform(-0.5, 2.5, n)
    r = D * rng.uniform(0.01, 0.5, n) * (rng.uniform(size=n) < 0.5) + 0.05
    r = np.minimum(r, 0.5 * D)
    L = kirkham_spacing(head=h, recharge=q, k=K, depth_to_barrier=D, drain_radius=r)
    for i in range(n):
        resid = q[i] * L[i] * _kirkham_f_reference(L[i], D[i], r[i]) / K[i] - h[i]
        slope = q[i] * _kirkham_f_reference(L[i], D[i], r[i]) / K[i]   # >= d(head)/dL / 2
        assert abs(resid) / slope <= 2e-6


def test_tight_tolerance_is_honoured():
    s = _sample(30, 505)
    L = hooghoudt_spacing(recharge=s["q"], head=s["h"], k_below=s["k"],
                          depth_to_barrier=s["D"], drain_radius=s["r"], xtol=1e-11)
    ref = _bracketed_hooghoudt(s["q"], s["h"], s["k"], s["k"], s["D"], s["r"], "series")
    assert_allclose(L, ref, rtol=0, atol=1e-9)


def test_edge_cases_keep_their_meaning():
    # drains on the barrier: the Donnan spacing sqrt(4 K h^2 / q) (Hooghoudt 1940, D = 0)
    assert_allclose(hooghoudt_spacing(recharge=0.005, head=0.5, k_below=1.0,
                                      depth_to_barrier=0.0, drain_radius=0.1),
                    math.sqrt(4 * 0.25 / 0.005), rtol=1e-12)
    # barrier just below the drain (d = D over the whole bracket): q L^2 = 8 K D h + 4 K h^2
    L = hooghoudt_spacing(recharge=0.005, head=0.5, k_below=1.0, depth_to_barrier=0.12,
                          drain_radius=0.1)
    assert_allclose(L, math.sqrt((8 * 0.12 * 0.5 + 4 * 0.25) / 0.005), rtol=0, atol=1e-6)
    # no spacing wider than the drains: NaN and one warning
    with pytest.warns(ConvergenceWarning):
        L = hooghoudt_spacing(recharge=[0.005, 1.0], head=[0.5, 0.01], k_below=[1.0, 0.001],
                              depth_to_barrier=2.0, drain_radius=0.1)
    assert np.isfinite(L[0]) and np.isnan(L[1])
    # shapes: scalar in, float out; 2-D in, 2-D out
    assert isinstance(kirkham_spacing(head=0.5, recharge=0.005, k=1.0, depth_to_barrier=3.0,
                                      drain_radius=0.1), float)
    L2 = glover_dumm_spacing(initial_head=1.0, final_head=[[0.5, 0.6], [0.7, 0.8]], time=2.0,
                             k=1.0, drainable_porosity=0.06, depth_to_barrier=4.0,
                             drain_radius=0.1)
    # a smaller drop allows a wider spacing; 28.66 m is method notes C-T2 (derived)
    assert L2.shape == (2, 2) and np.all(np.diff(L2.ravel()) > 0)
    assert_allclose(L2[0, 0], 28.66, atol=0.005)


# ---------------------------------------------------------------------------------------
# Paths the practical sample rarely takes
# ---------------------------------------------------------------------------------------

def test_cases_left_by_the_two_halley_steps_are_finished(monkeypatch):
    """From starts far off the root (half of it, 1.6 times it) the two fused Halley steps
    of the series method cannot end every case by their stop rule; newton_block finishes
    those. Reference: scipy brentq on Hooghoudt's equation with the published series
    (_d_reference above), to the solvers' 1e-6 m."""
    import importlib

    import drainplan._solve as solve_module

    ed = importlib.import_module("drainplan.spacing.equivalent_depth")
    finished = []
    real = solve_module.newton_block

    def spy(*args, **kw):
        finished.append(args[1].size)
        return real(*args, **kw)

    monkeypatch.setattr(solve_module, "newton_block", spy)
    s = _sample(40, 606)
    q, h, k, D, r = s["q"], s["h"], s["k"], s["D"], s["r"]
    ref = []
    for i in range(40):
        def f(x, i=i):
            return q[i] * x * x - 8.0 * k[i] * _d_reference(x, D[i], r[i]) * h[i] \
                - 4.0 * k[i] * h[i] * h[i]
        lo = max(math.sqrt(4.0 * k[i] * h[i] ** 2 / q[i]), math.pi * r[i] * (1 + 1e-6))
        hi = math.sqrt((8.0 * k[i] * D[i] * h[i] + 4.0 * k[i] * h[i] ** 2) / q[i]) * (1 + 1e-9)
        ref.append(brentq(f, lo, hi, xtol=1e-12))
    ref = np.array(ref)
    A, B = np.pi * k * h / q, 4.0 * k * h * h / q
    small = 2.0 * np.pi * D <= ed._X_SWITCH * ref
    assert small.any() and (~small).any()
    for factor in (0.5, 1.6):
        for branch in (True, False):
            i = np.flatnonzero(small == branch)
            if branch:
                p, g = 1.0 / D[i], np.log(D[i] / (np.pi * r[i]))
                k2 = -0.25 * np.pi ** 2 / D[i] ** 2
            else:
                p, g, k2 = 2.0 * np.pi * D[i], np.log(np.pi * r[i]), None
            L, good = ed._two_halley_steps(branch, ref[i] * factor, A[i], B[i], p, g, k2, 1e-6)
            assert good.all()
            assert_allclose(L, ref[i], rtol=0, atol=1e-6)
    assert len(finished) >= 2 and sum(finished) > 0


def test_hooghoudt_mixed_block_matches_bracketed_solver():
    """Cases the closed-form start handles and cases only the bracketed solver handles
    (drains on the barrier, a barrier within a radius or two of the drain, spacings of a
    few radii, no solution) in one array, so one block takes both paths. Reference: the
    bracketed solver on the library's own equation (as in the wide-range test above) and,
    for D = 0, Donnan's q L^2 = 4 K h^2 (Hooghoudt 1940)."""
    rng = np.random.default_rng(707)
    n = 300
    q, h = 10 ** rng.uniform(-3, -1.5, n), rng.uniform(0.1, 1.0, n)
    k1, k2 = 10 ** rng.uniform(-2, 1, n), 10 ** rng.uniform(-2, 1, n)
    r0 = rng.uniform(0.02, 0.2, n)
    D = rng.uniform(0.5, 30.0, n)
    kind = rng.integers(0, 4, n)
    D = np.where(kind == 1, 0.0, D)                                   # drains on the barrier
    D = np.where(kind == 2, r0 * rng.uniform(1.05, 3.0, n), D)       # barrier just below
    q = np.where(kind == 3, q * 50.0, q)                              # narrow spacings
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        L = hooghoudt_spacing(recharge=q, head=h, k_above=k1, k_below=k2, depth_to_barrier=D,
                              drain_radius=r0)
    on = kind == 1                  # the bracket of the reference is empty there
    ref = _bracketed_hooghoudt(q, h, k1, k2, D, r0, "series")
    assert np.array_equal(np.isnan(L[~on]), np.isnan(ref[~on]))
    ok = ~np.isnan(ref) & ~on
    assert ok.sum() > n // 2 and (kind[ok] == 0).any() and (kind[ok] == 2).any()
    assert (kind[ok] == 3).any() and np.isnan(L).any()
    assert_allclose(L[ok], ref[ok], rtol=1e-12, atol=1e-6)
    donnan = np.sqrt(4.0 * k1 * h ** 2 / q)
    wide = on & (donnan > 1.001 * np.pi * r0)        # wider than the drains themselves
    assert wide.any() and np.isnan(L[on & (donnan < 0.999 * np.pi * r0)]).all()
    assert_allclose(L[wide], donnan[wide], rtol=1e-9)


@pytest.mark.parametrize("flow_depth", ["equivalent", "equivalent-plus-half-head"])
def test_glover_dumm_wide_range_matches_bracketed_solver(flow_depth):
    """Beyond the practical range (K 0.003-50 m/d, 0.1-30 d, D 0.03-300 m, r 3 mm-0.5 m), an
    array at a time: the bracketed solver on L^2 = pi^2 K t (d + extra) / (mu ln(c y0/yt))
    (Glover-Dumm, method notes Eq. 4.1) with the library's equivalent depth."""
    rng = np.random.default_rng(808)
    n = 400
    y0, ratio = 10 ** rng.uniform(-1.3, 0.5, n), rng.uniform(0.05, 0.95, n)
    t, K, mu = 10 ** rng.uniform(-1, 1.5, n), 10 ** rng.uniform(-2.5, 1.7, n), \
        rng.uniform(0.01, 0.3, n)
    r0 = 10 ** rng.uniform(-2.5, -0.3, n)
    D = np.maximum(10 ** rng.uniform(-1.5, 2.5, n), 1.5 * r0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        L = glover_dumm_spacing(initial_head=y0, final_head=y0 * ratio, time=t, k=K,
                                drainable_porosity=mu, depth_to_barrier=D, drain_radius=r0,
                                flow_depth=flow_depth)
    fac = K * t / (mu * np.log(INITIAL_SHAPES["parabolic"] / ratio))
    extra = 0.5 * y0 if flow_depth != "equivalent" else 0.0 * y0

    def f(x, fac, D, r0, extra):
        return x * x - np.pi ** 2 * fac * (_equivalent_depth_unchecked(x, D, r0) + extra)

    lo = np.pi * r0 * (1 + 1e-6)
    hi = np.pi * np.sqrt(fac * (D + extra)) * (1 + 1e-9)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        ref = bracketed_root(f, lo, hi, (fac, D, r0, extra), xtol=1e-10).root
    assert np.array_equal(np.isnan(L), np.isnan(ref))
    ok = ~np.isnan(ref)
    assert ok.sum() > 0.8 * n
    assert_allclose(L[ok], ref[ok], rtol=1e-12, atol=1e-6)


def test_empty_input_gives_empty_output():
    """No cases in, no spacings out, in the shape given (the numpy convention)."""
    kw = dict(depth_to_barrier=3.0, drain_radius=0.05)
    for method in ("series", "moody"):
        L = hooghoudt_spacing(recharge=np.ones((2, 0)), head=0.5, k_below=0.5,
                              equivalent_depth_method=method, **kw)
        assert L.shape == (2, 0)
    assert glover_dumm_spacing(initial_head=[], final_head=0.4, time=2.0, k=0.5,
                               drainable_porosity=0.05, **kw).shape == (0,)
    assert kirkham_spacing(head=np.zeros((0, 3)), recharge=0.005, k=0.5, **kw).shape == (0, 3)
