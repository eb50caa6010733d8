"""Glover-Dumm falling water table."""

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.integrate import solve_ivp

from drainplan.errors import InputError
from drainplan.spacing import (equivalent_depth, glover_dumm_flow_depth, glover_dumm_head,
                               glover_dumm_spacing, reaction_factor)


def _linear_boussinesq_midpoint(alpha_t, shape, n=400):
    """Independent numerical solution of dy/dt = (K D / mu) d2y/dx2 on 0 < x < L with y = 0
    at the drains (method of lines, 2nd-order differences, scipy's stiff integrator), in the
    scaled time alpha t = pi^2 K D t / (mu L^2); returns y(L/2) / y0."""
    x = np.linspace(0.0, 1.0, n + 1)[1:-1]          # x / L, interior nodes
    h = 1.0 / n
    y0 = 1.0 - (1.0 - 2.0 * x) ** 4 if shape == "parabolic" else np.ones_like(x)

    def rhs(_, y):
        yy = np.concatenate(([0.0], y, [0.0]))
        return (yy[2:] - 2 * yy[1:-1] + yy[:-2]) / h**2 / np.pi**2

    sol = solve_ivp(rhs, (0, max(alpha_t)), y0, method="BDF", t_eval=alpha_t,
                    rtol=1e-9, atol=1e-12)
    return sol.y[n // 2 - 1]


@pytest.mark.parametrize("shape", ["parabolic", "flat"])
def test_series_against_numerical_solution(shape):
    at = np.array([0.02, 0.05, 0.1, 0.2, 0.5, 1.0, 2.0])
    num = _linear_boussinesq_midpoint(at, shape)
    series = glover_dumm_head(time=at, initial_head=1.0, reaction_factor=1.0, shape=shape)
    assert_allclose(series, num, rtol=2e-4)


def test_series_coefficients():
    # Method notes C-T1 (derived): y_mid / (y0 exp(-alpha t)) for the quartic initial shape
    # 1.0834 (0.1), 1.1313 (0.2), 1.1541 (0.3), 1.1692 (0.5), 1.1729 (1.0); flat 1.1896 (0.2),
    # 1.2655 (0.5), 1.2731 (1.0). The late-time limit is the first series coefficient
    # 192 (pi^2 - 8) / pi^5 = 1.1730 (published, rounded, as 1.16 by Dumm 1964) and 4/pi.
    at = np.array([0.1, 0.2, 0.3, 0.5, 1.0])
    eff = glover_dumm_head(time=at, initial_head=1.0, reaction_factor=1.0) / np.exp(-at)
    assert_allclose(eff, [1.0834, 1.1313, 1.1541, 1.1692, 1.1729], atol=6e-5)
    eff = glover_dumm_head(time=at[[1, 3, 4]], initial_head=1.0, reaction_factor=1.0,
                           shape="flat") / np.exp(-at[[1, 3, 4]])
    assert_allclose(eff, [1.1896, 1.2655, 1.2731], atol=6e-5)
    late = glover_dumm_head(time=6.0, initial_head=1.0, reaction_factor=1.0) / np.exp(-6.0)
    assert_allclose(late, 192 * (np.pi**2 - 8) / np.pi**5, rtol=1e-12)


def test_series_at_time_zero():
    assert glover_dumm_head(time=0.0, initial_head=0.8, reaction_factor=0.3) == 0.8


def test_one_term_matches_series_late():
    # Late times: the one-term formula with the exact coefficient equals the series;
    # with Dumm's 1.16 it is within 1.2 %.
    at = np.array([0.5, 1.0, 2.0])
    series = glover_dumm_head(time=at, initial_head=1.0, reaction_factor=1.0)
    assert_allclose(series, 1.16 * np.exp(-at), rtol=0.012)


# Method notes C-T2 (derived arithmetic): K = 1 m/d, mu = 0.06, t = 2 d, y0 = 1.0 m,
# yt = 0.5 m, D0 = 4.0 m, r0 = 0.1 m.
BASE = dict(initial_head=1.0, final_head=0.5, time=2.0, k=1.0, drainable_porosity=0.06,
            depth_to_barrier=4.0, drain_radius=0.1)


@pytest.mark.parametrize("shape,flow_depth,method,expected", [
    ("parabolic", "equivalent", "series", 28.66),
    ("parabolic", "equivalent-plus-half-head", "series", 32.67),
    ("parabolic", "equivalent-plus-half-head", "moody", 33.21),
    ("flat", "equivalent", "series", 26.74),
    ("flat", "equivalent-plus-half-head", "series", 30.64),
    ("flat", "equivalent-plus-half-head", "moody", 31.15),
])
def test_spacing_cases(shape, flow_depth, method, expected):
    L = glover_dumm_spacing(**BASE, shape=shape, flow_depth=flow_depth,
                            equivalent_depth_method=method)
    assert_allclose(L, expected, atol=0.006)


def test_spacing_satisfies_formula():
    L = glover_dumm_spacing(**BASE)
    d = equivalent_depth(L, 4.0, 0.1)
    assert_allclose(d, 2.100, atol=6e-4)
    assert_allclose(L, np.pi * np.sqrt(1.0 * d * 2.0 / (0.06 * np.log(1.16 * 1.0 / 0.5))),
                    rtol=1e-7)
    fd = glover_dumm_flow_depth(spacing=L, initial_head=1.0, depth_to_barrier=4.0,
                                drain_radius=0.1)
    assert_allclose(fd, d)
    # alpha t = ln(1.16 y0 / yt) by construction
    a = reaction_factor(k=1.0, flow_depth=fd, drainable_porosity=0.06, spacing=L)
    assert_allclose(a * 2.0, np.log(2.32), rtol=1e-6)


def test_conservative_choice_is_narrower():
    assert glover_dumm_spacing(**BASE) < glover_dumm_spacing(
        **BASE, flow_depth="equivalent-plus-half-head")


def test_reaction_factor_value():
    # Method notes C-T3: K = 0.5, d = 3.0, mu = 0.05, L = 40 -> alpha = 0.185055 1/d.
    assert_allclose(reaction_factor(k=0.5, flow_depth=3.0, drainable_porosity=0.05,
                                    spacing=40.0), 0.185055, atol=1e-6)


@pytest.mark.parametrize("kw,match", [
    (dict(final_head=1.2), "below the initial"), (dict(drainable_porosity=0.0), "porosity"),
    (dict(drainable_porosity=1.5), "fraction"), (dict(time=0.0), "time"),
    (dict(k=-1.0), "conductivity"), (dict(shape="round"), "parabolic, flat"),
    (dict(flow_depth="deep"), "equivalent"),
    (dict(depth_to_barrier=0.0), "no flow depth"),
])
def test_bad_input(kw, match):
    args = dict(BASE)
    args.update(kw)
    with pytest.raises(InputError, match=match):
        glover_dumm_spacing(**args)
