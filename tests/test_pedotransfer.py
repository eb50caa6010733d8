"""Saxton & Rawls (2006) pedotransfer estimates and van Genuchten drainable porosity.

Sources: Saxton, K.E. & Rawls, W.J. (2006), Soil water characteristic estimates by texture
and organic matter for hydrologic solutions, SSSA J. 70: 1569-1578. The class values below
are the paper's texture-class table at OM = 2.5 % as RECALLED (drainplan METHODS C-S1,
where they were recomputed from the equations, read in several public implementations, and
found to match the remembered table to its printed digits). Van Genuchten (1980), SSSA J.
44: 892-898, for the retention curve; the drainable porosities (METHODS C-P1) are DERIVED,
and are re-derived here with scipy.integrate.quad as an independent check.
"""

import numpy as np
import pytest
from scipy.integrate import quad

from drainplan.errors import InputError
from drainplan.pedotransfer import (saxton_rawls, van_genuchten_drainable_porosity,
                                    van_genuchten_water_content)

# class, sand %, clay %, theta1500, theta33, thetaS, Ks mm/h  (recalled table, OM 2.5 %)
SAXTON_RAWLS_2006_CLASSES = [
    ("sand", 88, 5, 0.05, 0.10, 0.46, 108.1),
    ("loamy sand", 80, 5, 0.05, 0.12, 0.46, 96.7),
    ("sandy loam", 65, 10, 0.08, 0.18, 0.45, 50.3),
    ("loam", 40, 20, 0.14, 0.28, 0.46, 15.5),
    ("silt loam", 20, 15, 0.11, 0.31, 0.48, 16.1),
    ("silt", 10, 5, 0.06, 0.30, 0.48, 22.0),
    ("sandy clay loam", 60, 25, 0.17, 0.27, 0.43, 11.3),
    ("clay loam", 30, 35, 0.22, 0.36, 0.48, 4.3),
    ("silty clay loam", 10, 35, 0.22, 0.38, 0.51, 5.7),
    ("silty clay", 10, 45, 0.27, 0.41, 0.52, 3.7),
    ("sandy clay", 50, 40, 0.25, 0.36, 0.44, 1.4),
    ("clay", 25, 50, 0.30, 0.42, 0.50, 1.1),
]


@pytest.mark.parametrize("name,sand,clay,t1500,t33,ts,ks", SAXTON_RAWLS_2006_CLASSES)
def test_class_table(name, sand, clay, t1500, t33, ts, ks):
    r = saxton_rawls(sand=sand, clay=clay, organic_matter=2.5)
    # water contents printed to 0.01; Ks to 0.1 mm/h
    assert r["theta_wilting_point"] == pytest.approx(t1500, abs=0.0051)
    assert r["theta_field_capacity"] == pytest.approx(t33, abs=0.0051)
    assert r["theta_saturation"] == pytest.approx(ts, abs=0.0051)
    assert r["ksat_mm_per_h"] == pytest.approx(ks, abs=0.051)
    assert r["ksat_m_per_d"] == pytest.approx(r["ksat_mm_per_h"] * 24 / 1000, rel=1e-12)
    assert r["drainable_porosity"] == pytest.approx(r["theta_saturation"]
                                                    - r["theta_field_capacity"])


def test_vectorised_matches_scalar():
    sand = np.array([88, 40, 25.0])
    clay = np.array([5, 20, 50.0])
    r = saxton_rawls(sand=sand, clay=clay)
    for i in range(3):
        s = saxton_rawls(sand=sand[i], clay=clay[i])
        assert r["ksat_m_per_d"][i] == pytest.approx(s["ksat_m_per_d"])


def test_sandier_is_more_permeable():
    # sandier at fixed clay (clay up to 20 %) -> higher K and drainable porosity
    for clay in (5, 10, 20):
        r = saxton_rawls(sand=np.linspace(5, 75, 15), clay=clay)
        assert np.all(np.diff(r["ksat_m_per_d"]) > 0)
        assert np.all(np.diff(r["drainable_porosity"]) > 0)
    # along the classes from sand to clay (same table as above)
    order = ["sand", "loamy sand", "sandy loam", "loam", "clay loam", "clay"]
    rows = {c[0]: c for c in SAXTON_RAWLS_2006_CLASSES}
    r = saxton_rawls(sand=[rows[c][1] for c in order], clay=[rows[c][2] for c in order])
    assert np.all(np.diff(r["ksat_m_per_d"]) < 0)
    assert np.all(np.diff(r["drainable_porosity"]) < 0)


def test_compaction_lowers_k():
    loose = saxton_rawls(sand=40, clay=20, density_factor=1.0)
    dense = saxton_rawls(sand=40, clay=20, density_factor=1.15)
    assert dense["ksat_m_per_d"] < loose["ksat_m_per_d"]
    assert dense["theta_saturation"] < loose["theta_saturation"]


@pytest.mark.parametrize("kw,match", [
    (dict(sand=70, clay=40), "sand \\+ clay"),
    (dict(sand=-1, clay=20), "sand content"),
    (dict(sand=40, clay=20, organic_matter=12), "organic matter above 8"),
    (dict(sand=40, clay=20, density_factor=1.5), "density factor"),
])
def test_bad_texture(kw, match):
    with pytest.raises(InputError, match=match):
        saxton_rawls(**kw)


# ---- van Genuchten drainable porosity
LOAM = (0.078, 0.43, 3.6, 1.56)       # Carsel & Parrish (1988) loam, as recalled
SAND = (0.045, 0.43, 14.5, 2.68)
SICL = (0.089, 0.43, 1.0, 1.23)
# METHODS C-P1 (DERIVED): mu(0-0.5), mu(0.5-1.0), mu(0-1.0), mu(0.3-1.2), incremental at 1 m
C_P1 = [(LOAM, [0.0663, 0.1617, 0.1140, 0.1570, 0.1879]),
        (SAND, [0.2875, 0.3774, 0.3324, 0.3753, 0.3807]),
        (SICL, [0.0106, 0.0321, 0.0213, 0.0316, 0.0415])]
RANGES = [(0.0, 0.5), (0.5, 1.0), (0.0, 1.0), (0.3, 1.2), (1.0, 1.0)]


@pytest.mark.parametrize("params,expected", C_P1)
def test_drainable_porosity_check_values(params, expected):
    tr, ts, a, n = params
    got = van_genuchten_drainable_porosity(theta_r=tr, theta_s=ts, alpha=a, n=n,
                                           from_depth=[r[0] for r in RANGES],
                                           to_depth=[r[1] for r in RANGES])
    np.testing.assert_allclose(got, expected, atol=6e-5)     # printed to 4 decimals


@pytest.mark.parametrize("params", [LOAM, SAND, SICL])
def test_drainable_porosity_against_quad(params):
    tr, ts, a, n = params

    def air(z):
        return ts - (tr + (ts - tr) / (1 + (a * z) ** n) ** (1 - 1 / n))

    for z1, z2 in [(0.0, 0.3), (0.2, 0.9), (0.0, 2.0), (1.0, 1.6)]:
        ref = quad(air, z1, z2, epsabs=1e-13)[0] / (z2 - z1)
        got = van_genuchten_drainable_porosity(theta_r=tr, theta_s=ts, alpha=a, n=n,
                                               from_depth=z1, to_depth=z2)
        assert got == pytest.approx(ref, rel=1e-5, abs=1e-8)


def test_drainable_porosity_grows_with_depth():
    tr, ts, a, n = LOAM
    z = np.linspace(0.1, 2.0, 20)
    mu = van_genuchten_drainable_porosity(theta_r=tr, theta_s=ts, alpha=a, n=n,
                                          from_depth=0.0, to_depth=z)
    assert np.all(np.diff(mu) > 0) and np.all(mu < ts - tr)


def test_water_content_limits():
    tr, ts, a, n = LOAM
    assert van_genuchten_water_content(0.0, theta_r=tr, theta_s=ts, alpha=a, n=n) == ts
    assert van_genuchten_water_content(1e6, theta_r=tr, theta_s=ts, alpha=a,
                                       n=n) == pytest.approx(tr, abs=1e-4)


@pytest.mark.parametrize("kw,match", [
    (dict(n=0.9), "n must be greater than 1"),
    (dict(theta_r=0.5), "theta_r < theta_s"),
    (dict(from_depth=1.0, to_depth=0.5), "must not be above"),
])
def test_bad_retention_inputs(kw, match):
    args = dict(theta_r=0.078, theta_s=0.43, alpha=3.6, n=1.56, from_depth=0.0, to_depth=0.5)
    args.update(kw)
    with pytest.raises(InputError, match=match):
        van_genuchten_drainable_porosity(**args)
