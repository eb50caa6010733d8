"""Benchmark: spacing under uncertainty, 100,000 samples x 50 spacings (Hooghoudt), one call.

Times :func:`drainplan.uncertainty.spacing_uncertainty` (lognormal K, cv 0.6, every sample
through the vectorised spacing core in one call, then the probability curve at 50
spacings) against a loop over the same samples calling ``drain_spacing`` one sample at a
time (timed on a subsample and scaled). Run on demand:

    python benchmarks/bench_uncertainty.py [--samples N] [--write]

--write replaces the uncertainty section of benchmarks/README.md with the figures.
"""

from __future__ import annotations

import argparse
import os
import platform
import time
import warnings

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np  # noqa: E402

from drainplan.spacing import drain_spacing  # noqa: E402
from drainplan.uncertainty import lognormal_log_sd, spacing_uncertainty  # noqa: E402

SITE = dict(method="hooghoudt", drain_depth=1.2, barrier_depth=6.0, drain_radius=0.1,
            k=0.5, recharge=0.007, water_table_depth=0.5)
HEADING = "## Spacing under uncertainty, sampled"


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--samples", type=int, default=100_000)
    ap.add_argument("--spacings", type=int, default=50)
    ap.add_argument("--loop-samples", type=int, default=2000)
    ap.add_argument("--write", action="store_true")
    args = ap.parse_args()

    sigma = lognormal_log_sd(0.6)
    spacing_uncertainty(SITE, k_log_sd=sigma, n_samples=1000)            # warm-up
    best = np.inf
    for _ in range(3):
        t0 = time.perf_counter()
        u = spacing_uncertainty(SITE, k_log_sd=sigma, n_samples=args.samples,
                                n_spacings=args.spacings)
        best = min(best, time.perf_counter() - t0)

    # the same samples, one drain_spacing call each, probability counted afterwards
    rng = np.random.default_rng(np.random.SeedSequence(0).spawn(3)[0])
    kf = np.exp(sigma * rng.standard_normal(args.samples))
    ns = args.loop_samples
    t0 = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        looped = np.array([float(drain_spacing(**dict(SITE, k=SITE["k"] * kf[i])).spacing)
                           for i in range(ns)])
        _ = (looped[:, None] >= u.spacings[None, :]).mean(axis=0)
    t_loop = (time.perf_counter() - t0) * args.samples / ns
    agree = float(np.max(np.abs(looped - u.required_spacing[:ns])))

    lines = [
        HEADING,
        "",
        f"Measured {time.strftime('%Y-%m-%d')} on {platform.machine()}, "
        f"{os.cpu_count()} cores, Python {platform.python_version()}, numpy {np.__version__} "
        "(one thread; `python benchmarks/bench_uncertainty.py --write`).",
        "",
        "| what | figure |",
        "| --- | --- |",
        f"| samples x spacings (Hooghoudt, lognormal K, cv 0.6) | {args.samples:,} x "
        f"{args.spacings} |",
        f"| `spacing_uncertainty`, one call, best of 3 | {best:.3f} s |",
        f"| loop over samples calling `drain_spacing` (timed on {ns:,}, scaled) | "
        f"{t_loop:.1f} s |",
        f"| speed-up | {t_loop / best:,.0f}x |",
        f"| largest difference, one call vs loop | {agree:.1e} m |",
        f"| spacing at 80 % confidence, sampled / exact | {u.spacing_at_confidence:.2f} m / "
        f"{u.exact_spacing_at_confidence:.2f} m |",
        "",
        "Target: 100,000 samples x 50 spacings in well under a second.",
    ]
    text = "\n".join(lines)
    print(text)
    if args.write:
        from _readme import write_section

        write_section(text, HEADING)


if __name__ == "__main__":
    main()
