"""Capture the season simulation's daily series for a few cases (run once, by hand).

tests/test_simulation_reference.py compares the current implementation with these
numbers. Captured at commit 4cf036a (the stepper before the time loop was slimmed:
per-step diagnostics inside the loop); re-run only when a change of the results is
intended and explained.

    python tests/data/make_simulation_reference.py
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


def main():
    w = read_weather(WEATHER, latitude=45.0)
    out = {}
    for name, kw in CASES.items():
        r = boussinesq_simulation(rain=w.rain[DAYS], pet=w.pet[DAYS], **kw)
        for k in KEYS:
            out[f"{name}.{k}"] = getattr(r, k)
    np.savez_compressed(HERE / "simulation_reference.npz", **out)


if __name__ == "__main__":
    main()
