"""Capture drainplan's spacing solutions over a seeded sample of the practical range.

Written to ``solver_reference.csv`` beside this file; tests/test_solver_reference.py
compares the current solvers with these numbers (to 1e-6 m). The file in the
repository was produced by this script with the bracketed Chandrupatla solver of
commit f12b689 (before the Newton solvers), run with xtol = 1e-9 m so that the
captured numbers carry the solution of the equation, not the solver tolerance.

    python tests/data/make_solver_reference.py
"""

from __future__ import annotations

import subprocess
from pathlib import Path

import numpy as np

from drainplan.spacing import (glover_dumm_spacing, hooghoudt_spacing, kirkham_f,
                               kirkham_spacing)

N = 200


def sample(seed=15):
    """K 0.05-5 m/d, q 1-10 mm/d, h 0.2-1 m, D 0.5-20 m, r 0.05-0.15 m (log-uniform
    K and q, uniform h, D, r), plus K above drain level within 3x of K below."""
    rng = np.random.default_rng(seed)
    k = 10 ** rng.uniform(np.log10(0.05), np.log10(5.0), N)
    k_above = k * 10 ** rng.uniform(-0.5, 0.5, N)
    q = 10 ** rng.uniform(-3, -2, N)
    h = rng.uniform(0.2, 1.0, N)
    D = rng.uniform(0.5, 20.0, N)
    r = rng.uniform(0.05, 0.15, N)
    mu = rng.uniform(0.02, 0.15, N)
    days = rng.uniform(0.5, 5.0, N)
    ratio = rng.uniform(0.2, 0.8, N)          # final / initial head (Glover-Dumm)
    return dict(k=k, k_above=k_above, q=q, h=h, D=D, r=r, mu=mu, days=days, ratio=ratio)


def main():
    s = sample()
    cols = dict(s)
    x = 1e-9
    for m in ("series", "moody"):
        cols[f"hooghoudt_{m}"] = hooghoudt_spacing(
            recharge=s["q"], head=s["h"], k_below=s["k"], depth_to_barrier=s["D"],
            drain_radius=s["r"], equivalent_depth_method=m, xtol=x)
        cols[f"hooghoudt2_{m}"] = hooghoudt_spacing(
            recharge=s["q"], head=s["h"], k_below=s["k"], k_above=s["k_above"],
            depth_to_barrier=s["D"], drain_radius=s["r"], equivalent_depth_method=m, xtol=x)
        for shape in ("parabolic", "flat"):
            for fd in ("equivalent", "equivalent-plus-half-head"):
                cols[f"glover_{m}_{shape}_{fd}"] = glover_dumm_spacing(
                    initial_head=s["h"], final_head=s["h"] * s["ratio"], time=s["days"],
                    k=s["k"], drainable_porosity=s["mu"], depth_to_barrier=s["D"],
                    drain_radius=s["r"], shape=shape, flow_depth=fd,
                    equivalent_depth_method=m, xtol=x)
    cols["kirkham"] = kirkham_spacing(head=s["h"], recharge=s["q"], k=s["k"],
                                      depth_to_barrier=s["D"], drain_radius=s["r"], xtol=x)
    cols["kirkham_f_at_hooghoudt"] = kirkham_f(cols["hooghoudt_series"], s["D"], s["r"])
    commit = subprocess.run(["git", "rev-parse", "--short", "HEAD"], capture_output=True,
                            text=True, cwd=Path(__file__).parent).stdout.strip()
    out = Path(__file__).with_name("solver_reference.csv")
    names = list(cols)
    with out.open("w") as f:
        f.write(f"# drainplan spacing solutions captured at commit {commit} by "
                "make_solver_reference.py (seed 15, xtol 1e-9 m); SI units: m, m/d, d\n")
        f.write(",".join(names) + "\n")
        for i in range(N):
            f.write(",".join(repr(float(cols[n][i])) for n in names) + "\n")


if __name__ == "__main__":
    main()
