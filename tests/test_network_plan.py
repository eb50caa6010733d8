"""The pipe job's geometry built with shapely array calls, against shapely itself and
the per-lateral rule written out here (invented random layouts)."""

import numpy as np
import pytest
import shapely
from shapely.ops import substring

from drainplan.network.design import Carrier
from drainplan.network.plan import _pieces, _runs


def _lines(rng, n):
    out = []
    for i in range(n):
        k = int(rng.integers(2, 12))
        c = np.cumsum(rng.uniform(-50, 50, (k, 2)), axis=0) + rng.uniform(0, 1e5, 2)
        if i % 5 == 0 and k > 3:
            c[2] = c[1]                                   # a repeated vertex
        out.append(shapely.LineString(c))
    return out


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_pieces_are_shapely_substrings(seed):
    # Reference: shapely.ops.substring, one call per stretch; cuts anywhere along the
    # line and exactly at vertex chainages.
    rng = np.random.default_rng(seed)
    rows, ab = [], []
    for g in _lines(rng, 120):
        L = g.length
        cum = [0.0]
        c = g.coords
        for p, q in zip(c[:-1], c[1:]):
            cum.append(cum[-1] + ((q[0] - p[0]) ** 2 + (q[1] - p[1]) ** 2) ** 0.5)
        cuts = np.unique(np.r_[0.0, rng.uniform(0, L, rng.integers(0, 5)), cum[1:-1][:2], L])
        for a, b in zip(cuts[:-1], cuts[1:]):
            if b - a >= 1e-6:
                rows.append(g)
                ab.append((a, b))
    ab = np.array(ab)
    got = _pieces(rows, ab, substring)
    assert len(got) == len(rows) > 200
    for g, (a, b), piece in zip(rows, ab, got):
        assert shapely.equals_exact(piece, substring(g, a, b), 0)


def _runs_one_by_one(lat, con, carriers):
    """The rule per lateral: its pieces and connectors; where it joins, the point of its
    carrier nearest the nearest of their vertices; its far end, the vertex farthest
    from there."""
    out = {}
    for rid in sorted(set(lat["lateral_id"].str.replace(r"\.\d+$", "", regex=True))):
        mine = lat[lat["lateral_id"].str.replace(r"\.\d+$", "", regex=True) == rid]
        geoms = list(mine.geometry) + list(con[con["lateral_id"] == rid].geometry)
        pts = np.vstack([np.asarray(g.coords) for g in geoms])
        to = mine["to_id"].iloc[0]
        if to in carriers:
            line = carriers[to].line
            near = pts[int(np.argmin([line.distance(shapely.Point(p)) for p in pts]))]
            j = np.asarray(line.interpolate(line.project(shapely.Point(near))).coords[0])
        else:
            to, j = None, pts[0]
        far = pts[int(np.argmax(np.hypot(*(pts - j).T)))]
        out[rid] = (to, float(mine["length_m"].sum()),
                    float(sum(g.length for g in con[con["lateral_id"] == rid].geometry)),
                    shapely.LineString([far, j]))
    return out


@pytest.mark.parametrize("seed", [4, 5])
def test_runs_follow_the_rule(seed):
    import geopandas as gpd

    rng = np.random.default_rng(seed)
    mains = {f"F{f}-M": shapely.LineString([(f * 1000.0, 0.0), (f * 1000.0 + 30.0, 400.0),
                                            (f * 1000.0, 800.0)]) for f in range(3)}
    carriers = {k: Carrier(k, "main", k[:-2], g) for k, g in mains.items()}
    rows, cons = [], []
    for i in range(60):
        f = int(rng.integers(0, 4))                 # field 3 has no main
        y = rng.uniform(0, 800)
        x0 = f * 1000.0 + 40.0
        pieces = int(rng.integers(1, 3))
        for p in range(pieces):
            a = x0 + 120.0 * p
            rows.append({"lateral_id": f"L{i}" + (f".{p}" if pieces > 1 else ""),
                         "field_id": f"F{f}", "to_id": f"F{f}-M" if f < 3 else "",
                         "length_m": 100.0, "geometry": shapely.LineString([(a, y),
                                                                           (a + 100.0, y)])})
        if pieces > 1:
            cons.append({"lateral_id": f"L{i}", "geometry": shapely.LineString(
                [(x0 + 100.0, y), (x0 + 120.0, y + 1.0)])})
    lat = gpd.GeoDataFrame(rows, geometry="geometry")
    con = gpd.GeoDataFrame(cons, geometry="geometry")
    expect = _runs_one_by_one(lat, con, carriers)
    got = _runs(lat, con, carriers, 18.0)
    assert [r.run_id for r in got] == sorted(expect)
    for r in got:
        to, perf, conn, line = expect[r.run_id]
        assert r.to == to
        assert r.perforated_length == pytest.approx(perf, abs=1e-9)
        assert r.connector_length == pytest.approx(conn, abs=1e-9)
        assert shapely.equals_exact(r.line, line, 1e-9)
