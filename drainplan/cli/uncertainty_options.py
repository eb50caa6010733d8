"""The uncertainty options of ``drainplan spacing`` (--k-cv, --confidence, ranges).

Kept in one place so the spacing command takes them with one decorator and one
keyword (``uncertainty``), and prints their results with two calls.
"""

from __future__ import annotations

import functools

import click
import numpy as np

from ..errors import InputError
from ..units import display_unit, parse_quantity, show, to_display

__all__ = ["uncertainty_options", "run_uncertainty", "uncertainty_json", "uncertainty_text"]

_OPTIONS = [
    click.option("--k-cv", type=float,
                 help="Coefficient of variation of K (e.g. 0.6): K is lognormal with the given "
                      "K as its median (geometric mean). Adds the spacing met with "
                      "--confidence and the probability curve."),
    click.option("--confidence", type=float,
                 help="Wanted probability that the spacing meets the criterion, e.g. 0.8 "
                      "(default 0.8 when something varies)."),
    click.option("--drainable-porosity-range",
                 help="Drainable porosity LOW:HIGH (uniform) or LOW:MODE:HIGH (triangular), "
                      "glover-dumm."),
    click.option("--barrier-depth-range",
                 help="Barrier depth LOW:HIGH or LOW:MODE:HIGH, e.g. '3 m:5 m'."),
    click.option("--samples", type=int, default=20000, show_default=True,
                 help="Number of samples for the uncertainty."),
    click.option("--seed", type=int, default=0, show_default=True,
                 help="Seed of the sampling (same seed, same numbers)."),
]
_NAMES = ("k_cv", "confidence", "drainable_porosity_range", "barrier_depth_range", "samples",
          "seed")


def uncertainty_options(f):
    """Add the uncertainty options; the command receives them as ``uncertainty`` (dict)."""

    @functools.wraps(f)
    def wrapper(*args, **kwargs):
        opts = {name: kwargs.pop(name) for name in _NAMES}
        return f(*args, uncertainty=opts, **kwargs)

    for option in reversed(_OPTIONS):
        wrapper = option(wrapper)
    return wrapper


def _range(text, kind, option):
    from ..uncertainty import Triangular, Uniform

    parts = [p for p in str(text).split(":")]
    if len(parts) not in (2, 3):
        raise InputError(f"expected LOW:HIGH or LOW:MODE:HIGH, got {text!r}", param=option)
    values = [parse_quantity(p, kind, name="--" + option.replace("_", "-")) for p in parts]
    try:
        return Uniform(*values) if len(values) == 2 else Triangular(*values)
    except InputError as exc:
        raise InputError(str(exc), param=option) from None


def run_uncertainty(inputs, opts, check_spacing=None):
    """Run the sampling for the spacing command; None when no uncertainty was asked for."""
    from ..uncertainty import lognormal_log_sd, spacing_uncertainty

    k_cv, conf = opts["k_cv"], opts["confidence"]
    por = opts["drainable_porosity_range"]
    bar = opts["barrier_depth_range"]
    if k_cv is None and por is None and bar is None:
        if conf is not None:
            raise InputError("--confidence needs a spread: --k-cv, --drainable-porosity-range "
                             "or --barrier-depth-range", param="confidence")
        return None
    sigma = lognormal_log_sd(k_cv) if k_cv is not None else 0.0
    site = {k: v for k, v in inputs.items()}
    return spacing_uncertainty(
        site, k_log_sd=sigma,
        drainable_porosity=_range(por, "fraction", "drainable_porosity_range") if por else None,
        barrier_depth=_range(bar, "length", "barrier_depth_range") if bar else None,
        n_samples=opts["samples"], seed=opts["seed"],
        confidence=0.8 if conf is None else conf, proposed_spacing=check_spacing)


def _num(v):
    return None if v is None or not np.isfinite(v) else float(v)


def uncertainty_json(u, k_cv):
    """Keys added to the spacing command's JSON."""
    return {
        "spacing_at_confidence_m": _num(u.spacing_at_confidence),
        "confidence": u.confidence,
        "probability_curve": [{"spacing_m": float(L), "probability": float(p)}
                              for L, p in zip(u.spacings, u.probability)],
        "uncertainty": {
            "n_samples": u.n_samples, "seed": u.seed, "k_cv": k_cv,
            "varied": [{"input": a, "distribution": b} for a, b in u.varied],
            "median_spacing_m": _num(u.median_spacing),
            "exact_spacing_at_confidence_m": _num(u.exact_spacing_at_confidence),
            "no_solution_fraction": u.no_solution_fraction,
            "probability_proposed_spacing_meets": u.probability_proposed,
            "notes": list(u.notes),
        },
    }


def uncertainty_text(u, units):
    """Lines added to the spacing command's table."""
    sp = lambda v: show(v, "spacing", units, 1)       # noqa: E731
    lines = ["Uncertainty"]
    for name, dist in u.varied:
        lines.append(f"  {'varied: ' + name:<34} {dist}")
    lines.append(f"  {'samples':<34} {u.n_samples:,} (seed {u.seed})")
    lines.append(f"  {'spacing met with 50 % probability':<34} {sp(u.median_spacing)}")
    lines.append(f"  {f'spacing met with {u.confidence * 100:.0f} % confidence':<34} "
                 f"{sp(u.spacing_at_confidence)}")
    if u.exact_spacing_at_confidence is not None:
        lines.append(f"  {'  same from the K percentile':<34} "
                     f"{sp(u.exact_spacing_at_confidence)} (K alone varies: exact)")
    if u.probability_proposed is not None:
        lines.append(f"  {'probability the proposed spacing':<34} "
                     f"{u.probability_proposed * 100:.0f} % ({sp(u.proposed_spacing)} meets the "
                     "criterion)")
    su = display_unit("spacing", units)
    lines.append(f"  {'spacing (' + su + ')':>14} {'probability':>12}")
    idx = np.unique(np.linspace(0, u.spacings.size - 1, min(9, u.spacings.size)).round()
                    .astype(int))
    for i in idx:
        lines.append(f"  {float(to_display(u.spacings[i], 'spacing', units)):>14.1f} "
                     f"{u.probability[i]:>12.2f}")
    lines += [f"  - {n}" for n in u.notes]
    return lines
