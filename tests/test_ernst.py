"""Ernst's equation for layered soils."""

import numpy as np
import pytest
from numpy.testing import assert_allclose

from drainplan.errors import InputError
from drainplan.spacing import (ERNST_GEOMETRY_TABLE, equivalent_depth, ernst_geometry_factor,
                               ernst_head, ernst_profile_spacing, ernst_profile_terms,
                               ernst_spacing, hooghoudt_spacing)


def test_course_example():
    # Ernst's three head losses as worked in an open groundwater-flow course notebook
    # (method notes, section 3): L = 400 m, q = 300 mm/yr, K_v = 3, D_v = 2, KD = 200,
    # K_r = 3, D_r = 4, u = 2.5, a = 5 -> h = 0.155 m (vertical 0.0005, horizontal 0.082,
    # radial 0.073), printed to 3 decimals.
    q = 0.3 / 365.0
    kw = dict(recharge=q, transmissivity=200.0, k_radial=3.0, radial_thickness=4.0,
              wet_perimeter=2.5, geometry_factor=5.0, k_vertical=3.0, vertical_thickness=2.0)
    h = ernst_head(spacing=400.0, **kw)
    assert_allclose(h, 0.155, atol=5e-4)
    assert_allclose(q * 400**2 / (8 * 200), 0.082, atol=5e-4)
    assert_allclose(ernst_spacing(head=h, **kw), 400.0, rtol=1e-10)


def test_homogeneous_equals_hooghoudt_small_x():
    # With a = 1, D_r = D, u = pi r0, sum(KD) = K D and no vertical term, Ernst's equation
    # is the small-x (shallow barrier) form of the exact Hooghoudt solution
    # (method notes C-E1, derived): q = 0.007, K = 1, D = 2, r0 = 0.1, L = 30 -> h = 0.517480.
    h = ernst_head(spacing=30.0, recharge=0.007, transmissivity=2.0, k_radial=1.0,
                   radial_thickness=2.0, wet_perimeter=np.pi * 0.1)
    assert_allclose(h, 0.517480, atol=1e-6)
    assert_allclose(h, 0.007 * 30**2 / (8 * equivalent_depth(30.0, 2.0, 0.1)), rtol=1e-9)


def test_profile_homogeneous_shallow_close_to_hooghoudt():
    # Shallow barrier, homogeneous: Ernst (with its small vertical term) within 5 % of
    # Hooghoudt's spacing.
    L_e = ernst_profile_spacing(head=0.5, recharge=0.007, drain_depth=1.0, barrier_depth=3.0,
                                k_top=1.0, drain_radius=0.1)
    L_h = hooghoudt_spacing(recharge=0.007, head=0.5, k_below=1.0, depth_to_barrier=2.0,
                            drain_radius=0.1)
    assert abs(L_e / L_h - 1) < 0.05


def test_quarter_spacing_limit_deep_barrier():
    # With both flow depths limited to L/4 the radial + horizontal head exceeds the deep
    # Hooghoudt limit by ln(1/4) + pi/2 = 0.185 times q L / (pi K) (derived, method notes 3).
    L, q, K, r0 = 40.0, 0.007, 1.0, 0.1
    t = ernst_profile_terms(spacing=L, head=1e-9, drain_depth=1.0, barrier_depth=100.0,
                            k_top=K, drain_radius=r0)
    h_e = q * (t["horizontal"] + t["radial"])
    h_deep = q * L**2 / (8 * K * np.pi * L / (8 * np.log(L / (np.pi * r0))))
    assert_allclose((h_e - h_deep) / (q * L / (np.pi * K)), np.log(0.25) + np.pi / 2,
                    atol=1e-6)


def test_geometry_factor_table_rules():
    # ILRI Publ. 16 section 8.2 rules (recalled): K_b/K_t < 0.1 -> a = 1; > 50 -> a = 4.
    assert ernst_geometry_factor(0.05, 4.0) == 1.0
    assert ernst_geometry_factor(80.0, 4.0) == 4.0
    # the homogeneous row equals the exact value 1 + D_b/D_t (derived, see table note)
    for tr in (1.0, 2.0, 4.0, 8.0):
        assert_allclose(ernst_geometry_factor(1.0, tr), 1 + tr)
    # grid points are returned unchanged
    tab = ERNST_GEOMETRY_TABLE
    for i, kr in enumerate(tab["k_ratio"]):
        for j, tr in enumerate(tab["thickness_ratio"]):
            assert_allclose(ernst_geometry_factor(kr, tr), tab["a"][i, j])


def test_drains_in_top_layer_uses_table():
    t = ernst_profile_terms(spacing=30.0, head=0.5, drain_depth=1.0, barrier_depth=5.0,
                            k_top=0.5, k_bottom=2.5, interface_depth=2.0, drain_radius=0.1)
    assert_allclose(t["geometry_factor"], ernst_geometry_factor(5.0, 3.0))
    assert_allclose(t["radial_thickness"], 1.0)
    # a user value overrides
    L1 = ernst_profile_spacing(head=0.5, recharge=0.007, drain_depth=1.0, barrier_depth=5.0,
                               k_top=0.5, k_bottom=2.5, interface_depth=2.0, drain_radius=0.1,
                               geometry_factor=2.0)
    L2 = ernst_profile_spacing(head=0.5, recharge=0.007, drain_depth=1.0, barrier_depth=5.0,
                               k_top=0.5, k_bottom=2.5, interface_depth=2.0, drain_radius=0.1)
    assert L1 > L2   # smaller a, less radial resistance, wider spacing


def test_more_permeable_bottom_widens_spacing():
    kw = dict(head=0.5, recharge=0.007, drain_depth=1.0, barrier_depth=6.0, k_top=0.3,
              interface_depth=1.8, drain_radius=0.08)
    L = [float(ernst_profile_spacing(k_bottom=kb, **kw)) for kb in (0.3, 1.0, 3.0, 10.0)]
    assert np.all(np.diff(L) > 0)


@pytest.mark.parametrize("kw,match", [
    (dict(barrier_depth=0.9), "barrier"), (dict(k_top=0.0), "top layer"),
    (dict(head=2.0), "cannot exceed"), (dict(drain_radius=3.0), "radial"),
    (dict(geometry_factor=-1.0), "geometry factor"),
])
def test_bad_input(kw, match):
    args = dict(head=0.5, recharge=0.007, drain_depth=1.0, barrier_depth=3.0, k_top=1.0,
                drain_radius=0.1)
    args.update(kw)
    with pytest.raises(InputError, match=match):
        ernst_profile_spacing(**args)


def test_thin_radial_zone_adds_no_negative_loss():
    """Drains 0.25 m above the barrier with r0 = 0.1 m (D_r < pi r0): the radial
    loss is zero, never negative, and Ernst then equals Hooghoudt with d = D
    (both reduce to q L^2 = 8 K D h + 4 K h^2; Hooghoudt 1940, Ritzema 1994 ILRI
    Publ. 16 eq. 8.8 as recalled; derived identity, METHODS 1.3(d))."""
    from drainplan.spacing.ernst import ernst_profile_spacing, ernst_profile_terms
    from drainplan.spacing.hooghoudt import hooghoudt_spacing

    L = ernst_profile_spacing(head=0.4, recharge=0.005, drain_depth=1.0, barrier_depth=1.25,
                              k_top=0.8, drain_radius=0.1, k_vertical=1e9)
    terms = ernst_profile_terms(spacing=L, head=0.4, drain_depth=1.0, barrier_depth=1.25,
                                k_top=0.8, drain_radius=0.1, k_vertical=1e9)
    assert terms["radial"] == 0.0
    Lh = hooghoudt_spacing(recharge=0.005, head=0.4, k_above=0.8, k_below=0.8,
                           depth_to_barrier=0.25, drain_radius=0.1)
    np.testing.assert_allclose(L, Lh, rtol=1e-5)
    # independent: the Donnan form solved by hand
    np.testing.assert_allclose(L, np.sqrt((8 * 0.8 * 0.25 * 0.4 + 4 * 0.8 * 0.16) / 0.005),
                               rtol=1e-5)
