"""Benchmark: one vectorised call solving 1,000,000 Hooghoudt spacing cases.

Compares with a scalar per-case loop using scipy.optimize.brentq on the same
equation (timed on a subsample and scaled). Run on demand:

    python benchmarks/bench_spacing.py [--cases N] [--write]

--write replaces the spacing section of benchmarks/README.md with the figures.
"""

from __future__ import annotations

import argparse
import os
import platform
import time
from pathlib import Path

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np  # noqa: E402
from scipy.optimize import brentq  # noqa: E402

from drainplan.spacing import hooghoudt_spacing  # noqa: E402
from drainplan.spacing.equivalent_depth import _equivalent_depth_unchecked  # noqa: E402

R0 = 0.05


def practical_cases(n, seed=2026):
    """Random inputs over the practical range (K 0.01-20 m/d, q 0.5-50 mm/d, D 0.2-30 m,
    h 0.1-1.5 m), kept where the spacing lies in 2-300 m."""
    rng = np.random.default_rng(seed)
    out = []
    total = 0
    while total < n:
        m = 2 * n
        q = 10 ** rng.uniform(np.log10(0.0005), np.log10(0.05), m)
        k1 = 10 ** rng.uniform(-2, np.log10(20), m)
        k2 = k1 * 10 ** rng.uniform(-0.5, 0.5, m)
        h = rng.uniform(0.1, 1.5, m)
        D = rng.uniform(0.2, 30, m)
        # keep cases whose d = D and d = 0 bounds straddle the practical spacing range
        lo = np.sqrt(4 * k1 * h * h / q)
        hi = np.sqrt((8 * k2 * D * h + 4 * k1 * h * h) / q)
        keep = (hi > 2.0) & (lo < 300.0)
        out.append(np.c_[q, k1, k2, h, D][keep])
        total += keep.sum()
    return np.concatenate(out)[:n].T


def scalar_spacing(q, k1, k2, h, D):
    def f(L):
        return q * L * L - 8 * k2 * float(_equivalent_depth_unchecked(L, D, R0)) * h - 4 * k1 * h * h
    lo = max(np.sqrt(4 * k1 * h * h / q), np.pi * R0 * (1 + 1e-6))
    hi = np.sqrt((8 * k2 * D * h + 4 * k1 * h * h) / q) * (1 + 1e-9)
    return brentq(f, lo, hi, xtol=1e-6)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--cases", type=int, default=1_000_000)
    ap.add_argument("--scalar-cases", type=int, default=3000)
    ap.add_argument("--write", action="store_true")
    args = ap.parse_args()

    q, k1, k2, h, D = practical_cases(args.cases)
    hooghoudt_spacing(recharge=q[:1000], head=h[:1000], k_above=k1[:1000], k_below=k2[:1000],
                      depth_to_barrier=D[:1000], drain_radius=R0)   # warm-up
    best = np.inf
    for _ in range(3):
        t0 = time.perf_counter()
        L = hooghoudt_spacing(recharge=q, head=h, k_above=k1, k_below=k2,
                              depth_to_barrier=D, drain_radius=R0)
        best = min(best, time.perf_counter() - t0)
    vec_rate = args.cases / best

    ns = args.scalar_cases
    t0 = time.perf_counter()
    Ls = [scalar_spacing(q[i], k1[i], k2[i], h[i], D[i]) for i in range(ns)]
    t_scalar = time.perf_counter() - t0
    scalar_rate = ns / t_scalar
    agree = float(np.max(np.abs(np.array(Ls) - L[:ns])))

    lines = [
        "## Hooghoudt spacing, vectorised",
        "",
        f"Measured {time.strftime('%Y-%m-%d')} on {platform.machine()}, "
        f"{os.cpu_count()} cores, Python {platform.python_version()}, numpy {np.__version__} "
        "(one thread; `python benchmarks/bench_spacing.py --write`).",
        "",
        "| what | figure |",
        "| --- | --- |",
        f"| cases in one call | {args.cases:,} |",
        f"| vectorised call, best of 3 | {best:.3f} s |",
        f"| vectorised rate | {vec_rate:,.0f} cases/s |",
        f"| scalar loop with scipy brentq ({ns:,} cases) | {t_scalar:.2f} s |",
        f"| scalar rate | {scalar_rate:,.0f} cases/s |",
        f"| speed-up | {vec_rate / scalar_rate:,.0f}x |",
        f"| largest difference, vectorised vs scalar | {agree:.1e} m |",
        f"| cases without a solution (NaN) | {int(np.isnan(L).sum())} |",
        "",
        "Target: at least 1,000,000 cases/s and at least 100x the scalar loop.",
    ]
    text = "\n".join(lines)
    print(text)
    if args.write:
        _write_section(text, "## Hooghoudt spacing, vectorised")


def _write_section(text, heading):
    path = Path(__file__).with_name("README.md")
    old = path.read_text() if path.exists() else "# Benchmarks\n"
    parts = old.split("\n## ")
    head, sections = parts[0], ["## " + p for p in parts[1:]]
    sections = [s for s in sections if not s.startswith(heading)]
    sections.append(text)
    path.write_text(head.rstrip() + "\n\n" + "\n\n".join(s.rstrip() for s in sections) + "\n")


if __name__ == "__main__":
    main()
