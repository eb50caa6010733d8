"""The season simulation against the previous implementation's numbers.

Reference: the daily series of tests/data/simulation_reference.npz, captured by
tests/data/make_simulation_reference.py at commit 4cf036a (before the stepper's time
loop was slimmed) on the invented demo weather record, for four cases: constant
drainable porosity with spacings up to ponding, a layered porosity profile, three
implicit steps per day, and Moody's equivalent depth with a wet start. A speed-up of
the stepper must leave every daily value within 1e-6 m (water-table depth, drain
discharge, runoff, ET, storage; derived check, not a published value).
"""

from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from drainplan.spacing.simulation import boussinesq_simulation
from drainplan.weather import read_weather

DATA = Path(__file__).with_name("data")

import importlib.util  # noqa: E402

_spec = importlib.util.spec_from_file_location("make_simulation_reference",
                                               DATA / "make_simulation_reference.py")
_mod = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(_mod)


@pytest.fixture(scope="module")
def weather():
    return read_weather(_mod.WEATHER, latitude=45.0)


@pytest.fixture(scope="module")
def ref():
    return np.load(DATA / "simulation_reference.npz")


@pytest.mark.parametrize("case", sorted(_mod.CASES))
def test_simulation_matches_previous_implementation(case, weather, ref):
    r = boussinesq_simulation(rain=weather.rain[_mod.DAYS], pet=weather.pet[_mod.DAYS],
                              **_mod.CASES[case])
    for key in _mod.KEYS:
        assert_allclose(getattr(r, key), ref[f"{case}.{key}"], rtol=0, atol=1e-6,
                        err_msg=f"{case}: {key}")
    assert np.abs(r.balance_error()).max() < 1e-12


@pytest.mark.parametrize("case", sorted(_mod.RESERVOIR_CASES))
def test_reservoir_matches_previous_implementation(case, weather):
    """The de Zeeuw-Hellinga reservoir against the numbers of the loop it replaced
    (tests/data/reservoir_reference.npz, captured with commit 4cf036a's loop): the same
    to the last bit (the same operations, stored differently)."""
    from drainplan.spacing.reservoir import de_zeeuw_hellinga_simulation

    ref = np.load(DATA / "reservoir_reference.npz")
    r = de_zeeuw_hellinga_simulation(rain=weather.rain[_mod.DAYS], pet=weather.pet[_mod.DAYS],
                                     **_mod.RESERVOIR_CASES[case])
    for key in _mod.KEYS:
        np.testing.assert_array_equal(getattr(r, key), ref[f"{case}.{key}"],
                                      err_msg=f"{case}: {key}")
    np.testing.assert_array_equal(r.extra["discharge_end"], ref[f"{case}.discharge_end"])
