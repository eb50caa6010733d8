"""The vectorised layout gives the same layout as the previous per-field implementation.

``layout_reference.py`` keeps the previous implementation of
:func:`drainplan.geometry.layout.layout_fields` unchanged (a Python pass per field
for the mains, their trimming and the outlets). Every speed-up of the layout is
checked against it here on varied fields: random irregular fields like the
benchmark's, the regression shapes of ``test_layout_geometry.py`` (cut corner,
L-shaped and concave, pond/hole, several parts, zero-width spike), a tiny field,
fields with no lateral, exclusions, outlets, user mains and the herringbone
pattern. Same counts; coordinates and lengths to 1e-6 m.
"""

import importlib.util
import os
import sys
from pathlib import Path

import numpy as np
import pytest
import shapely
from hypothesis import assume, given, settings, strategies as st
from numpy.testing import assert_allclose, assert_array_equal

from drainplan.errors import InputError
from drainplan.geometry.laterals import order_by_group
from drainplan.geometry.layout import LayoutOptions, layout_fields


def _load_reference():
    name = "drainplan_layout_reference"
    if name not in sys.modules:
        spec = importlib.util.spec_from_file_location(
            name, Path(__file__).with_name("layout_reference.py"))
        module = importlib.util.module_from_spec(spec)
        sys.modules[name] = module
        spec.loader.exec_module(module)
    return sys.modules[name]


ref = _load_reference()

TOL = 1e-6  # m
#: examples of the property test; DRAINPLAN_PROPERTY_EXAMPLES (e.g. 2000) runs more
PROPERTY_EXAMPLES = int(os.environ.get("DRAINPLAN_PROPERTY_EXAMPLES", "40"))


def irregular_fields(n, seed):
    """Star-shaped irregular polygons (7-12 vertices) of 5-80 ha on a 3 km grid (the
    benchmark's generator, benchmarks/bench_layout.py)."""
    rng = np.random.default_rng(seed)
    out = []
    for i in range(n):
        k = rng.integers(7, 13)
        ang = np.sort(rng.uniform(0, 2 * np.pi, k))
        rad = rng.uniform(0.75, 1.0, k)
        stretch = rng.uniform(1.0, 2.5)
        pts = np.c_[np.cos(ang) * rad * stretch, np.sin(ang) * rad]
        theta = rng.uniform(0, np.pi)
        rot = np.array([[np.cos(theta), -np.sin(theta)], [np.sin(theta), np.cos(theta)]])
        poly = shapely.Polygon(pts @ rot.T)
        poly = shapely.affinity.scale(poly, *(np.sqrt(rng.uniform(5e4, 8e5) / poly.area),) * 2,
                                      origin=(0, 0))
        out.append(shapely.affinity.translate(poly, (i % 10) * 3000.0, (i // 10) * 3000.0))
    return np.array(out, dtype=object)


RECT = shapely.box(0, 0, 400, 200)
L_SHAPE = shapely.Polygon([(0, 0), (300, 0), (300, 120), (120, 120), (120, 300), (0, 300)])
HOLE = shapely.box(0, 0, 400, 300).difference(shapely.box(150, 100, 220, 160))
MULTI = shapely.MultiPolygon([shapely.box(0, 0, 200, 100), shapely.box(300, 0, 500, 120)])
CONCAVE = shapely.Polygon([(0, 0), (400, 0), (400, 300), (200, 120), (0, 300)])
CUT = [shapely.from_wkt(w) for w in (
    "POLYGON ((500081.0 5000126.2, 499953.2 5000102.3, 499874.5 5000082.1, "
    "499872.0 5000078.1, 500106.3 4999894.2, 500129.2 4999923.8, 500144.0 4999958.1, "
    "500081.0 5000126.2))",
    "POLYGON ((0 0, 300 0, 300 195, 296 200, 0 200, 0 0))",
    "POLYGON ((0 2, 2 0, 250 0, 250 180, 0 180, 0 2))")]
SPIKE = shapely.Polygon([(169.5, 0.0), (226.0, 1.762e-262), (169.5, 2.375e-43),
                         (122.108, 190.172), (-94.04, 120.0), (-100.0, -50.0)])
TINY = shapely.box(0, 0, 9, 9)                  # narrower than the spacing: no lateral
SMALL = shapely.box(0, 0, 24, 24)               # its inset holds only short pieces


def _shapes():
    """The regression shapes side by side (1 km apart), with a missing field."""
    shapes = [RECT, L_SHAPE, HOLE, MULTI, CONCAVE, CUT[1], CUT[2], SPIKE, TINY, SMALL]
    out = [shapely.affinity.translate(g, 1000.0 * i, 0.0) for i, g in enumerate(shapes)]
    out.insert(3, None)
    return np.array(out + [CUT[0]], dtype=object)


def _exclusions(fields):
    """A well, a pond and a hedge inside each present field (invented)."""
    geoms, setbacks = [], []
    for g in fields:
        if g is None:
            continue
        c = shapely.get_coordinates(shapely.point_on_surface(g))[0]
        x0, y0, x1, y1 = g.bounds
        geoms += [shapely.Point(c), shapely.box(x0 + 0.1 * (x1 - x0), y0 + 0.6 * (y1 - y0),
                                                x0 + 0.3 * (x1 - x0), y0 + 0.8 * (y1 - y0)),
                  shapely.LineString([(x0, y0 + 0.3 * (y1 - y0)),
                                      (x0 + 0.5 * (x1 - x0), y0 + 0.35 * (y1 - y0))])]
        setbacks += [30.0, 10.0, 5.0]
    return np.array(geoms, dtype=object), np.array(setbacks)


def _user_mains(fields, every=3):
    """A drawn main across every third field (a line through its centroid)."""
    out = np.full(len(fields), None, dtype=object)
    for i, g in enumerate(fields):
        if g is None or i % every:
            continue
        c = shapely.get_coordinates(shapely.centroid(g))[0]
        x0, y0, x1, y1 = g.bounds
        line = shapely.LineString([(x0 - 1, c[1] - 0.1 * (y1 - y0)), c,
                                   (x1 + 1, c[1] + 0.1 * (y1 - y0))])
        out[i] = shapely.intersection(line, g)
        if out[i].geom_type != "LineString":
            parts = shapely.get_parts(out[i])
            out[i] = parts[np.argmax(shapely.length(parts))] if parts.size else None
    return out


def _outlets(fields, seed):
    rng = np.random.default_rng(seed)
    pts = []
    for g in fields:
        x0, y0, x1, y1 = g.bounds if g is not None else (0, 0, 1, 1)
        pts.append((rng.uniform(x0 - 200, x1 + 200), rng.uniform(y0 - 200, y1 + 200)))
    return np.array(pts)


def _low_end(n, seed):
    rng = np.random.default_rng(seed)
    out = np.array([bool(b) for b in rng.integers(0, 2, n)], dtype=object)
    out[::4] = None
    return out


def _cases():
    irr = {s: irregular_fields(40, s) for s in (11, 5, 23)}
    shapes = _shapes()
    bench = dict(spacing=15.0, direction="auto", setback=6.0, min_length=10.0)
    cases = []
    for s, f in irr.items():
        cases.append((f"irregular-{s}", f, bench, {}))
    f = irr[5]
    cases += [
        ("irregular-fixed-N-offset", f, dict(spacing=12.0, direction=30.0, main_side="N",
                                             offset=3.0), {}),
        ("irregular-outlets", f, dict(spacing=18.0, setback=4.0),
         dict(outlet=_outlets(f, 1))),
        ("irregular-one-outlet", irr[23], dict(spacing=15.0, direction=120.0),
         dict(outlet=(15000.0, -500.0))),
        ("irregular-low-end", irr[11], dict(spacing=20.0, setback=3.0),
         dict(low_end=_low_end(40, 2))),
        ("irregular-user-mains", f, dict(spacing=15.0, direction=75.0),
         dict(user_mains=_user_mains(f))),
        ("irregular-per-field-direction", f,
         dict(spacing=15.0, direction=np.where(np.arange(40) % 3 == 0, np.nan,
                                               np.arange(40) * 4.5)), {}),
    ]
    ex, sb = _exclusions(irr[11][:15])
    for cross in (True, False):
        cases.append((f"irregular-exclusions-cross-{cross}", irr[11][:15],
                      dict(spacing=15.0, setback=6.0, cross_setbacks=cross),
                      dict(exclusions=ex, exclusion_setbacks=sb, outlet=(0.0, 0.0))))
    for direction in (90.0, 37.0, "auto", 146.0):
        for side in ("auto", "N", "E", "S", "W", "SE"):
            cases.append((f"shapes-{direction}-{side}", shapes,
                          dict(spacing=15.0, direction=direction, main_side=side,
                               min_length=5.0, setback=2.0), {}))
    ex, sb = _exclusions(shapes)
    cases += [
        ("shapes-exclusions", shapes, dict(spacing=12.0, direction=90.0),
         dict(exclusions=ex, exclusion_setbacks=sb)),
        ("shapes-exclusions-no-crossing", shapes,
         dict(spacing=12.0, direction=20.0, cross_setbacks=False),
         dict(exclusions=ex, exclusion_setbacks=sb, outlet=_outlets(shapes, 3))),
        ("shapes-user-mains", shapes, dict(spacing=10.0, direction=0.0),
         dict(user_mains=_user_mains(shapes, every=2))),
        ("herringbone", np.concatenate([irr[11][:10], shapes]),
         dict(spacing=20.0, direction="auto", pattern="herringbone", herringbone_angle=40),
         dict(outlet=(-100.0, -100.0))),
        ("herringbone-outlets-exclusions", irr[23][:15],
         dict(spacing=18.0, direction=100.0, pattern="herringbone", herringbone_angle=60,
              setback=4.0, cross_setbacks=False),
         dict(outlet=_outlets(irr[23][:15], 4), exclusions=_exclusions(irr[23][:15])[0],
              exclusion_setbacks=_exclusions(irr[23][:15])[1])),
        ("herringbone-user-mains", irr[5][:12],
         dict(spacing=15.0, direction=60.0, pattern="herringbone", setback=5.0),
         dict(user_mains=_user_mains(irr[5][:12], every=2))),
    ]
    return cases


CASES = _cases()


def _same_geoms(a, b, what):
    a, b = np.asarray(a, dtype=object), np.asarray(b, dtype=object)
    assert a.shape == b.shape, what
    none_a = np.array([g is None for g in a.ravel()], bool)
    none_b = np.array([g is None for g in b.ravel()], bool)
    assert_array_equal(none_a, none_b, err_msg=what)
    a, b = a.ravel()[~none_a], b.ravel()[~none_b]
    assert_array_equal(shapely.get_type_id(a), shapely.get_type_id(b), err_msg=what)
    ca, ia = shapely.get_coordinates(a, return_index=True)
    cb, ib = shapely.get_coordinates(b, return_index=True)
    assert_array_equal(np.bincount(ia, minlength=a.size), np.bincount(ib, minlength=b.size),
                       err_msg=f"{what}: vertex counts")
    assert_allclose(ca, cb, rtol=0, atol=TOL, err_msg=what)


@pytest.mark.parametrize("name,fields,opts,kw", CASES, ids=[c[0] for c in CASES])
def test_layout_matches_previous_implementation(name, fields, opts, kw):
    new = layout_fields(fields, LayoutOptions(**opts), **kw)
    old = _previous(fields, opts, **kw)
    assert new.laterals.size > 0
    _same_layout(fields, new, old)


@pytest.mark.parametrize("pattern", ["parallel", "herringbone"])
@pytest.mark.parametrize("fields", [[], [None, None], [shapely.box(0, 0, 100, 100),
                                                        shapely.Polygon(), None]],
                         ids=["none", "missing", "one-and-empty"])
def test_layout_matches_previous_implementation_without_fields(fields, pattern):
    fields = np.array(fields, dtype=object)
    opts = dict(spacing=15.0, pattern=pattern)
    _same_layout(fields, layout_fields(fields, LayoutOptions(**opts)), _previous(fields, opts))


def _previous(fields, opts, **kw):
    # (the previous implementation warns of NaN casts and 0/0 that it then discards)
    with np.errstate(invalid="ignore", divide="ignore"):
        old = ref.layout_fields(fields, ref.LayoutOptions(**opts), **kw)
        return old


def _same_layout(fields, new, old):
    for key in ("lateral_field", "lateral_line", "lateral_side", "junction_field",
                "junction_line", "junction_side", "connector_field", "connector_line",
                "connector_side", "unconnected_field", "unconnected_line", "dropped_count"):
        assert_array_equal(getattr(new, key), getattr(old, key), err_msg=key)
    for key in ("bearing", "lateral_length", "dropped_length"):
        assert_allclose(getattr(new, key), getattr(old, key), rtol=0, atol=TOL, err_msg=key)
    for key in ("laterals", "junctions", "connectors", "mains", "outlets", "unconnected"):
        _same_geoms(getattr(new, key), getattr(old, key), key)
    for key in ("insets", "regions", "zones", "features"):
        assert np.all(shapely.equals_exact(getattr(new, key), getattr(old, key), TOL)), key
    assert new.notes == old.notes
    area = np.array([shapely.area(g) if g is not None else 0.0 for g in fields])
    with np.errstate(invalid="ignore"):
        per_o, tot_o = old.quantities(area)
    per_n, tot_n = new.quantities(area)
    assert per_n.keys() == per_o.keys() and tot_n.keys() == tot_o.keys()
    for key in per_o:
        assert per_n[key].dtype.kind == per_o[key].dtype.kind, key
        assert_allclose(per_n[key], per_o[key], rtol=0, atol=TOL, err_msg=key)
        assert_allclose(tot_n[key], tot_o[key], rtol=1e-12, atol=TOL, err_msg=key)


@settings(max_examples=200, deadline=None)
@given(groups=st.lists(st.integers(0, 6), min_size=0, max_size=40),
       keys=st.lists(st.one_of(st.integers(-3, 3).map(float), st.just(float("nan"))),
                     min_size=40, max_size=40))
def test_order_by_group_is_lexsort(groups, keys):
    """The grouped sort used by the scan line and the connectors gives numpy's
    ``lexsort((key, group))`` permutation exactly (ties kept in order, NaN last),
    including groups of one, two and more items."""
    group = np.array(groups, dtype=np.int64)
    key = np.array(keys[:group.size], dtype=float)
    assert_array_equal(order_by_group(group, key), np.lexsort((key, group)))


@st.composite
def _field_sets(draw):
    """One to four star-shaped fields (5-10 vertices, 150-600 m across), side by side."""
    out = []
    for i in range(draw(st.integers(1, 4))):
        k = draw(st.integers(5, 10))
        ang = np.sort(np.array(draw(st.lists(st.floats(0, 2 * np.pi), min_size=k,
                                             max_size=k, unique=True))))
        rad = np.array(draw(st.lists(st.floats(0.6, 1.0), min_size=k, max_size=k)))
        scale = draw(st.floats(150, 600))
        poly = shapely.Polygon(np.c_[np.cos(ang) * rad, np.sin(ang) * rad] * scale
                               + [1500.0 * i, 0.0])
        assume(poly.is_valid and poly.area > 2e4)
        out.append(poly)
    return np.array(out, dtype=object)


@settings(max_examples=PROPERTY_EXAMPLES, deadline=None)
@given(fields=_field_sets(), bearing=st.one_of(st.just("auto"), st.floats(0, 179.9)),
       spacing=st.floats(8, 40), setback=st.floats(0, 12),
       side=st.sampled_from(["auto", "N", "E", "S", "W", "NE", "SW"]),
       pattern=st.sampled_from(["parallel", "parallel", "herringbone"]),
       outlet=st.one_of(st.none(), st.tuples(st.floats(-2000, 6000), st.floats(-2000, 2000))),
       well=st.booleans())
def test_layout_matches_previous_implementation_on_random_fields(
        fields, bearing, spacing, setback, side, pattern, outlet, well):
    opts = dict(spacing=spacing, direction=bearing, setback=setback, main_side=side,
                pattern=pattern, min_length=5.0)
    kw = dict(outlet=outlet)
    if well:
        kw.update(exclusions=[shapely.centroid(fields[0])], exclusion_setbacks=[25.0])
    try:
        new = layout_fields(fields, LayoutOptions(**opts), **kw)
    except InputError:
        with pytest.raises(InputError):
            _previous(fields, opts, **kw)
        return
    _same_layout(fields, new, _previous(fields, opts, **kw))
