"""Benchmark: 30 years of daily weather x 20 spacings in one call (season simulation).

Times the Boussinesq simulation of the invented demo weather record for 20 spacings
at once, the same 20 spacings one at a time (a Python loop over spacings, each its
own time loop), and the de Zeeuw-Hellinga reservoir. CPU time of this process
(one thread), best of 3. Run on demand:

    python benchmarks/bench_simulation.py [--write]

--write replaces the simulation section of benchmarks/README.md with the figures.
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

from drainplan.spacing.reservoir import de_zeeuw_hellinga_simulation  # noqa: E402
from drainplan.spacing.simulation import boussinesq_simulation, sew30  # noqa: E402
from drainplan.weather import read_weather  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
HEADING = "## Season simulation, 30 years x 20 spacings"
SITE = dict(k_below=0.5, k_above=0.8, depth_to_barrier=2.1, drain_radius=0.05,
            drain_depth=1.1, drainable_porosity=0.06)


def best_of(fn, n=3):
    best, out = np.inf, None
    for _ in range(n):
        t0 = time.process_time()
        out = fn()
        best = min(best, time.process_time() - t0)
    return best, out


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--write", action="store_true")
    args = ap.parse_args()
    w = read_weather(ROOT / "demo_fields" / "weather.csv")
    L = np.linspace(8.0, 60.0, 20)
    kw = dict(rain=w.rain, pet=w.pet, **SITE)
    boussinesq_simulation(spacing=L, rain=w.rain[:30], pet=w.pet[:30],
                          **{k: v for k, v in SITE.items()})            # warm-up
    t_vec, r = best_of(lambda: boussinesq_simulation(spacing=L, **kw))
    t_loop, singles = best_of(lambda: [boussinesq_simulation(spacing=[x], **kw) for x in L],
                              n=1)
    t_res, rr = best_of(lambda: de_zeeuw_hellinga_simulation(spacing=L, **kw))
    s_vec = sew30(r.water_table_depth)
    s_loop = np.array([sew30(s.water_table_depth)[0] for s in singles])
    agree = float(np.max(np.abs(s_vec - s_loop)))
    rain = float(w.rain.sum())
    bal = float(np.abs(r.balance_error()).max() / rain)
    lines = [
        HEADING,
        "",
        f"Measured {time.strftime('%Y-%m-%d')} on {platform.machine()}, {os.cpu_count()} cores "
        f"(shared), Python {platform.python_version()}, numpy {np.__version__} (one thread, "
        "CPU time of the process; `python benchmarks/bench_simulation.py --write`).",
        "",
        "| what | figure |",
        "| --- | --- |",
        f"| weather | demo record (invented), {w.dates.size:,} days |",
        f"| spacings | {L.size} ({L[0]:g} to {L[-1]:g} m), 24 cells each, daily steps |",
        f"| Boussinesq, all spacings in one call, best of 3 | {t_vec:.2f} s |",
        f"| Boussinesq, one spacing at a time (Python loop over spacings) | {t_loop:.2f} s |",
        f"| ratio | {t_loop / t_vec:.1f}x |",
        f"| largest SEW30 difference, one call vs one at a time | {agree:.1e} cm·d |",
        f"| de Zeeuw-Hellinga reservoir, all spacings, best of 3 | {t_res:.3f} s |",
        f"| largest water-balance error / rain | {bal:.1e} |",
        "",
        "Target: at most 1 s of compute for the 20 spacings in one call.",
    ]
    text = "\n".join(lines)
    print(text)
    if args.write:
        from _readme import write_section

        write_section(text, HEADING)

if __name__ == "__main__":
    main()
