"""Spacing under uncertainty: sampled probabilities against exact identities.

Reference: drainplan METHODS 14.5 (DERIVED): when only K varies and the spacing rises
monotonically with K, P[L_req(K) >= L0] = P[K >= K0] with L_req(K0) = L0, so the spacing
met with confidence c is the deterministic spacing at K_c = K50 exp(-z_c sigma), computed
here directly with drain_spacing (not with the module's own shortcut). The lognormal
moments (sigma = sqrt(ln(1 + cv^2))) are textbook statistics; the quantile standard error
sqrt(p(1-p)/n)/f(x) sets the tolerances.
"""

import math

import numpy as np
import pytest
from scipy.stats import norm

from drainplan.errors import InputError
from drainplan.spacing import drain_spacing
from drainplan.uncertainty import (Lognormal, Triangular, Uniform, k_at_confidence,
                                   k_summary, lognormal_log_sd, spacing_uncertainty)

HOOGHOUDT = dict(method="hooghoudt", drain_depth=1.2, barrier_depth=6.0, drain_radius=0.1,
                 k=0.5, recharge=0.007, water_table_depth=0.5)
GLOVER = dict(method="glover-dumm", drain_depth=1.2, barrier_depth=4.0, drain_radius=0.1,
              k=1.0, initial_depth=0.3, final_depth=0.6, days=2, drainable_porosity=0.06)
ERNST = dict(method="ernst", drain_depth=1.0, barrier_depth=6.0, drain_radius=0.08,
             k_above=0.3, k_below=1.5, interface_depth=1.8, recharge=0.007,
             water_table_depth=0.5)
KIRKHAM = dict(method="kirkham", drain_depth=1.2, barrier_depth=3.6, drain_radius=0.06,
               k=0.5, recharge=0.0095, water_table_depth=0.3)


def test_log_sd_from_cv():
    # lognormal moments: cv^2 = exp(sigma^2) - 1
    for cv in (0.1, 0.6, 1.5):
        s = lognormal_log_sd(cv)
        assert math.sqrt(math.expm1(s * s)) == pytest.approx(cv)
    assert k_at_confidence(2.0, 0.5, 0.8) == pytest.approx(2.0 * math.exp(-0.8416 * 0.5),
                                                            rel=1e-4)


CASES = [(site, c, 40000) for site in (HOOGHOUDT, GLOVER, ERNST) for c in (0.5, 0.8, 0.95)]
CASES.append((KIRKHAM, 0.8, 6000))          # the Kirkham series is slower per case


@pytest.mark.parametrize("site,c,n", CASES,
                         ids=[f"{s['method']}-{c}" for s, c, _ in CASES])
def test_percentile_identity(site, c, n):
    sigma = lognormal_log_sd(0.6)
    u = spacing_uncertainty(site, k_log_sd=sigma, confidence=c, n_samples=n, seed=3)
    # deterministic spacing at the matching K percentile, scaling every K of the site
    f = math.exp(-norm.ppf(c) * sigma)
    args = dict(site)
    for key in ("k", "k_above", "k_below"):
        if key in args:
            args[key] = args[key] * f
    exact = float(drain_spacing(**args).spacing)
    # tolerance: 4 standard errors of the K quantile, carried to L through dL/dK (numeric)
    se_lnk = math.sqrt(c * (1 - c) / n) / norm.pdf(norm.ppf(c)) * sigma
    eps = 1e-3
    args2 = dict(args)
    for key in ("k", "k_above", "k_below"):
        if key in args2:
            args2[key] = args2[key] * math.exp(eps)
    dlnL = (math.log(float(drain_spacing(**args2).spacing)) - math.log(exact)) / eps
    assert u.spacing_at_confidence == pytest.approx(exact, rel=4 * se_lnk * dlnL + 1e-9)
    assert u.exact_spacing_at_confidence == pytest.approx(exact, rel=1e-6)
    # probability at the exact spacing is c (within 4 binomial standard errors)
    assert u.probability_at(exact) == pytest.approx(c, abs=4 * math.sqrt(c * (1 - c) / n))


def test_probability_decreases_with_spacing():
    u = spacing_uncertainty(HOOGHOUDT, k_log_sd=0.5, n_samples=5000)
    assert np.all(np.diff(u.probability) <= 0)
    assert u.probability[0] > 0.98 and u.probability[-1] < 0.02
    p = u.probability_at(np.linspace(1, 200, 300))
    assert np.all(np.diff(p) <= 0)
    assert u.probability_at(u.spacing_at_confidence) >= u.confidence
    assert u.probability_at(u.spacing_at_confidence * 1.001) < u.confidence + 1e-3


def test_seeded_and_reproducible():
    kw = dict(k_log_sd=0.5, drainable_porosity=Uniform(0.04, 0.08), n_samples=3000)
    a = spacing_uncertainty(GLOVER, seed=7, **kw)
    b = spacing_uncertainty(GLOVER, seed=7, **kw)
    c = spacing_uncertainty(GLOVER, seed=8, **kw)
    assert np.array_equal(a.required_spacing, b.required_spacing)
    assert a.spacing_at_confidence == b.spacing_at_confidence
    assert not np.array_equal(a.required_spacing, c.required_spacing)


def test_adding_a_range_keeps_the_k_samples():
    # each input has its own random stream: K samples do not move when porosity varies too
    only_k = spacing_uncertainty(GLOVER, k_log_sd=0.5, n_samples=2000, seed=1)
    both = spacing_uncertainty(GLOVER, k_log_sd=0.5, n_samples=2000, seed=1,
                               drainable_porosity=Uniform(0.0599, 0.0601))
    np.testing.assert_allclose(both.required_spacing, only_k.required_spacing, rtol=3e-3)


def test_convergence_with_sample_size():
    sigma = lognormal_log_sd(0.6)
    exact = spacing_uncertainty(HOOGHOUDT, k_log_sd=sigma, n_samples=1000
                                ).exact_spacing_at_confidence
    errors = []
    for n in (1000, 10000, 100000):
        errs = [abs(spacing_uncertainty(HOOGHOUDT, k_log_sd=sigma, n_samples=n, seed=s,
                                        spacings=[30.0]).spacing_at_confidence / exact - 1)
                for s in range(4)]
        errors.append(np.mean(errs))
    assert errors[2] < errors[0]
    assert errors[2] < 0.01          # 100,000 samples: within 1 %
    assert errors[0] < 0.08


def test_vectorised_samples_match_scalar_loop():
    # several inputs varying at once: each sample's required spacing equals a scalar call
    u = spacing_uncertainty([GLOVER], k_log_sd=0.4, drainable_porosity=Triangular(0.04, 0.06, 0.09),
                            barrier_depth=Uniform(3.0, 5.0), n_samples=1000, seed=2)
    rng = [np.random.default_rng(s) for s in np.random.SeedSequence(2).spawn(3)]
    kf = np.exp(0.4 * rng[0].standard_normal(1000))
    mu = rng[1].triangular(0.04, 0.06, 0.09, 1000)
    zb = rng[2].uniform(3.0, 5.0, 1000)
    for i in range(0, 1000, 97):
        L = drain_spacing(**dict(GLOVER, k=GLOVER["k"] * kf[i], drainable_porosity=mu[i],
                                 barrier_depth=zb[i])).spacing
        assert u.required_spacing[i] == pytest.approx(float(L), rel=1e-9)


def test_two_criteria_all_must_be_met():
    steady = dict(HOOGHOUDT, barrier_depth=4.0)
    falling = dict(GLOVER, k=0.5)
    u = spacing_uncertainty([steady, falling], k_log_sd=0.5, n_samples=2000)
    us = spacing_uncertainty(steady, k_log_sd=0.5, n_samples=2000)
    uf = spacing_uncertainty(falling, k_log_sd=0.5, n_samples=2000)
    np.testing.assert_allclose(u.required_spacing,
                               np.minimum(us.required_spacing, uf.required_spacing))


def test_more_spread_lowers_the_confident_spacing():
    narrow = spacing_uncertainty(HOOGHOUDT, k_log_sd=0.2, n_samples=5000)
    wide = spacing_uncertainty(HOOGHOUDT, k_log_sd=0.8, n_samples=5000)
    assert wide.spacing_at_confidence < narrow.spacing_at_confidence


def test_k_summary_geometric_mean_and_percentile():
    k = [0.2, 0.45, 0.9, 1.6]
    s = k_summary(k)
    assert s["design_k"] == pytest.approx(np.exp(np.mean(np.log(k))))
    assert s["log_sd"] == pytest.approx(np.std(np.log(k), ddof=1))
    p25 = k_summary(k, percentile=25)["design_k"]
    assert p25 == pytest.approx(s["geometric_mean"] * np.exp(norm.ppf(0.25) * s["log_sd"]))
    assert p25 < s["design_k"]


@pytest.mark.parametrize("kw,match", [
    (dict(k_log_sd=0.5, confidence=1.2), "confidence must be between 0 and 1"),
    (dict(), "nothing varies"),
    (dict(k_log_sd=0.5, n_samples=10), "number of samples"),
    (dict(barrier_depth=Uniform(0.8, 3.0)), "above the drains"),
    (dict(drainable_porosity=Uniform(0.04, 0.08)), "does not enter a steady criterion"),
])
def test_bad_uncertainty_inputs(kw, match):
    with pytest.raises(InputError, match=match):
        spacing_uncertainty(HOOGHOUDT, **kw)


def test_bad_distributions():
    with pytest.raises(InputError):
        Uniform(0.08, 0.04)
    with pytest.raises(InputError):
        Triangular(0.04, 0.1, 0.08)
    with pytest.raises(InputError):
        Lognormal(-1.0, 0.5)


def test_normal_quantile_matches_scipy():
    """The standard normal quantile drainplan uses (Python's statistics.NormalDist)
    equals scipy.special.ndtri (reference library) to 1e-14, limits included."""
    from scipy.special import ndtri

    from drainplan.uncertainty import _z

    p = np.r_[1e-12, 1e-6, np.linspace(0.001, 0.999, 999), 1 - 1e-6, 1 - 1e-12]
    got = np.array([_z(x) for x in p])
    np.testing.assert_allclose(got, ndtri(p), rtol=1e-14, atol=1e-14)
    assert _z(0.0) == -np.inf and _z(1.0) == np.inf and np.isnan(_z(1.5))
