"""The design core's input checks: one min/max pass accepts valid arrays, and a bad value
anywhere is still refused with the message naming the first bad value.

Reference: the rule written out case by case here (a value is accepted when it is a finite
number greater than 0, or 0 or more; a non-finite value is reported before a value out of
range; the first offending value in C order is the one named), independent of
drainplan._validate.
"""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from drainplan._validate import (require_nonnegative, require_positive,
                                 require_radius_below_barrier)
from drainplan.errors import InputError
from drainplan.spacing import glover_dumm_spacing, hooghoudt_spacing, kirkham_spacing

BAD = [math.nan, math.inf, -math.inf, 0.0, -0.0, -1e-300, -2.5]


def _expected(values, strict, label, unit):
    flat = np.asarray(values, float).ravel()
    nonfinite = [v for v in flat if not math.isfinite(v)]
    if nonfinite:
        return f"{label} must be a finite number, got {nonfinite[0]}"
    out = [v for v in flat if (v <= 0 if strict else v < 0)]
    if out:
        if strict:
            return f"{label} must be greater than 0 {unit}, got {out[0]:g} {unit}"
        return f"{label} must be 0 {unit} or more, got {out[0]:g} {unit}"
    return None


@settings(max_examples=60, deadline=None)
@given(n=st.integers(1, 40), bad=st.lists(st.tuples(st.integers(0, 39), st.sampled_from(BAD)),
                                          max_size=3),
       form=st.sampled_from(["array", "broadcast", "0-d", "2-d"]),
       strict=st.booleans())
def test_checks_refuse_exactly_the_bad_values(n, bad, form, strict):
    rng = np.random.default_rng(n)
    values = rng.uniform(0.01, 5.0, n)
    for i, v in bad:
        values[i % n] = v
    if form == "broadcast":             # one value repeated, as broadcasting gives it
        values = np.broadcast_to(values[:1], (n, 3))
    elif form == "0-d":
        values = np.asarray(values[0])
    elif form == "2-d" and n % 2 == 0:
        values = values.reshape(2, n // 2)
    expected = _expected(values, strict, "the quantity", "m")
    check = require_positive if strict else require_nonnegative
    if expected is None:
        check(values, "x", "the quantity", "m")
    else:
        with pytest.raises(InputError) as info:
            check(values, "x", "the quantity", "m")
        assert str(info.value) == expected and info.value.param == "x"


@pytest.mark.parametrize("D,r,ok", [
    ([2.0, 0.0, 3.0], [0.1, 0.5, 0.1], True),         # D = 0: drains on the barrier
    ([2.0, 0.4, 3.0], [0.1, 0.5, 0.1], False),        # r >= D where D > 0
    ([2.0, 0.5, 3.0], [0.1, 0.5, 0.1], False),
    ([2.0, math.nan, 3.0], [0.1, 0.1, 0.1], True),    # NaN is the finiteness check's
])
def test_radius_below_barrier(D, r, ok):
    D, r = np.array(D), np.array(r)
    if ok:
        require_radius_below_barrier(D, r)
    else:
        with pytest.raises(InputError, match="must be smaller than the depth") as info:
            require_radius_below_barrier(D, r)
        assert info.value.param == "drain_radius"


@pytest.mark.parametrize("func,kw,name", [
    (hooghoudt_spacing, dict(recharge=0.005, head=0.5, k_below=0.5, depth_to_barrier=3.0,
                             drain_radius=0.05), "recharge"),
    (hooghoudt_spacing, dict(recharge=0.005, head=0.5, k_below=0.5, depth_to_barrier=3.0,
                             drain_radius=0.05), "depth_to_barrier"),
    (kirkham_spacing, dict(head=0.5, recharge=0.005, k=0.5, depth_to_barrier=3.0,
                           drain_radius=0.05), "k"),
    (glover_dumm_spacing, dict(initial_head=0.8, final_head=0.4, time=2.0, k=0.5,
                               drainable_porosity=0.05, depth_to_barrier=3.0,
                               drain_radius=0.05), "time"),
])
@pytest.mark.parametrize("bad", [math.nan, -1.0])
def test_one_bad_case_among_many_is_named(func, kw, name, bad):
    values = np.full(5000, kw[name])
    values[3717] = bad
    kw = dict(kw, **{name: values})
    with pytest.raises(InputError) as info:
        func(**kw)
    assert info.value.param == name
    assert ("nan" if math.isnan(bad) else "-1") in str(info.value)
