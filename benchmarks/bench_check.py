"""Benchmark: measure a drawn proposal of N laterals (local spacing, strips) and check
the demo proposal end to end.

The laterals are invented: N parallel laterals 400 m long, 15 m apart, with a
seeded wobble of 0.3 m at every vertex (as a GPS survey would show). The
measured local spacing is compared with the drawn 15 m. Run on demand:

    python benchmarks/bench_check.py [--laterals N] [--write]
"""

from __future__ import annotations

import argparse
import os
import platform
import time
from pathlib import Path

import numpy as np
import shapely

from drainplan.geometry.proposal import join_network, measure_laterals

ROOT = Path(__file__).resolve().parents[1]


def proposal(n, seed=5):
    rng = np.random.default_rng(seed)
    y = np.linspace(5.0, 400.0, 41)
    lats = [shapely.LineString(np.c_[np.full(y.size, i * 15.0) + rng.normal(0, 0.3, y.size), y])
            for i in range(n)]
    field = shapely.box(-10.0, 0.0, n * 15.0 + 10.0, 410.0)
    main = shapely.LineString([(n * 15.0, 2.0), (-5.0, 2.0)])
    return np.array(lats, dtype=object), np.array([field]), np.array([main])


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--laterals", type=int, default=2000)
    ap.add_argument("--write", action="store_true")
    args = ap.parse_args()
    lats, fields, mains = proposal(args.laterals)
    t0 = time.perf_counter()
    g = measure_laterals(lats, fields)
    t_measure = time.perf_counter() - t0
    t0 = time.perf_counter()
    join_network(lats, mains)
    t_join = time.perf_counter() - t0
    inner = g.local_spacing[1:-1]

    from drainplan.check import check_proposal, read_proposal
    from drainplan.project import load_project

    t0 = time.perf_counter()
    res = check_proposal(load_project(ROOT / "demo_fields" / "project.toml"),
                         read_proposal(ROOT / "demo_fields" / "proposal.toml"))
    t_demo = time.perf_counter() - t0

    lines = [
        "## Proposal check",
        "",
        f"Measured {time.strftime('%Y-%m-%d')} on {platform.machine()}, {os.cpu_count()} cores, "
        f"Python {platform.python_version()}, shapely {shapely.__version__} "
        "(`python benchmarks/bench_check.py --write`).",
        "",
        "| what | figure |",
        "| --- | --- |",
        f"| drawn laterals (400 m, 15 m apart, 0.3 m wobble) | {args.laterals:,} "
        f"({args.laterals * 0.4:,.0f} km) |",
        f"| local spacing on both sides and strips | {t_measure:.2f} s |",
        f"| laterals joined to the main | {t_join:.2f} s |",
        f"| measured local spacing, interior laterals | median {np.median(inner):.2f} m, "
        f"{inner.min():.2f}-{inner.max():.2f} m |",
        f"| demo proposal checked end to end ({res.summary['lateral_count']} laterals) | "
        f"{t_demo:.2f} s |",
        "",
        "Target: 2,000 drawn laterals measured in at most 5 s.",
    ]
    text = "\n".join(lines)
    print(text)
    if args.write:
        import sys

        sys.path.insert(0, str(Path(__file__).parent))
        from _readme import write_section as _write_section

        _write_section(text, text.splitlines()[0], drop=("## Proposal check",))


if __name__ == "__main__":
    main()
