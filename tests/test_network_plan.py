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


def _path_undirected(vis, start, targets):
    """The shortest path as scipy's undirected Dijkstra finds it on the graph built from
    (row, column) pairs: the straightforward construction the routing must match, ties
    included."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import dijkstra

    start = np.asarray(start, float)
    n = len(vis.xy)
    nodes = np.vstack([start[None, :], vis.xy])
    to_node = shapely.linestrings(np.stack([np.broadcast_to(start, vis.xy.shape), vis.xy],
                                           axis=1))
    sees = shapely.covered_by(to_node, vis.cover)
    links = shapely.shortest_line(shapely.points(nodes), targets)
    cost_t = np.where(shapely.covered_by(links, vis.cover), shapely.length(links), np.inf)
    rows = np.r_[np.zeros(int(sees.sum()), int), vis.i + 1]
    cols = np.r_[np.flatnonzero(sees) + 1, vis.j + 1]
    w = np.r_[np.hypot(*(vis.xy[sees] - start).T), vis.w]
    g = coo_matrix((np.maximum(w, 1e-9), (rows, cols)), shape=(n + 1, n + 1)).tocsr()
    dist, pred = dijkstra(g, directed=False, indices=0, return_predecessors=True)
    total = dist + cost_t
    k = int(np.argmin(total))
    if not np.isfinite(total[k]):
        return None
    chain = [k]
    while chain[-1] != 0:
        chain.append(int(pred[chain[-1]]))
    coords = np.array([nodes[c] for c in chain[::-1]] + [np.asarray(links[k].coords)[-1]])
    keep = np.r_[True, np.hypot(*np.diff(coords, axis=0).T) > 1e-3]
    return coords[keep]


@pytest.mark.parametrize("seed", [6, 7])
def test_visibility_paths_match_the_undirected_search(seed):
    # Grid-aligned fields with square holes: many corners in line and paths of equal
    # length, where only the search's scanning order decides.
    from drainplan.network.routing import _Visibility

    rng = np.random.default_rng(seed)
    checked = 0
    for _ in range(6):
        field = shapely.box(0, 0, 100, 100)
        for _ in range(int(rng.integers(1, 5))):
            x, y = rng.integers(10, 80, 2)
            field = field.difference(shapely.box(x, y, x + 10, y + 10))
        vis = _Visibility(field)
        target = shapely.LineString([(0, 0), (0, 100)])
        for _ in range(10):
            p = tuple(float(v) for v in rng.integers(1, 99, 2))
            if not shapely.covers(field, shapely.Point(p)):
                continue
            got = vis.path(p, target)
            ref = _path_undirected(vis, p, target)
            if ref is None:
                assert got is None
                continue
            if len(ref) < 2:
                continue
            assert np.array_equal(shapely.get_coordinates(got), ref)
            checked += 1
    assert checked > 20


@pytest.mark.parametrize("seed", [8, 9])
def test_search_graph_scans_like_the_undirected_search(seed):
    # Whole-number weights: many paths of equal length. The directed search on the
    # routing's graph must give the distances and predecessors of scipy's undirected
    # search on the graph built from (row, column) pairs.
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import dijkstra

    from drainplan.network.routing import _Visibility

    rng = np.random.default_rng(seed)
    for _ in range(300):
        n = int(rng.integers(2, 20))
        vis = _Visibility.__new__(_Visibility)
        vis.xy = np.zeros((n, 2))
        i, j = np.triu_indices(n, 1)
        keep = rng.random(len(i)) < rng.uniform(0.2, 1.0)
        vis.i, vis.j = i[keep], j[keep]
        vis.w = rng.integers(1, 4, keep.sum()).astype(float)
        vis._index()
        cols0 = np.flatnonzero(rng.random(n) < 0.4)
        w0 = rng.integers(1, 4, len(cols0)).astype(float)
        rows = np.r_[np.zeros(len(cols0), int), vis.i + 1]
        cols = np.r_[cols0 + 1, vis.j + 1]
        ref = coo_matrix((np.r_[w0, vis.w], (rows, cols)), shape=(n + 1, n + 1)).tocsr()
        d0, p0 = dijkstra(ref, directed=False, indices=0, return_predecessors=True)
        d1, p1 = dijkstra(vis._graph(cols0, w0), directed=True, indices=0,
                          return_predecessors=True)
        assert np.array_equal(d0, d1) and np.array_equal(p0, p1)
