"""Benchmark: the spacing solvers against their yardsticks, and command-line start-up.

Every figure is a ratio measured in the same process against a yardstick:

* the floor -- one vectorised evaluation of the method's equation at the answer
  (with the series equivalent depth), in blocks of the size that is fastest for it;
* the strongest simple baseline -- a plain scalar loop with scipy's ``brentq`` on the
  same equation written with the ``math`` module (for Kirkham: the published series
  summed by numpy for each call, as a scalar implementation would);

at several sizes, with CPU time of this thread (``time.thread_time``, best of
several runs, solver and floor in turn) so that other processes on the machine
disturb the figures less, and the machine's load average (``os.getloadavg``)
recorded beside each figure. The process runs as the command line runs it: one
BLAS thread and the C library's allocator keeping freed memory
(``drainplan.cli.tune_allocator``); a second process measures Hooghoudt with the
default allocator for comparison. Start-up figures are wall times of fresh
processes. Run on demand:

    python benchmarks/bench_spacing.py [--quick] [--write]

--write replaces the "Spacing solvers" and "Command-line start-up" sections of
benchmarks/README.md.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import platform
import resource
import subprocess
import sys
import time
from pathlib import Path

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np  # noqa: E402
from scipy.optimize import brentq  # noqa: E402

from drainplan.spacing import (glover_dumm_spacing, hooghoudt_spacing,  # noqa: E402
                               kirkham_spacing)
from drainplan.spacing.equivalent_depth import _equivalent_depth_unchecked  # noqa: E402
from drainplan.spacing.kirkham import _kirkham_f  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]


def load():
    return os.getloadavg()[0]


def cpu_best(fn, repeat):
    best = math.inf
    for _ in range(repeat):
        t0 = time.thread_time()
        fn()
        best = min(best, time.thread_time() - t0)
    return best


def practical_cases(n, seed=2026):
    """Seeded cases over the practical range: K 0.05-5 m/d (log-uniform, K above drain
    level within 3x of K below), q 1-10 mm/d (log-uniform), h 0.2-1 m, D 0.5-20 m,
    r 0.05-0.15 m, drainable porosity 0.02-0.15, 0.5-5 d, final/initial head 0.2-0.8."""
    rng = np.random.default_rng(seed)
    k = 10 ** rng.uniform(math.log10(0.05), math.log10(5.0), n)
    return dict(k=k, k1=k * 10 ** rng.uniform(-0.5, 0.5, n), q=10 ** rng.uniform(-3, -2, n),
                h=rng.uniform(0.2, 1.0, n), D=rng.uniform(0.5, 20.0, n),
                r=rng.uniform(0.05, 0.15, n), mu=rng.uniform(0.02, 0.15, n),
                t=rng.uniform(0.5, 5.0, n), ratio=rng.uniform(0.2, 0.8, n))


# --- scalar baselines (math module) -------------------------------------------------------

def _f_math(x):
    """van der Molen & Wesseling F(x), the same fast series as drainplan, with math."""
    if x <= math.pi / math.sqrt(2.0):
        p = math.exp(-math.pi ** 2 / x)
        a = b = 1.0
        pn = 1.0
        for n in range(1, 9):
            pn *= p
            a *= 1.0 - pn
            if n <= 4:
                b *= 1.0 - pn * pn
        return math.pi ** 2 / (4 * x) + math.log(x / (2 * math.pi)) + 2 * math.log(a / (b * b))
    z = math.exp(-2.0 * x)
    a = b = 1.0
    zn = 1.0
    for n in range(1, 9):
        zn *= z
        a *= 1.0 - zn
        if n <= 4:
            b *= 1.0 - zn * zn
    return 2.0 * math.log(b / (a * a))


def _d_math(L, D, r0):
    w = math.log(L / (math.pi * r0)) + _f_math(2 * math.pi * D / L)
    d = math.pi * L / (8 * w)
    return min(d, D) if d >= 0 else D


def scalar_hooghoudt(c, i):
    q, h, k1, k2, D, r0 = (float(c[v][i]) for v in ("q", "h", "k1", "k", "D", "r"))
    ca, cb = 4 * k1 * h * h, 8 * k2 * h
    lo = max(math.sqrt(ca / q), math.pi * r0 * (1 + 1e-6))
    hi = math.sqrt((cb * D + ca) / q) * (1 + 1e-9)
    return brentq(lambda L: q * L * L - cb * _d_math(L, D, r0) - ca, lo, hi, xtol=1e-6)


def scalar_glover(c, i):
    y0, ratio, t, K, mu, D, r0 = (float(c[v][i]) for v in ("h", "ratio", "t", "k", "mu", "D",
                                                            "r"))
    fac = K * t / (mu * math.log(1.16 / ratio))
    hi = math.pi * math.sqrt(fac * D) * (1 + 1e-9)
    return brentq(lambda L: L * L - math.pi ** 2 * fac * _d_math(L, D, r0),
                  math.pi * r0 * (1 + 1e-6), hi, xtol=1e-6)


def _kirkham_f_numpy(L, D, r):
    """Kirkham's series for one case, summed by numpy until exp(-2 m x) < 1e-17."""
    x = 2 * math.pi * D / L
    m = np.arange(1.0, max(8.0, math.ceil(20.0 / x)) + 1)
    e = np.exp(-2 * m * x)
    s = np.sum((np.cos(2 * np.pi * m * r / L) - np.cos(m * np.pi)) * 2 * e / (1 - e) / m)
    return (math.log(L / (math.pi * r)) + float(s)) / math.pi


def scalar_kirkham(c, i):
    h, q, K, D, r = (float(c[v][i]) for v in ("h", "q", "k", "D", "r"))
    hi = 1.05 * math.sqrt(8 * K * D * h / q) + 8 * math.pi * r
    return brentq(lambda L: q * L * _kirkham_f_numpy(L, D, r) / K - h, 2 * math.pi * r, hi,
                  xtol=1e-6)


# --- the methods: solve, floor, scalar ------------------------------------------------------

def methods():
    def hoog(c):
        return hooghoudt_spacing(recharge=c["q"], head=c["h"], k_above=c["k1"], k_below=c["k"],
                                 depth_to_barrier=c["D"], drain_radius=c["r"])

    def hoog_floor(c, L, sl):
        d = _equivalent_depth_unchecked(L[sl], c["D"][sl], c["r"][sl])
        return c["q"][sl] * L[sl] ** 2 - 8 * c["k"][sl] * d * c["h"][sl] \
            - 4 * c["k1"][sl] * c["h"][sl] ** 2

    def glover(c):
        return glover_dumm_spacing(initial_head=c["h"], final_head=c["h"] * c["ratio"],
                                   time=c["t"], k=c["k"], drainable_porosity=c["mu"],
                                   depth_to_barrier=c["D"], drain_radius=c["r"])

    def glover_floor(c, L, sl):
        fac = c["k"][sl] * c["t"][sl] / (c["mu"][sl] * np.log(1.16 / c["ratio"][sl]))
        d = _equivalent_depth_unchecked(L[sl], c["D"][sl], c["r"][sl])
        return L[sl] ** 2 - np.pi ** 2 * fac * d

    def kirk(c):
        return kirkham_spacing(head=c["h"], recharge=c["q"], k=c["k"], depth_to_barrier=c["D"],
                               drain_radius=c["r"])

    def kirk_floor(c, L, sl):
        return c["q"][sl] * L[sl] * _kirkham_f(L[sl], c["D"][sl], c["r"][sl]) / c["k"][sl] \
            - c["h"][sl]

    return [("Hooghoudt (two layers, series d)", hoog, hoog_floor, scalar_hooghoudt, 4.0),
            ("Glover-Dumm (parabolic, d)", glover, glover_floor, scalar_glover, 6.0),
            ("Kirkham (steady rain)", kirk, kirk_floor, scalar_kirkham, None)]


FLOOR_BLOCKS = (4096, 8192, 16384, 32768)


def rounds(repeat, n):
    """Rounds of timing for n cases: ``repeat`` at 100,000 cases and more, more for
    fewer cases (a short run is disturbed more, in proportion, by other work)."""
    return max(repeat, min(10 * repeat, repeat * 100_000 // n))


def solve_and_floor(solve, floor, c, L, n, repeat):
    """Best CPU times of the solver and of one evaluation at the answer (the floor: best
    over block sizes), measured in turn so that both meet the same conditions, and the
    solver timed as often as the floor (once per block size of a round) so that neither
    gets more chances at a quiet moment."""
    def run_floor(block):
        for s in range(0, n, block):
            floor(c, L, slice(s, s + block))
    t_floor = math.inf
    times, faults = [], 0
    for _ in range(rounds(repeat, n)):
        for block in FLOOR_BLOCKS:
            f0 = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
            times.append(cpu_best(lambda: solve(c), 1))
            faults += resource.getrusage(resource.RUSAGE_SELF).ru_minflt - f0
            t_floor = min(t_floor, cpu_best(lambda: run_floor(block), 1))
    return min(times), t_floor, float(np.median(times)), faults / len(times)


def bench_methods(sizes, scalar_cases, repeat, only=None):
    rows = []
    for name, solve, floor, scalar, target in methods()[:only]:
        c_small = practical_cases(scalar_cases, seed=7)
        solve(c_small)                                   # warm-up
        t0 = time.thread_time()
        Ls = [scalar(c_small, i) for i in range(scalar_cases)]
        t_scalar = (time.thread_time() - t0) / scalar_cases
        agree = float(np.max(np.abs(np.array(Ls) - solve(c_small))))
        for n in sizes:
            c = practical_cases(n)
            L = solve(c)
            t_solve, t_floor, median, faults = solve_and_floor(solve, floor, c, L, n, repeat)
            rows.append(dict(name=name, n=n, solve=t_solve, floor=t_floor, median=median,
                             faults=faults,
                             scalar=t_scalar * n, agree=agree, nan=int(np.isnan(L).sum()),
                             target=target, load=load()))
            print(f"{name:34s} {n:>9,} {n / t_solve:>12,.0f}/s  {t_solve / t_floor:5.2f}x floor"
                  f"  {t_scalar * n / t_solve:7.0f}x scalar  load {rows[-1]['load']:.1f}",
                  flush=True)
    return rows


def best_rows(runs):
    """Rows of several runs: for each method and size, the run whose solver time was least
    (the least disturbed by other work), with that run's floor, ratio and load."""
    out = []
    for i, row in enumerate(runs[0]):
        out.append(min((run[i] for run in runs), key=lambda r: r["solve"]))
        out[-1]["runs"] = len(runs)
    return out


# --- start-up -------------------------------------------------------------------------------

def wall_best(cmd, repeat=7):
    best = math.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        subprocess.run(cmd, capture_output=True, check=True, cwd=ROOT)
        best = min(best, time.perf_counter() - t0)
    return best


def bench_startup(repeat):
    exe = str(Path(sys.executable).with_name("drainplan"))
    py = sys.executable
    spacing = [exe, "spacing", "--k", "0.6", "--drain-depth", "1", "--barrier-depth", "3",
               "--drain-radius", "0.05", "--water-table-depth", "0.5", "--recharge"]
    rows = [
        ("bare interpreter (`python -c pass`)", wall_best([py, "-c", "pass"], repeat)),
        ("`import drainplan`", wall_best([py, "-c", "import drainplan"], repeat)),
        ("`drainplan --help`", wall_best([exe, "--help"], repeat)),
        ("`drainplan spacing ... --recharge 0.007`", wall_best(spacing + ["0.007"], repeat)),
        ("`drainplan spacing ... --recharge '7 mm/d'`", wall_best(spacing + ["7 mm/d"], repeat)),
        ("`drainplan spacing ... --recharge '7 mm/day'` (also from the table)",
         wall_best(spacing + ["7 mm/day"], repeat)),
        ("a unit outside the table (`'0.5 mm/fortnight'`, loads pint)",
         wall_best(spacing + ["0.5 mm/fortnight"], repeat)),
    ]
    code = ("import time, sys; from drainplan.units import parse_quantity as p; p('1 m', 'length');"
            "t=time.perf_counter(); [p('7 mm/d', 'rate') for _ in range(10000)];"
            "print((time.perf_counter()-t)/10000, 'pint' in sys.modules)")
    out = subprocess.run([py, "-c", code], capture_output=True, text=True, check=True).stdout
    per_call, pint_loaded = out.split()
    out = subprocess.run([py, "-c", "import sys, drainplan.cli; from drainplan.cli import main\n"
                          "try:\n    main(['--help'])\nexcept SystemExit:\n    pass\n"
                          "print(' '.join(m for m in ('numpy', 'pint', 'click') if m in sys.modules))"],
                         capture_output=True, text=True, check=True).stdout.split("\n")[-2]
    return rows, float(per_call), pint_loaded == "True", out, load()


# --- report ---------------------------------------------------------------------------------

def report(rows, startup, args):
    head = (f"Measured {time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())} on "
            f"{platform.machine()}, {os.cpu_count()} cores (shared), Python "
            f"{platform.python_version()}, numpy {np.__version__}, one BLAS thread "
            f"(`python benchmarks/bench_spacing.py{' --quick' if args.quick else ''}"
            f"{f' --runs {args.runs}' if args.runs > 1 else ''} --write`).")
    lines = ["## Spacing solvers", "", head, "",
             "CPU time of the solving thread, best of "
             + ", ".join(f"{len(FLOOR_BLOCKS) * rounds(args.repeat, n)} runs at {n:,} cases"
                         for n in args.sizes)
             + " (solver and floor in turn, as many runs each); *floor*: one vectorised "
             "evaluation of the equation at the "
             "answer (series equivalent depth; best block size); *scalar*: a plain loop of "
             "scipy `brentq` on the same equation written with the `math` module "
             f"(Kirkham: its series summed by numpy per call), timed on {args.scalar_cases:,} "
             "cases and scaled. Inputs: seeded, practical range (K 0.05-5 m/d, q 1-10 mm/d, "
             "h 0.2-1 m, D 0.5-20 m, r 0.05-0.15 m). *load*: 1-minute load average when the "
             "row was measured (the machine is shared; 2.0 means both cores busy). "
             "*median*: the median of the solver's runs; *fresh pages per call*: minor page "
             "faults per solver call (memory the C library returned to the kernel and took "
             "back). "
             "The allocator keeps freed memory as the command line sets it"
             + ("" if getattr(args, "tuned", False) else " (not available here)")
             + ", except in the last rows (the C library's default, as a program that "
             "calls drainplan without `drainplan.cli.tune_allocator` has it)."
             + (f" The methods were measured in {args.runs} whole runs; each row is from the "
                "run whose solver time was least (the least disturbed by other work), with "
                "that run's floor and load (the default allocator: one fresh process a "
                "run)." if args.runs > 1 else ""),
             "",
             "| method | cases | drainplan | cases/s | vs floor | target | vs scalar loop "
             "| largest difference from scalar | NaN | median | fresh pages per call | load |",
             "| --- | ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: "
             "| ---: |"]
    for r in rows:
        tgt = f"<= {r['target']:.0f}x" if r["target"] else ">= 100x scalar"
        lines.append(
            f"| {r['name']} | {r['n']:,} | {r['solve'] * 1e3:.1f} ms | {r['n'] / r['solve']:,.0f}"
            f" | {r['solve'] / r['floor']:.2f}x | {tgt} | {r['scalar'] / r['solve']:,.0f}x "
            f"| {r['agree']:.1e} m | {r['nan']} | {r['median'] * 1e3:.1f} ms "
            f"| {r['faults']:,.0f} | {r['load']:.1f} |")
    verdicts = []
    for name in dict.fromkeys(r["name"] for r in rows if r["target"]):
        rs = [r for r in rows if r["name"] == name]
        met = [r for r in rs if r["solve"] / r["floor"] <= r["target"]]
        sizes = ", ".join(f"{r['n']:,}" for r in rs)
        verdicts.append(f"{name} <= {rs[0]['target']:.0f}x the floor: "
                        + ("met at " + sizes if len(met) == len(rs) else
                           "not met at " + ", ".join(f"{r['n']:,}" for r in rs if r not in met)))
    lines += ["", "Targets: " + "; ".join(verdicts) + "."]
    lines += ["", "How: a closed-form estimate (the deep- and shallow-barrier limits of the "
              "equivalent depth), one Halley step with two terms of the series, one with all "
              "of them, each computed in one fused pass (W, G and the step with the "
              "constants folded into the series), then `drainplan._solve.newton_block`'s "
              "stop (the error the last step's size predicts), case by case; input checks "
              "in one min/max pass per input (the case-by-case checks run only to name a bad "
              "value); Kirkham's F_K in closed form (F_K = L / (8 d) less a finite-radius "
              "term summed in a few terms), Newton steps. A call of up to 16,384 cases is one "
              "block; larger calls go in blocks of 8,192 (measured against 4,096-65,536 at "
              "100,000 and 1,000,000 cases: 16,384 was 0-12 % faster with the command "
              "line's allocator, 8,192 35 % faster with the default one). Results agree "
              "with the previous implementation to 1e-6 m (tests/test_solver_reference.py). "
              "At 10,000 cases the fixed cost of a call (about 0.2 ms: input checks and "
              "Python's price per array operation, twice over for the two branches of the "
              "series) weighs more against the floor's few operations. The previous "
              "implementation (bracketed Chandrupatla, blocks of 32,768) ran at 0.24-0.53 M "
              "cases/s for Hooghoudt and 7,000-12,000 cases/s for Kirkham on this machine "
              "(issue 15).",
              "", "The default allocator: glibc hands freed memory at the top of its heap back "
              "to the kernel once more than its trim threshold (128 KiB until the process "
              "has freed a large mapped array; then twice that array's size) is free, so a "
              "call that leaves a megabyte of temporaries behind takes fresh, zeroed pages on "
              "the next call, or the next block (the page column). The command line "
              "avoids it (`drainplan.cli.tune_allocator`); a program calling drainplan "
              "does not, unless it sets the same thresholds (`MALLOC_TRIM_THRESHOLD_` / "
              "`MALLOC_MMAP_THRESHOLD_` or `mallopt`) or has already freed an array of a "
              "few megabytes. Blocks of 8,192 cases keep a block's temporaries (about "
              "1.5 MB at peak) below the threshold the first large free sets, so beyond "
              "one block the cost is per call, not per block."]
    srows, per_call, pint_loaded, mods, ld = startup
    lines2 = ["## Command-line start-up", "", head.replace("bench_spacing.py", "bench_spacing.py"),
              "", f"Wall time of a fresh process, best of {args.startup_repeat}; load average "
              f"{ld:.1f}.", "", "| what | wall time | vs bare interpreter |",
              "| --- | ---: | ---: |"]
    bare = srows[0][1]
    for name, t in srows:
        lines2.append(f"| {name} | {t * 1e3:.0f} ms | {t / bare:.1f}x |")
    lines2 += ["", f"Parsing `'7 mm/d'` in process: {per_call * 1e6:.1f} µs per call "
               f"(pint loaded: {'yes' if pint_loaded else 'no'}). Modules loaded by "
               f"`drainplan --help`: {mods or 'none of numpy, pint'} (of numpy, pint, click).",
               "", "Target: `drainplan --help` under 200 ms; a value with a common unit costs "
               "no pint start-up. The spacing command's own time is mostly numpy's import."]
    return "\n".join(lines), "\n".join(lines2)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="smaller sizes, fewer repeats")
    ap.add_argument("--write", action="store_true")
    ap.add_argument("--runs", type=int, default=1,
                    help="measure the methods this many times and keep, for each row, the "
                         "run whose solver time was least (for a loaded machine)")
    ap.add_argument("--default-allocator", action="store_true",
                    help="Hooghoudt only, C library allocator as it comes; rows as JSON")
    args = ap.parse_args()
    sizes = [10_000, 100_000] if args.quick else [10_000, 100_000, 1_000_000]
    args.repeat = 3 if args.quick else 9
    args.sizes = sizes
    args.scalar_cases = 300 if args.quick else 1500
    args.startup_repeat = 3 if args.quick else 7
    if args.default_allocator:
        print(json.dumps(bench_methods(sizes, args.scalar_cases, args.repeat, only=1)))
        return
    from drainplan.cli import tune_allocator

    args.tuned = tune_allocator()
    rows = best_rows([bench_methods(sizes, args.scalar_cases, args.repeat)
                      for _ in range(max(1, args.runs))])
    # each run of the default allocator in a fresh process: glibc raises its thresholds
    # for good once a process has freed a large array, and the figures would then be
    # those of a tuned allocator
    runs = []
    for _ in range(max(1, args.runs)):
        out = subprocess.run([sys.executable, __file__, "--default-allocator"]
                             + (["--quick"] if args.quick else []),
                             capture_output=True, text=True, check=True).stdout
        runs.append(json.loads(out.strip().splitlines()[-1]))
    for r in best_rows(runs):
        r["name"] += ", default allocator"
        rows.append(r)
    startup = bench_startup(args.startup_repeat)
    solvers, start = report(rows, startup, args)
    print(solvers + "\n\n" + start)
    if args.write:
        from _readme import write_section

        write_section(solvers, "## Spacing solvers", drop=("## Hooghoudt spacing, vectorised",))
        write_section(start, "## Command-line start-up")


if __name__ == "__main__":
    main()
