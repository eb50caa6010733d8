"""Network flows, grades and checks on synthetic surfaces."""

import numpy as np
import pytest
import shapely
from numpy.testing import assert_allclose

from drainplan.network.design import LateralRun, PipeOptions, design_pipes

SPACING = 20.0


def comb(n=6, length=200.0):
    """A main along x = 0 from north (upstream) to south (outlet), laterals to the east."""
    ys = 10 + SPACING * np.arange(n)
    runs = [LateralRun(f"F-{k + 1:03d}b", "F", shapely.LineString([(length, y), (0, y)]),
                       length, SPACING) for k, y in enumerate(ys)]
    main = shapely.LineString([(0, ys[-1]), (0, ys[0])])
    return runs, {"F": main}


def tilted(xy):
    # falls 0.5 % towards the west (towards the main) and 0.3 % towards the south (outlet)
    return 100.0 + 0.005 * xy[:, 0] + 0.003 * xy[:, 1]


def test_tilted_plane_exact_grades_and_mass_balance():
    # Analytic references: at constant depth below a plane, a pipe's grade is the plane's
    # slope along it; continuity (mass balance) makes each main reach carry q times the
    # area upstream of it, and the outlet q times the whole drained area (design flow
    # Q = DC x A, USDA-NRCS NEH-650 ch. 14).
    runs, mains = comb()
    q = 0.010
    d = design_pipes(runs, mains, PipeOptions(coefficient=q), surface=tilted)
    lats = [r for r in d.reaches if r["kind"] == "lateral"]
    mn = [r for r in d.reaches if r["kind"] == "main"]
    for r in lats:                      # constant depth on a plane: grade = ground slope
        assert_allclose(r["grade"], 0.005, rtol=1e-9)
        assert_allclose(r["invert_up_m"] - r["invert_down_m"], 1.0, atol=1e-9)
    for r in mn:
        assert_allclose(r["grade"], 0.003, rtol=1e-9)
    # mass balance: each reach carries everything upstream; the last carries it all
    area_each = 200.0 * SPACING
    flow_each = q * area_each / 86400 * 1000
    assert_allclose([r["flow_l_s"] for r in mn], flow_each * np.arange(1, 6), rtol=1e-12)
    total = q * area_each * len(runs) / 86400 * 1000
    assert_allclose(d.totals["outlet_flow_l_s"], total, rtol=1e-12)
    assert_allclose(mn[-1]["flow_l_s"] + flow_each, total, rtol=1e-12)
    # sizes never shrink downstream
    dia = [r["inner_diameter_mm"] for r in mn]
    assert dia == sorted(dia)
    assert not [v for v in d.violations if "grade" in v["problem"]]


def test_flat_field_minimum_grade():
    # On a flat field no grade comes from the ground; the minimum grade of 0.1 % (common
    # practice, method notes 9.4) must be imposed.
    runs, mains = comb()
    d = design_pipes(runs, mains, PipeOptions(coefficient=0.01, min_grade=0.001),
                     surface=lambda xy: np.full(len(xy), 50.0))
    for r in d.reaches:
        assert_allclose(r["grade"], 0.001, rtol=1e-9)
        assert r["invert_down_m"] < r["invert_up_m"]
    lat = next(r for r in d.reaches if r["kind"] == "lateral")
    assert_allclose(lat["invert_up_m"], 50.0 - 1.0)   # upstream end at the design depth
    # the laterals' outlets end 0.2 m deeper than the design depth, but the main (1.3 m
    # plus its own fall) stays below them: no junction problem
    assert not [v for v in d.violations if "junction" in v["problem"]]


def test_valley_adverse_grade_and_impossible_limits():
    runs, mains = comb(n=3, length=300.0)

    def valley(xy):          # the ground rises towards the main: adverse for laterals
        return 100.0 - 0.004 * xy[:, 0]

    d = design_pipes(runs, mains, PipeOptions(coefficient=0.01, max_depth=2.0),
                     surface=valley)
    lat = [r for r in d.reaches if r["kind"] == "lateral"]
    # with constant depth the grade would be adverse; laid at the minimum grade from its
    # upstream end (1.0 m deep) the lateral ends 1.0 + 1.2 m rise + 0.3 m fall = 2.5 m
    # deep at the main: reported once per lateral, at its deepest place, with the fix
    probs = [v for v in d.violations if v["reach_id"] == lat[0]["reach_id"]]
    assert len(probs) == 1 and "deep" in probs[0]["problem"] and probs[0]["fix"]
    assert probs[0]["chainage_m"] == pytest.approx(300.0)
    assert_allclose(lat[0]["invert_up_m"] - lat[0]["invert_down_m"], 0.3, atol=1e-9)
    assert all(r["grade"] >= 0.001 - 1e-12 for r in lat)
    # the cause is named once: the main is on the high side of the field
    high = [v for v in d.violations if v["kind"] == "main on the high side"]
    assert len(high) == 1 and "--main-side" in high[0]["fix"]
    # a gentle valley is solved by a constant-grade line within the limits
    d2 = design_pipes(runs, mains, PipeOptions(coefficient=0.01, max_depth=3.0),
                      surface=lambda xy: 100.0 - 0.0005 * xy[:, 0])
    lat2 = [r for r in d2.reaches if r["kind"] == "lateral"]
    assert all(abs(r["grade"] - 0.001) < 1e-9 for r in lat2)
    assert not [v for v in d2.violations if v["kind"] == "too deep"]


def test_outlet_below_ditch_level():
    runs, mains = comb()
    d = design_pipes(runs, mains, PipeOptions(coefficient=0.01, ditch_water_level=99.5),
                     surface=tilted)
    probs = [v for v in d.violations if "receiving water" in v["problem"]]
    assert probs and "pumped" in probs[0]["fix"]


def test_no_size_large_enough():
    # 50 m/d is far beyond any drain pipe: every reach is marked with its fix and the
    # design still finishes (one reach must not stop a run of many fields)
    runs, mains = comb()
    d = design_pipes(runs, mains, PipeOptions(coefficient=50.0), surface=tilted)
    big = [r for r in d.reaches if r["size"].startswith("larger than")]
    assert big
    fixes = [v for v in d.violations if v["kind"] == "too large"]
    assert len(fixes) == len(big) and "parallel" in fixes[0]["fix"]


def test_without_elevations_uses_assumed_grade():
    runs, mains = comb()
    d = design_pipes(runs, mains, PipeOptions(coefficient=0.01, assumed_grade=0.002))
    assert all(r["grade"] == 0.002 for r in d.reaches)
    assert any("no elevations" in n for n in d.notes)
