"""Routing of the network's solid pipes: sub-mains and the trunk.

Shapely geometries in metres (the layout's working CRS), no files.

* **Sub-mains** collect the lateral pieces that cannot reach their field's main
  along their own line (beyond a hole, a pond, a farmstead, a concave bend).
  Each piece, nearest first, is joined from the end that faces the main to the
  nearest point of the network already built (the main or an earlier sub-main)
  by the shortest path inside the field that avoids the exclusion features;
  the path keeps clear of the exclusion setback zones where it can, and crosses
  them as solid pipe only where it must (and where crossing is allowed). Later
  pieces join the earlier sub-mains, so the sub-mains grow as a tree hugging the
  obstacle.
* **The trunk** joins the downstream ends of several fields' mains to one
  outlet point. It follows the field boundaries (headlands): a graph of the
  fields' boundary edges, links between nearby corners of neighbouring fields
  and links to the outlet point, with stretches through a field's interior
  costing three times their length and no link crossing an exclusion. One
  shortest-path tree from the outlet point (scipy's Dijkstra) gives every
  field's route; routes merge where they meet, so the trunk is one tree. With
  several outlet points each field drains to the nearest one it can reach.

Limits: shortest paths are straight between polygon corners, so a sub-main
may run along the field boundary or an exclusion's setback line; the trunk is
a shortest-path tree (not the shortest network joining all fields); routes
never leave the area spanned by the fields and the outlet points by more than
the links between corners.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["SubMains", "Trunk", "route_submains", "route_trunk", "shortest_path_in"]

_TOL = 1e-3         # m
_INTERIOR_COST = 3.0
_MAX_NODES = 600


@dataclass
class SubMains:
    """Sub-mains of one layout (per item: geometry upstream -> downstream)."""

    lines: list = field(default_factory=list)        # LineString, start -> join point
    field_of: list = field(default_factory=list)     # field index
    to: list = field(default_factory=list)           # ("main", f) or ("sub", k)
    piece: list = field(default_factory=list)        # index of the piece it serves
    served: np.ndarray = None                        # per piece: sub-main index or -1
    reason: list = field(default_factory=list)       # per piece: why it stays unconnected
    direct: dict = field(default_factory=dict)       # piece -> ("main", f) or ("sub", k)
    #                                                  it touches (no sub-main needed)


def _area_nodes(area, max_nodes=_MAX_NODES):
    """Corner points of a (multi)polygon, simplified until there are few enough."""
    import shapely

    tol = 0.0
    while True:
        g = shapely.simplify(area, tol, preserve_topology=True) if tol else area
        rings = shapely.get_rings(shapely.get_parts(g)) if not shapely.is_empty(g) else []
        pts = [np.asarray(r.coords)[:-1] for r in rings]
        xy = np.vstack(pts) if pts else np.empty((0, 2))
        if len(xy) <= max_nodes:
            return xy
        tol = max(2 * tol, 0.5)


class _Visibility:
    """Visibility graph of an area's corners (for repeated shortest paths)."""

    def __init__(self, area):
        import shapely

        self.area = area
        self.cover = shapely.buffer(area, _TOL)
        shapely.prepare(self.cover)
        self.xy = _area_nodes(area)
        n = len(self.xy)
        i, j = np.triu_indices(n, 1)
        seg = shapely.linestrings(np.stack([self.xy[i], self.xy[j]], axis=1)) if i.size \
            else np.empty(0, dtype=object)
        ok = shapely.covered_by(seg, self.cover) if i.size else np.zeros(0, bool)
        self.i, self.j = i[ok], j[ok]
        self.w = np.hypot(*(self.xy[self.i] - self.xy[self.j]).T)
        self._index()

    def _index(self):
        """The corner links in both directions, placed for :meth:`_graph`.

        The links in both directions as compressed rows, for a directed search that
        scans each node's links in the order the undirected search scans them: its
        links to later nodes (as triu_indices gives them), then those from earlier
        nodes (the start, node 0, first; then corners in ascending order)."""
        n = len(self.xy)
        ii, jj = self.i + 1, self.j + 1
        self._fwd = np.bincount(ii, minlength=n + 1)            # per row
        self._rev = np.bincount(jj, minlength=n + 1)
        o = np.lexsort((ii, jj))                               # reverse links by row
        self._row = np.concatenate((ii, jj[o]))
        self._col = np.concatenate((jj, ii[o]))
        self._w = np.concatenate((self.w, self.w[o]))
        self._is_rev = np.concatenate((np.zeros(len(ii), bool), np.ones(len(ii), bool)))
        first = np.concatenate(([0], np.cumsum(self._fwd)[:-1]))
        rfirst = np.concatenate(([0], np.cumsum(self._rev)[:-1]))
        self._off = np.concatenate((np.arange(len(ii)) - first[ii],
                                    np.arange(len(ii)) - rfirst[jj[o]]))

    def _graph(self, cols0, w0):
        """The search graph with the start (node 0) linked to the corners ``cols0``
        (ascending) at weights ``w0``: compressed rows, row 0 the start's links; row u
        its links to later corners, the start's link to it, links from earlier corners
        (the undirected search's scanning order, so the same paths on ties)."""
        from scipy.sparse import csr_matrix

        n = len(self.xy)
        s = np.zeros(n + 1, np.int64)
        s[cols0 + 1] = 1
        count = self._fwd + s + self._rev
        count[0] = len(cols0)
        indptr = np.concatenate(([0], np.cumsum(count)))
        indices = np.empty(indptr[-1], np.int64)
        data = np.empty(indptr[-1])
        at = indptr[self._row] + self._off + np.where(self._is_rev, self._fwd[self._row] +
                                                      s[self._row], 0)
        indices[at] = self._col
        data[at] = np.maximum(self._w, 1e-9)
        indices[:len(cols0)] = cols0 + 1
        data[:len(cols0)] = w0
        back = indptr[cols0 + 1] + self._fwd[cols0 + 1]
        indices[back] = 0
        data[back] = w0
        return csr_matrix((data, indices, indptr), shape=(n + 1, n + 1))

    def path(self, start, targets):
        """Shortest path from ``start`` (x, y) to the nearest visible point of
        ``targets`` (a line geometry) inside the area; LineString or None."""
        import shapely
        from scipy.sparse.csgraph import dijkstra

        start = np.asarray(start, float)
        n = len(self.xy)
        nodes = np.vstack([start[None, :], self.xy])          # node 0 is the start
        pts = shapely.points(nodes)
        # sight lines to every corner and each node's nearest point of the targets,
        # checked against the area in one call
        links = shapely.shortest_line(pts, targets)
        if n:
            to_node = shapely.linestrings(np.stack([np.broadcast_to(start, self.xy.shape),
                                                    self.xy], axis=1))
            inside = shapely.covered_by(np.concatenate((to_node, links)), self.cover)
            sees, reach = inside[:n], inside[n:]
        else:
            sees, reach = np.zeros(0, bool), shapely.covered_by(links, self.cover)
        cost_t = np.where(reach, shapely.length(links), np.inf)
        cols0 = np.flatnonzero(sees)
        w0 = np.maximum(np.hypot(*(self.xy[cols0] - start).T), 1e-9)
        g = self._graph(cols0, w0)
        dist, pred = dijkstra(g, directed=True, indices=0, return_predecessors=True)
        total = dist + cost_t
        k = int(np.argmin(total))
        if not np.isfinite(total[k]):
            return None
        chain = [k]
        while chain[-1] != 0:
            chain.append(int(pred[chain[-1]]))
        coords = [nodes[c] for c in chain[::-1]]
        end = np.asarray(links[k].coords)[-1]
        coords.append(end)
        coords = np.array(coords)
        keep = np.concatenate(([True], np.hypot(*np.diff(coords, axis=0).T) > _TOL))
        coords = coords[keep]
        if len(coords) < 2:
            return shapely.LineString([start, end]) if np.hypot(*(end - start)) > 0 else None
        return shapely.LineString(coords)


def shortest_path_in(area, start, targets):
    """Shortest path inside ``area`` from the point ``start`` to the nearest point of
    ``targets`` (straight between the area's corners), or None if none exists.

    Examples
    --------
    >>> import shapely
    >>> field = shapely.box(0, 0, 100, 100).difference(shapely.box(40, 0, 60, 80))
    >>> p = shortest_path_in(field, (80, 10), shapely.LineString([(0, 0), (0, 100)]))
    >>> round(p.length, 1)        # over the wall's top corners (60, 80) and (40, 80)
    132.8
    """
    return _Visibility(area).path(start, targets)


def route_submains(pieces, piece_field, fields, mains, zones, features, *,
                   cross_setbacks=True):
    """Sub-mains for lateral pieces that cannot reach their field's main.

    Parameters
    ----------
    pieces : array of LineString
        The unconnected lateral pieces.
    piece_field : array of int
        Field index of each piece.
    fields, mains, zones, features : arrays per field
        Field polygons, mains (LineString or None), exclusion setback zones and
        the exclusion features themselves.
    cross_setbacks : bool
        Let a sub-main cross a setback zone (never a feature) where no route
        around it exists.

    Returns
    -------
    SubMains
        ``served[i]`` is the sub-main that collects piece ``i`` (-1 if none, -2
        where the piece touches the main or a sub-main and joins it directly),
        ``reason[i]`` why a piece stays unconnected.
    """
    import shapely

    out = SubMains()
    m = len(pieces)
    out.served = np.full(m, -1, int)
    out.reason = [""] * m
    if m == 0:
        return out
    piece_field = np.asarray(piece_field, int)
    order = np.argsort(piece_field, kind="stable")
    bounds = np.flatnonzero(np.r_[True, np.diff(piece_field[order]) != 0, True])
    for a, b in zip(bounds[:-1], bounds[1:]):
        idx = order[a:b]
        f = int(piece_field[idx[0]])
        main = mains[f]
        if main is None:
            for i in idx:
                out.reason[i] = "its field has no main to join"
            continue
        feat = features[f]
        base = fields[f] if shapely.is_empty(feat) else shapely.difference(fields[f], feat)
        graphs = [("clear", shapely.difference(base, zones[f])
                   if not shapely.is_empty(zones[f]) else base)]
        if cross_setbacks and not shapely.is_empty(zones[f]):
            graphs.append(("cross", base))
        vis = {}
        # near end of each piece: the end nearer the main
        ends = np.stack([shapely.get_coordinates(pieces[i])[[0, -1]] for i in idx])
        dmain = shapely.distance(shapely.points(ends.reshape(-1, 2)), main).reshape(-1, 2)
        near = ends[np.arange(len(idx)), np.argmin(dmain, axis=1)]
        first = np.argsort(dmain.min(axis=1), kind="stable")
        network = [main]
        owner = [("main", f)]
        for k in first:
            i = idx[k]
            d0 = shapely.distance(shapely.Point(near[k]), np.array(network, dtype=object))
            if d0.min() < 0.01:             # it already touches the network
                out.direct[int(i)] = owner[int(np.argmin(d0))]
                out.served[i] = -2
                continue
            target = shapely.multilinestrings(network) if len(network) > 1 else network[0]
            path = None
            for name, area in graphs:
                if shapely.is_empty(area):
                    continue
                if name not in vis:
                    vis[name] = _Visibility(area)
                path = vis[name].path(near[k], target)
                if path is not None:
                    break
            if path is not None and path.length < 0.01:
                out.direct[int(i)] = owner[int(np.argmin(d0))]
                out.served[i] = -2
                continue
            if path is None:
                out.reason[i] = ("no route to the main inside the field clear of the "
                                 "exclusions" + ("" if cross_setbacks else
                                                 " and their setbacks"))
                continue
            end = shapely.Point(np.asarray(path.coords)[-1])
            d = shapely.distance(end, np.array(network, dtype=object))
            to = owner[int(np.argmin(d))]
            out.served[i] = len(out.lines)
            out.lines.append(path)
            out.field_of.append(f)
            out.to.append(to)
            out.piece.append(int(i))
            network.append(path)
            owner.append(("sub", len(out.lines) - 1))
    return out


@dataclass
class Trunk:
    """The trunk: segments (upstream -> downstream) and where each main drains.

    ``to`` of a segment and ``main_to`` of a field are ("trunk", segment),
    ("main", field) (the trunk enters another field's main, which carries the water
    on) or ("outlet", outlet point); None for a field without a route.
    """

    lines: list = field(default_factory=list)        # LineString per segment
    to: list = field(default_factory=list)
    outlet: list = field(default_factory=list)       # outlet point index per segment
    main_to: list = None                             # per field
    main_outlet: np.ndarray = None                   # per field: outlet index, -1 none
    unreached: list = field(default_factory=list)    # field indices that found no route


def route_trunk(fields, main_ends, outlets, exclusions=None, *, mains=None, k_links=6):
    """Join the downstream ends of the fields' mains to the outlet point(s).

    Parameters
    ----------
    fields : array of (Multi)Polygon or None
    main_ends : array of (x, y) or None
        Downstream end of each field's system (None: the field has no main).
    outlets : (n, 2) array
        Outlet points.
    exclusions : geometry, optional
        Union of the exclusion features; no trunk link crosses them.
    mains : array of LineString or None, optional
        The fields' mains, upstream to downstream. A route may enter a main and
        follow it downstream (the main then carries the water on, rather than a
        trunk being laid beside it); it never leaves a main except at its end.

    Returns
    -------
    Trunk
    """
    import shapely
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import dijkstra
    from scipy.spatial import cKDTree

    n_f = len(fields)
    outlets = np.asarray(outlets, float).reshape(-1, 2)
    res = Trunk(main_to=[None] * n_f, main_outlet=np.full(n_f, -1, int))
    have = [f for f in range(n_f) if fields[f] is not None and main_ends[f] is not None]
    if not have or outlets.size == 0:
        return res
    n_o = len(outlets)
    # nodes: outlets, system ends, the fields' boundary corners, the mains' vertices
    ring_xy, ring_f, ring_edges = [], [], []
    base = n_o + n_f
    n_ring = 0                                       # corners so far
    for f in range(n_f):
        g = fields[f]
        if g is None:
            continue
        g = shapely.simplify(g, 0.5, preserve_topology=True)
        for r in shapely.get_rings(shapely.get_parts(g)):
            c = np.asarray(r.coords)[:-1]
            k0 = base + n_ring
            n_ring += len(c)
            ring_xy.append(c)
            ring_f.append(np.full(len(c), f))
            ids = k0 + np.arange(len(c))
            ring_edges.append(np.stack([ids, np.roll(ids, -1)], axis=1))
    corners = np.vstack(ring_xy)
    corner_f = np.concatenate(ring_f)
    mbase = base + len(corners)
    m_xy, m_f, m_edges, main_in = [], [], [], []     # main_in: corner -> main vertex
    tree = cKDTree(corners)
    k = min(k_links, len(corners))
    n_mv = 0                                         # main vertices so far
    if mains is not None:
        for f in have:
            m = mains[f]
            if m is None:
                continue
            c = np.asarray(m.coords)
            k0 = mbase + n_mv
            n_mv += len(c)
            m_xy.append(c)
            m_f.append(np.full(len(c), f))
            ids = k0 + np.arange(len(c))
            m_edges.append(np.stack([ids[:-1], ids[1:]], axis=1))       # downstream only
            m_edges.append(np.array([[ids[-1], n_o + f]]))                # to the system end
            _, nn = tree.query(c, k=k)
            nn = np.atleast_2d(nn)
            main_in.append(np.stack([base + nn.ravel(), np.repeat(ids, nn.shape[1])], axis=1))
    mverts = np.vstack(m_xy) if m_xy else np.empty((0, 2))
    mvert_f = np.concatenate(m_f) if m_f else np.empty(0, int)
    ends = np.array([main_ends[f] if main_ends[f] is not None else (np.nan, np.nan)
                     for f in range(n_f)], float)
    xy = np.vstack([outlets, ends, corners, mverts])
    node_f = np.r_[np.full(n_o, -1), np.arange(n_f), corner_f, mvert_f]
    both = [np.vstack(ring_edges)]
    fe = np.array(have)
    # each system end to the nearest corners of its own field
    _, nn = tree.query(ends[fe], k=min(len(corners), 2 * k))
    nn = np.atleast_2d(nn)
    cand = np.stack([np.repeat(n_o + fe, nn.shape[1]), base + nn.ravel()], axis=1)
    both.append(cand[node_f[cand[:, 1]] == node_f[cand[:, 0]]])
    # corners to the nearest corners of other fields
    _, nn = tree.query(corners, k=min(len(corners), k + 4))
    nn = np.atleast_2d(nn)
    src = np.repeat(np.arange(len(corners)), nn.shape[1])
    cand = np.stack([base + src, base + nn.ravel()], axis=1)
    both.append(cand[corner_f[src] != corner_f[nn.ravel()]])
    # outlets to their nearest corners and system ends (a few each: linear in fields)
    _, nn = tree.query(outlets, k=min(len(corners), 3 * k))
    nn = np.atleast_2d(nn).reshape(n_o, -1)
    both.append(np.stack([np.repeat(np.arange(n_o), nn.shape[1]), base + nn.ravel()], axis=1))
    _, ne = cKDTree(ends[fe]).query(outlets, k=min(len(fe), k))
    ne = np.atleast_2d(ne).reshape(n_o, -1)
    both.append(np.stack([np.repeat(np.arange(n_o), ne.shape[1]), n_o + fe[ne.ravel()]],
                         axis=1))
    both = np.vstack(both)
    both = both[both[:, 0] != both[:, 1]]
    both = np.unique(np.sort(both, axis=1), axis=0)
    one = np.vstack(m_edges + main_in) if m_edges else np.empty((0, 2), int)
    # directed links a -> b (the way the water flows)
    e = np.vstack([both, both[:, ::-1], one])
    along_main = np.r_[np.zeros(2 * len(both), bool),
                       np.ones(len(one), bool)] if len(one) else np.zeros(len(e), bool)
    seg = shapely.linestrings(np.stack([xy[e[:, 0]], xy[e[:, 1]]], axis=1))
    length = shapely.length(seg)
    ok = np.ones(len(e), bool)
    if exclusions is not None and not shapely.is_empty(exclusions):
        ok &= ~shapely.intersects(seg, exclusions)
    # stretches through a field's interior cost more than along its edges; following
    # an existing main costs half (the main is there and is only enlarged). A link and
    # its reverse (the first 2 x len(both) links) share one computation; links along a
    # main need none.
    is_main_edge = along_main & (node_f[e[:, 0]] == node_f[e[:, 1]]) & (e[:, 0] >= mbase)
    interiors = np.array([shapely.buffer(g, -2.0) if g is not None else shapely.Polygon()
                          for g in fields], dtype=object)
    itree = shapely.STRtree(interiors)
    nb = len(both)
    once = np.r_[np.arange(nb), np.arange(2 * nb, len(e))]
    once = once[~is_main_edge[once]]
    pairs = itree.query(seg[once], predicate="intersects")
    inside_once = np.zeros(len(once))
    if pairs.size:
        np.add.at(inside_once, pairs[0], shapely.length(shapely.intersection(
            seg[once[pairs[0]]], interiors[pairs[1]])))
    inside = np.zeros(len(e))
    inside[once] = inside_once
    inside[nb:2 * nb] = inside[:nb]
    w = np.where(is_main_edge, 0.5 * length, length + (_INTERIOR_COST - 1.0) * inside)
    w = np.maximum(w, 1e-9)
    e, w = e[ok], w[ok]
    n = len(xy)
    # distances to the outlets: Dijkstra from them on the reversed links
    g = coo_matrix((w, (e[:, 1], e[:, 0])), shape=(n, n)).tocsr()
    dist, pred, srcs = dijkstra(g, directed=True, indices=np.arange(n_o),
                                return_predecessors=True, min_only=True)
    is_mvert = lambda x: x >= mbase  # noqa: E731
    parent = {}
    starts = []
    for f in have:
        node = n_o + f
        if not np.isfinite(dist[node]):
            res.unreached.append(f)
            continue
        starts.append((f, node))
        while node >= n_o and node not in parent:
            nxt = int(pred[node])
            parent[node] = nxt
            if is_mvert(nxt):      # entering a main: it carries the water from here
                break
            node = nxt
    if not starts:
        return res
    children = {}
    for c, p in parent.items():
        children[p] = children.get(p, 0) + 1
    ends_set = {node for _, node in starts}

    def boundary(x):
        return x < n_o or is_mvert(x) or x in ends_set or children.get(x, 0) != 1

    seg_of, chains = {}, []
    todo = sorted(ends_set | {x for x in parent if children.get(x, 0) > 1 and
                              not is_mvert(x)})
    for s0 in todo:
        if s0 not in parent:
            continue
        chain = [s0]
        node = s0
        while True:
            nxt = parent[node]
            chain.append(nxt)
            if boundary(nxt):
                break
            node = nxt
        seg_of[s0] = len(chains)
        chains.append(chain)

    def target(last):
        if last < n_o:
            return ("outlet", int(last))
        if is_mvert(last):
            return ("main", int(node_f[last]))
        return ("trunk", seg_of[last])

    lines, to, outl = [], [], []
    for chain in chains:
        coords = xy[chain]
        keep = np.r_[True, np.hypot(*np.diff(coords, axis=0).T) > _TOL]
        coords = coords[keep]
        lines.append(shapely.LineString(coords) if len(coords) > 1 else None)
        to.append(target(chain[-1]))
        outl.append(int(srcs[chain[0]]))
    # a segment of no length (a main ending at the outlet) passes on to its next one
    def resolve(t):
        while t[0] == "trunk" and lines[t[1]] is None:
            t = to[t[1]]
        return t

    keep = [i for i in range(len(lines)) if lines[i] is not None]
    new_index = {old: j for j, old in enumerate(keep)}

    def remap(t):
        t = resolve(t)
        return ("trunk", new_index[t[1]]) if t[0] == "trunk" else t

    res.lines = [lines[i] for i in keep]
    res.to = [remap(to[i]) for i in keep]
    res.outlet = [outl[i] for i in keep]
    for f, node in starts:
        res.main_to[f] = remap(("trunk", seg_of[node])) if node in seg_of else None
        res.main_outlet[f] = int(srcs[node])
    return res
