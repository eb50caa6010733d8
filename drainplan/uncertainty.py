"""How sure is a drain spacing? Sampling the uncertain inputs through the vectorised core.

Hydraulic conductivity is the least certain input of every spacing and varies
several-fold across one field; drainable porosity and the depth of the barrier
are seldom known well either. This module describes them as distributions
(lognormal K; uniform or triangular ranges for the others), draws many samples
at once, and passes the whole arrays through :func:`drainplan.spacing.drain_spacing`
in one call (any method, steady or falling water table). From the required
spacing of each sample it gives

* the probability that a spacing meets the criterion, P(L) = P[L_req >= L],
* the curve of that probability against spacing,
* the spacing that meets the criterion with a chosen confidence c (the widest
  L with P(L) >= c).

Why sample at all? With K alone varying, the spacing rises monotonically
with K, so P[L_req(K) >= L0] = P[K >= K0] where L_req(K0) = L0, and the spacing
at confidence c is simply the deterministic spacing at the K exceeded with
probability c (K_c = K50 exp(-z_c σ); drainplan's method notes 14.5).
:func:`spacing_uncertainty` reports that exact value beside the sampled one as
a check. When several inputs vary together (K with drainable porosity, or the
barrier depth), no single percentile of one input gives the answer: a low K
may come with a high porosity, and the spacing's distribution depends on the
joint spread, so the probabilities must be counted over joint samples.

Pure numpy/scipy, SI (m, m/d, d), no I/O; seeded and reproducible.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np

from .errors import ConvergenceWarning, InputError
from .spacing import drain_spacing

__all__ = ["Lognormal", "Uniform", "Triangular", "lognormal_log_sd", "k_summary",
           "k_at_confidence", "SpacingUncertainty", "spacing_uncertainty"]

_K_KEYS = ("k", "k_above", "k_below", "k_vertical")


def _z(p):
    """Standard normal quantile of probability ``p`` (Python's ``statistics.NormalDist``,
    Wichura's AS 241 algorithm, to double precision)."""
    from statistics import NormalDist

    p = float(p)
    if not 0.0 < p < 1.0:             # the limits, as scipy.special.ndtri gives them
        return -math.inf if p == 0.0 else math.inf if p == 1.0 else math.nan
    return NormalDist().inv_cdf(p)


@dataclass(frozen=True)
class Lognormal:
    """Lognormal distribution by its median and the standard deviation of ln(x)."""

    median: float
    log_sd: float

    def __post_init__(self):
        if not (math.isfinite(self.median) and self.median > 0):
            raise InputError("a lognormal median must be greater than 0", param="k")
        if not (math.isfinite(self.log_sd) and self.log_sd >= 0):
            raise InputError("a log-standard deviation must be 0 or more", param="k_cv")

    def sample(self, rng, n):
        return self.median * np.exp(self.log_sd * rng.standard_normal(n))

    def ppf(self, p):
        return self.median * math.exp(self.log_sd * _z(p))

    def describe(self):
        return f"lognormal, median {self.median:.4g}, log-sd {self.log_sd:.3g}"


@dataclass(frozen=True)
class Uniform:
    """Uniform distribution between ``low`` and ``high``."""

    low: float
    high: float

    def __post_init__(self):
        if not (math.isfinite(self.low) and math.isfinite(self.high) and self.low < self.high):
            raise InputError(f"a range needs low < high, got {self.low:g} to {self.high:g}",
                             param="range")

    def sample(self, rng, n):
        return rng.uniform(self.low, self.high, n)

    def describe(self):
        return f"uniform {self.low:.4g} to {self.high:.4g}"


@dataclass(frozen=True)
class Triangular:
    """Triangular distribution from ``low`` to ``high`` with its peak at ``mode``."""

    low: float
    mode: float
    high: float

    def __post_init__(self):
        if not (self.low <= self.mode <= self.high and self.low < self.high):
            raise InputError(f"a triangular range needs low <= mode <= high and low < high, got "
                             f"{self.low:g}, {self.mode:g}, {self.high:g}", param="range")

    def sample(self, rng, n):
        return rng.triangular(self.low, self.mode, self.high, n)

    def describe(self):
        return f"triangular {self.low:.4g} to {self.high:.4g}, mode {self.mode:.4g}"


def lognormal_log_sd(cv):
    """Log-standard deviation σ of a lognormal variable from its coefficient of variation.

    σ = sqrt(ln(1 + cv²)) (moments of the lognormal distribution).

    Examples
    --------
    >>> round(lognormal_log_sd(0.6), 4)
    0.5545
    """
    cv = float(cv)
    if not (math.isfinite(cv) and cv >= 0):
        raise InputError(f"coefficient of variation of K must be 0 or more, got {cv:g}",
                         param="k_cv")
    return math.sqrt(math.log1p(cv * cv))


def k_summary(k_values, *, percentile=None):
    """Design K and spread from several field values of K in one field.

    Parameters
    ----------
    k_values : array_like
        K from each test [m/d], > 0.
    percentile : float, optional
        Design K at this percentile [%] of the lognormal fitted to the tests
        (e.g. 25 for a cautious value); default the geometric mean (median).

    Returns
    -------
    dict
        ``design_k`` [m/d], ``geometric_mean`` [m/d], ``log_sd`` (standard
        deviation of ln K, n - 1 in the denominator; 0 for a single test),
        ``cv`` (coefficient of variation of the fitted lognormal), ``n``,
        ``min``, ``max``, ``spread_factor`` (max/min), ``percentile``.

    Notes
    -----
    K measured in one field is commonly close to lognormal, so the
    geometric mean is the usual central value and the spread is described
    by the standard deviation of ln K [PRACTICE]. The percentile is taken
    on the fitted lognormal, K_p = exp(mean ln K + z_p s).

    Examples
    --------
    >>> s = k_summary([0.3, 0.6, 1.2])
    >>> round(s["design_k"], 3), round(s["log_sd"], 3), s["spread_factor"]
    (0.6, 0.693, 4.0)
    """
    k = np.asarray(k_values, float).ravel()
    if k.size == 0:
        raise InputError("no K values from field tests", param="tests")
    if np.any(~np.isfinite(k)) or np.any(k <= 0):
        raise InputError("every field-test K must be greater than 0 m/d", param="tests")
    lk = np.log(k)
    gm = float(np.exp(lk.mean()))
    sd = float(lk.std(ddof=1)) if k.size > 1 else 0.0
    out = {"geometric_mean": gm, "log_sd": sd, "cv": math.sqrt(math.expm1(sd * sd)),
           "n": int(k.size), "min": float(k.min()), "max": float(k.max()),
           "spread_factor": float(k.max() / k.min()), "percentile": percentile,
           "design_k": gm}
    if percentile is not None:
        p = float(percentile)
        if not 0 < p < 100:
            raise InputError(f"design percentile must be between 0 and 100 %, got {p:g}",
                             param="percentile")
        out["design_k"] = gm * math.exp(sd * _z(p / 100.0))
    return out


def k_at_confidence(k_median, log_sd, confidence):
    """The K exceeded with probability ``confidence`` for lognormal K.

    K_c = K50 exp(-z_c σ) (drainplan's method notes 14.5); the deterministic
    spacing at K_c is the spacing met with confidence c when only K varies.

    Examples
    --------
    >>> round(k_at_confidence(1.0, 0.5, 0.8), 4)
    0.6565
    """
    return float(k_median) * math.exp(-_z(float(confidence)) * float(log_sd))


@dataclass(frozen=True)
class SpacingUncertainty:
    """Result of :func:`spacing_uncertainty` (SI units).

    Attributes
    ----------
    required_spacing : numpy.ndarray
        Widest spacing meeting every criterion, one per sample [m]; NaN where
        no spacing does.
    spacings : numpy.ndarray
        Spacings of the probability curve [m], increasing.
    probability : numpy.ndarray
        Probability that each of ``spacings`` meets the criterion [-],
        non-increasing.
    confidence : float
    spacing_at_confidence : float
        Widest spacing met with at least that probability [m]; NaN when more
        than 1 - confidence of the samples have no solution.
    median_spacing : float
        Spacing met with probability 1/2 [m].
    exact_spacing_at_confidence : float or None
        When only K varies: the deterministic spacing at K_c (the identity
        above) [m].
    proposed_spacing, probability_proposed : float or None
        A spacing to check and the probability that it meets the criterion.
    no_solution_fraction : float
        Share of the samples with no workable spacing.
    varied : tuple of (str, str)
        Each varied input and its distribution, in words.
    n_samples, seed : int
    """

    required_spacing: np.ndarray
    spacings: np.ndarray
    probability: np.ndarray
    confidence: float
    spacing_at_confidence: float
    median_spacing: float
    exact_spacing_at_confidence: float | None
    proposed_spacing: float | None
    probability_proposed: float | None
    no_solution_fraction: float
    varied: tuple
    n_samples: int
    seed: int
    notes: tuple = field(default=())

    def probability_at(self, spacing):
        """Probability that ``spacing`` [m] (scalar or array) meets the criterion."""
        return _probability(np.sort(self.required_spacing[np.isfinite(self.required_spacing)]),
                            self.n_samples, spacing)


def _probability(sorted_finite, n, spacing):
    L = np.asarray(spacing, float)
    below = np.searchsorted(sorted_finite, L, side="left")
    p = (sorted_finite.size - below) / n
    return p[()] if p.ndim == 0 else p


def _spacing_at(sorted_finite, n, c):
    """Widest L with P[L_req >= L] >= c, from the sorted finite samples."""
    need = math.ceil(c * n - 1e-9)
    if need > sorted_finite.size or need < 1:
        return float("nan")
    return float(sorted_finite[sorted_finite.size - need])


def _required(sites, overrides):
    """Required spacing per sample: min over the criteria (all must be met)."""
    out = None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        for site in sites:
            args = dict(site)
            for key, value in overrides.items():
                if key == "k_factor":
                    for kk in _K_KEYS:
                        if args.get(kk) is not None:
                            args[kk] = np.asarray(args[kk], float) * value
                elif key == "drainable_porosity" and args.get("method") != "glover-dumm":
                    continue          # does not enter the steady criteria
                else:
                    args[key] = value
            with np.errstate(all="ignore"):
                L = np.asarray(drain_spacing(**args).spacing, float)
            out = L if out is None else np.minimum(out, L)     # NaN (no spacing) wins
    return out


def spacing_uncertainty(site, *, k_log_sd=0.0, drainable_porosity=None, barrier_depth=None,
                        n_samples=20000, seed=0, confidence=0.8, spacings=None,
                        n_spacings=50, proposed_spacing=None):
    """Probability that drain spacings meet the criterion when inputs are uncertain.

    Parameters
    ----------
    site : dict or sequence of dict
        Keyword arguments of :func:`drainplan.spacing.drain_spacing` (the
        nominal site, method and criterion). Several dicts: every criterion
        must be met (e.g. a steady and a falling water-table criterion), so a
        sample's required spacing is the narrowest of them.
    k_log_sd : float
        Standard deviation of ln K [-]: every conductivity of the site is
        multiplied by one lognormal factor of median 1 (the site's K values
        are the medians, i.e. geometric means). 0 keeps K fixed. See
        :func:`lognormal_log_sd` to convert a coefficient of variation.
    drainable_porosity : Uniform or Triangular, optional
        Range of the drainable porosity [-] (falling water table only).
    barrier_depth : Uniform or Triangular, optional
        Range of the barrier depth below the surface [m]; it must not reach
        above the drains.
    n_samples : int
        Number of joint samples (1,000 to 2,000,000).
    seed : int
        Seed of the random generator (same seed, same numbers).
    confidence : float
        Wanted probability of meeting the criterion, 0 < c < 1.
    spacings : array_like, optional
        Spacings of the probability curve [m]; default ``n_spacings`` values
        spanning the 0.5 to 99.5 % range of the sampled required spacing.
    n_spacings : int
    proposed_spacing : float, optional
        A spacing [m] whose probability of meeting the criterion is wanted.

    Returns
    -------
    SpacingUncertainty

    Raises
    ------
    drainplan.errors.InputError
        For a confidence outside (0, 1), too few samples, nothing varied,
        ranges outside their physical limits, or a nominal site the method
        refuses.

    Notes
    -----
    The inputs are sampled independently (K, drainable porosity and barrier
    depth each from its own stream of one seeded generator, so adding a
    range does not change the K samples). All samples go through the
    vectorised spacing core in one call per criterion. P(L) is the share of
    samples whose required spacing is at least L; samples without a workable
    spacing count as failing. With K alone varying the spacing at confidence
    c equals the deterministic spacing at K_c = K50 exp(-z_c σ) (method notes
    14.5), returned as ``exact_spacing_at_confidence``.

    Examples
    --------
    >>> site = dict(method="hooghoudt", drain_depth=1.2, barrier_depth=6.0,
    ...             drain_radius=0.1, k=0.5, recharge=0.007, water_table_depth=0.5)
    >>> u = spacing_uncertainty(site, k_log_sd=lognormal_log_sd(0.6), confidence=0.8)
    >>> abs(u.spacing_at_confidence / u.exact_spacing_at_confidence - 1) < 0.01
    True
    >>> round(float(u.probability_at(u.median_spacing)), 2)
    0.5
    """
    sites = [site] if isinstance(site, dict) else list(site)
    if not sites:
        raise InputError("no site to sample", param="site")
    c = float(confidence)
    if not (0.0 < c < 1.0):
        raise InputError(f"confidence must be between 0 and 1 (e.g. 0.8), got {c:g}",
                         param="confidence")
    n = int(n_samples)
    if not 1000 <= n <= 2_000_000:
        raise InputError(f"number of samples must be between 1,000 and 2,000,000, got {n}",
                         param="samples")
    sigma = float(k_log_sd)
    if not (math.isfinite(sigma) and sigma >= 0):
        raise InputError("log-standard deviation of K must be 0 or more", param="k_cv")
    if sigma == 0 and drainable_porosity is None and barrier_depth is None:
        raise InputError("nothing varies: give a spread of K (a coefficient of variation or "
                         "several field tests) or a range of drainable porosity or barrier "
                         "depth", param="k_cv")
    for dist, name in ((drainable_porosity, "drainable_porosity"),
                       (barrier_depth, "barrier_depth")):
        if dist is not None and not isinstance(dist, (Uniform, Triangular)):
            raise InputError(f"{name} range must be uniform or triangular", param=name)
    if drainable_porosity is not None and not (0 < drainable_porosity.low
                                               and drainable_porosity.high < 1):
        raise InputError("drainable porosity range must lie between 0 and 1",
                         param="drainable_porosity")
    if drainable_porosity is not None and not any(s.get("method") == "glover-dumm"
                                                  for s in sites):
        raise InputError("drainable porosity does not enter a steady criterion; give its "
                         "range only with a falling water-table criterion",
                         param="drainable_porosity")
    if barrier_depth is not None:
        for s in sites:
            zd = float(s["drain_depth"])
            if barrier_depth.low < zd or (barrier_depth.low == zd and s["method"] != "hooghoudt"):
                raise InputError(f"barrier-depth range starts at {barrier_depth.low:g} m, above "
                                 f"the drains at {zd:g} m", param="barrier_depth")
    # nominal site first: a site the method refuses is refused before sampling
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        for s in sites:
            drain_spacing(**s)

    streams = [np.random.default_rng(s) for s in np.random.SeedSequence(int(seed)).spawn(3)]
    overrides, varied = {}, []
    if sigma > 0:
        overrides["k_factor"] = Lognormal(1.0, sigma).sample(streams[0], n)
        varied.append(("K", f"lognormal about the given K (its median), log-sd {sigma:.3g} "
                            f"(cv {math.sqrt(math.expm1(sigma * sigma)):.2f})"))
    if drainable_porosity is not None:
        overrides["drainable_porosity"] = drainable_porosity.sample(streams[1], n)
        varied.append(("drainable porosity", drainable_porosity.describe()))
    if barrier_depth is not None:
        overrides["barrier_depth"] = barrier_depth.sample(streams[2], n)
        varied.append(("barrier depth", barrier_depth.describe() + " m"))

    L_req = _required(sites, overrides)
    finite = np.sort(L_req[np.isfinite(L_req)])
    if finite.size == 0:
        raise InputError("no sample has a workable spacing; check K, the criterion and the "
                         "depths", param="k")
    if spacings is None:
        lo, hi = np.quantile(finite, [0.005, 0.995])
        if hi <= lo:
            hi = lo * 1.01 + 1e-6
        spacings = np.linspace(lo, hi, int(n_spacings))
    grid = np.asarray(spacings, float)
    if grid.ndim != 1 or grid.size == 0 or np.any(~np.isfinite(grid)) or np.any(grid <= 0):
        raise InputError("spacings of the probability curve must be positive numbers",
                         param="spacings")
    grid = np.sort(grid)
    prob = _probability(finite, n, grid)
    L_c = _spacing_at(finite, n, c)
    L_50 = _spacing_at(finite, n, 0.5)
    exact = None
    if drainable_porosity is None and barrier_depth is None:
        factor = k_at_confidence(1.0, sigma, c)
        exact = float(_required(sites, {"k_factor": np.array([factor])})[0])
    p_prop = None
    if proposed_spacing is not None:
        Lp = float(proposed_spacing)
        if not (math.isfinite(Lp) and Lp > 0):
            raise InputError("proposed spacing must be greater than 0 m", param="check_spacing")
        p_prop = float(_probability(finite, n, Lp))
    nofit = 1.0 - finite.size / n
    notes = []
    if nofit > 0:
        notes.append(f"{nofit:.1%} of the samples have no workable spacing (counted as "
                     "failing)")
    if not math.isfinite(L_c):
        notes.append(f"no spacing meets the criterion with {c:.0%} confidence")
    return SpacingUncertainty(L_req, grid, np.asarray(prob, float), c, L_c, L_50, exact,
                              None if proposed_spacing is None else float(proposed_spacing),
                              p_prop, nofit, tuple(varied), n, int(seed), tuple(notes))
