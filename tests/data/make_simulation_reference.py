"""Capture the season simulation's daily series for a few cases (run once, by hand).

tests/test_simulation_reference.py compares the current implementation with these
numbers. The Boussinesq cases were captured at commit 4cf036a (the stepper before the
time loop was slimmed: per-step diagnostics inside the loop), the de Zeeuw-Hellinga
cases with that commit's reservoir loop (before its per-step values were kept by rows);
re-run only when a change of the results is intended and explained.

    python tests/data/make_simulation_reference.py [--reservoir]
"""

from pathlib import Path

import numpy as np

from drainplan.spacing.simulation import boussinesq_simulation
from drainplan.weather import read_weather

HERE = Path(__file__).parent
WEATHER = HERE.parent.parent / "demo_fields" / "weather.csv"   # invented demo record
DAYS = slice(0, 365 * 2)

CASES = {
    # the demo site: constant drainable porosity, spacings from narrow to ponding
    "constant": dict(spacing=[8.0, 15.0, 30.0, 60.0], k_below=0.5, k_above=0.8,
                     depth_to_barrier=2.1, drain_radius=0.059, drain_depth=1.1,
                     drainable_porosity=0.06, spin_up=120),
    # layered drainable porosity (the active-set stepper every step)
    "layered": dict(spacing=[10.0, 40.0], k_below=0.5, k_above=0.8, depth_to_barrier=2.1,
                    drain_radius=0.059, drain_depth=1.1,
                    porosity_profile=[(0.4, 0.04), (1.0, 0.07), (3.0, 0.05)], spin_up=60),
    # several implicit steps per day, shallower drains and root zone
    "substeps": dict(spacing=[12.0, 50.0], k_below=0.3, depth_to_barrier=1.5,
                     drain_radius=0.05, drain_depth=0.9, drainable_porosity=0.05,
                     root_zone_depth=0.3, substeps=3),
    # Moody's equivalent depth, a wet start
    "moody": dict(spacing=[20.0, 35.0], k_below=1.2, depth_to_barrier=6.0,
                  drain_radius=0.1, drain_depth=1.3, drainable_porosity=0.08,
                  initial_depth=0.3, equivalent_depth_method="moody"),
}
KEYS = ("water_table_depth", "drain", "runoff", "et", "storage")

RESERVOIR_CASES = {
    # the demo site over the design's kind of spacing grid, a year run first
    "grid": dict(spacing=[5.2, 13.0, 26.0, 39.0, 65.0],
                 k_below=0.5, k_above=0.8, depth_to_barrier=2.1, drain_radius=0.059,
                 drain_depth=1.1, drainable_porosity=0.06, spin_up=365),
    # a wet start and a shallow root zone
    "wet": dict(spacing=[12.0, 50.0], k_below=0.3, depth_to_barrier=1.5, drain_radius=0.05,
                drain_depth=0.9, drainable_porosity=0.05, root_zone_depth=0.3,
                initial_depth=0.2),
    # a root zone deeper than the drains (the general ET reduction)
    "deep_roots": dict(spacing=[20.0], k_below=1.0, depth_to_barrier=3.0, drain_radius=0.05,
                       drain_depth=1.0, drainable_porosity=0.04, root_zone_depth=1.5),
}


def _capture(simulate, cases, path, extra=()):
    """Run ``simulate`` on the first two years of the demo weather for each case and
    save the daily series (and the ``extra`` entries of ``result.extra``) to ``path``."""
    w = read_weather(WEATHER, latitude=45.0)
    out = {}
    for name, kw in cases.items():
        r = simulate(rain=w.rain[DAYS], pet=w.pet[DAYS], **kw)
        for k in KEYS:
            out[f"{name}.{k}"] = getattr(r, k)
        for k in extra:
            out[f"{name}.{k}"] = r.extra[k]
    np.savez_compressed(path, **out)


def main():
    import sys

    if "--reservoir" in sys.argv:
        from drainplan.spacing.reservoir import de_zeeuw_hellinga_simulation

        return _capture(de_zeeuw_hellinga_simulation, RESERVOIR_CASES,
                        HERE / "reservoir_reference.npz", extra=("discharge_end",))
    _capture(boussinesq_simulation, CASES, HERE / "simulation_reference.npz")


if __name__ == "__main__":
    main()
