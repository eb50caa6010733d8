"""What a checker measures on a drawn drainage proposal: local spacings, strips, joins.

A proposal drawn as lines (a contractor's plan, or a GPS survey of an installed
system) is checked lateral by lateral. This module measures, in metres and
without any CRS, what a checker would measure by hand on the plan:

* each lateral's field (the field holding most of its length);
* its local spacing on each side: the perpendicular distance to the nearest
  roughly parallel lateral of the same field, measured at stations along it
  and summarised by the median;
* the strip of ground it drains: half the local spacing on each side,
  clipped to its field;
* which main each lateral joins, and how the mains join each other down to
  an outlet.

Edge laterals (no neighbour on one side inside the field) take the spacing
of their one neighbour on that side too (their strip towards the field edge
is half that spacing wide), and their distance to the field edge is reported
so a reviewer can see an undrained margin. A lateral alone in its field takes
twice its larger distance to the field edge as its spacing. A lateral at an angle
(across the other side of a herringbone main) is no neighbour but bounds the
ground like the field edge.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import shapely

__all__ = ["LateralGeometry", "MainNetwork", "assign_fields", "measure_laterals",
           "join_network", "line_direction"]


def line_direction(lines):
    """Unit vector from the first to the last vertex of each line (n, 2)."""
    first = shapely.get_coordinates(shapely.get_point(lines, 0))
    last = shapely.get_coordinates(shapely.get_point(lines, -1))
    d = last - first
    n = np.hypot(d[:, 0], d[:, 1])
    return d / np.where(n > 0, n, 1.0)[:, None]


def assign_fields(lines, fields):
    """Index of the field holding the largest share of each line's length (-1: none).

    Examples
    --------
    >>> f = np.array([shapely.box(0, 0, 10, 10), shapely.box(10, 0, 20, 10)])
    >>> ln = np.array([shapely.LineString([(1, 5), (12, 5)]),
    ...                shapely.LineString([(30, 5), (40, 5)])])
    >>> assign_fields(ln, f).tolist()
    [0, -1]
    """
    lines = np.asarray(lines, dtype=object)
    out = np.full(lines.size, -1, dtype=int)
    if lines.size == 0 or len(fields) == 0:
        return out
    fields = np.asarray(fields, dtype=object)
    tree = shapely.STRtree(fields)
    li, fi = tree.query(lines, predicate="intersects")
    if li.size == 0:
        return out
    share = shapely.length(shapely.intersection(lines[li], fields[fi]))
    best = np.full(lines.size, 0.0)
    for a, b, s in zip(li, fi, share):
        if s > best[a]:
            best[a], out[a] = s, b
    return out


@dataclass
class LateralGeometry:
    """Measurements of drawn laterals (arrays, one entry per lateral; metres).

    Attributes
    ----------
    field : ndarray of int
        Field index (-1: outside every field).
    length : ndarray
    spacing_left, spacing_right : ndarray
        Median perpendicular distance to the nearest parallel lateral on each
        side (left of the drawn direction first); NaN where there is none.
    edge_left, edge_right : ndarray
        Median distance to the field edge on each side.
    local_spacing : ndarray
        The spacing that governs the lateral: the wider of its two sides (an
        edge side counts as its other side; a lone lateral twice its larger
        distance to the field edge).
    side_spacing : ndarray (n, 2)
        Spacing used for each side's half strip (left, right).
    strip_left, strip_right : ndarray of Polygon
        Half strips, clipped to the field.
    edge : ndarray of bool
        Lateral with no neighbour on at least one side.
    """

    field: np.ndarray
    length: np.ndarray
    spacing_left: np.ndarray
    spacing_right: np.ndarray
    edge_left: np.ndarray
    edge_right: np.ndarray
    local_spacing: np.ndarray
    side_spacing: np.ndarray
    strip_left: np.ndarray
    strip_right: np.ndarray
    edge: np.ndarray

    @property
    def strip_area(self):
        """Area of ground each lateral drains [m2] (both half strips)."""
        return shapely.area(self.strip_left) + shapely.area(self.strip_right)


def _stations(lines, step):
    """Points, unit normals (left of the drawn direction) and owners along each line."""
    pts, nrm, own = [], [], []
    length = shapely.length(lines)
    for i, (g, L) in enumerate(zip(lines, length)):
        n = int(np.clip(np.ceil(L / step), 3, 60))
        s = (np.arange(n) + 0.5) / n * L
        delta = min(0.5, L / (4 * n))
        a = shapely.get_coordinates(shapely.line_interpolate_point(g, np.maximum(s - delta, 0)))
        b = shapely.get_coordinates(shapely.line_interpolate_point(g, np.minimum(s + delta, L)))
        t = b - a
        t /= np.maximum(np.hypot(t[:, 0], t[:, 1]), 1e-12)[:, None]
        pts.append((a + b) / 2.0)
        nrm.append(np.c_[-t[:, 1], t[:, 0]])
        own.append(np.full(n, i))
    return np.concatenate(pts), np.concatenate(nrm), np.concatenate(own)


def _segments(geoms):
    """Straight segments (a, b, owner index) of line or polygon-boundary geometries."""
    parts, pidx = shapely.get_parts(geoms, return_index=True)
    xy, ci = shapely.get_coordinates(parts, return_index=True)
    same = ci[1:] == ci[:-1]
    return xy[:-1][same], xy[1:][same], pidx[ci[:-1][same]]


def _ray_hits_once(P, N, owner, tree, seg, target_ok, reach):
    """Signed distances along the normal to the nearest segment hit on each side.

    Solves P + t N = A + u (B - A) for every (ray, segment) pair whose boxes meet:
    t = ((A - P) x (B - A)) / (N x (B - A)), u = ((A - P) x N) / (N x (B - A)).
    """
    a, b, seg_owner = seg
    left = np.full(len(P), np.inf)
    right = np.full(len(P), np.inf)
    boxes = shapely.box(*np.c_[np.minimum(P - N * reach, P + N * reach),
                               np.maximum(P - N * reach, P + N * reach)].T)
    ri, si = tree.query(boxes)
    keep = target_ok(owner[ri], seg_owner[si])
    ri, si = ri[keep], si[keep]
    if ri.size == 0:
        return left, right
    d = b[si] - a[si]
    ap = a[si] - P[ri]
    n = N[ri]
    den = n[:, 0] * d[:, 1] - n[:, 1] * d[:, 0]
    ok = np.abs(den) > 1e-12
    with np.errstate(divide="ignore", invalid="ignore"):
        t = (ap[:, 0] * d[:, 1] - ap[:, 1] * d[:, 0]) / den
        u = (ap[:, 0] * n[:, 1] - ap[:, 1] * n[:, 0]) / den
    ok &= (u >= -1e-9) & (u <= 1 + 1e-9) & (np.abs(t) <= reach)
    r, t = ri[ok], t[ok]
    pos = t > 1e-6
    np.minimum.at(left, r[pos], t[pos])
    neg = t < -1e-6
    np.minimum.at(right, r[neg], -t[neg])
    return left, right


def _ray_hits(P, N, owner, targets, target_ok, reach):
    """Nearest hit on each side of every station ray: (left distance, right distance).

    Rays start short and only those that found nothing on a side are cast again
    longer (up to ``reach``), so a dense proposal costs few intersections.
    """
    left = np.full(len(P), np.inf)
    right = np.full(len(P), np.inf)
    if len(targets) == 0 or len(P) == 0:
        return left, right
    seg = _segments(np.asarray(targets, dtype=object))
    if seg[0].shape[0] == 0:
        return left, right
    tree = shapely.STRtree(shapely.linestrings(np.stack([seg[0], seg[1]], axis=1)))
    todo = np.arange(len(P))
    r = min(60.0, reach)
    while todo.size:
        lf, rt = _ray_hits_once(P[todo], N[todo], owner[todo], tree, seg, target_ok, r)
        left[todo] = np.minimum(left[todo], lf)
        right[todo] = np.minimum(right[todo], rt)
        if r >= reach:
            break
        todo = todo[~(np.isfinite(left[todo]) & np.isfinite(right[todo]))]
        r = min(4.0 * r, reach)
    return left, right


def _side_median(values, owner, n):
    """Median of the finite values of each owner (owners are sorted)."""
    out = np.full(n, np.nan)
    cuts = np.searchsorted(owner, np.arange(n + 1))
    for i in range(n):
        v = values[cuts[i]:cuts[i + 1]]
        v = v[np.isfinite(v)]
        if v.size:
            out[i] = float(np.median(v))
    return out


def measure_laterals(laterals, fields, *, regions=None, step=5.0, reach=1000.0,
                     parallel_tolerance=30.0):
    """Local spacing on each side, drained strips and field of every lateral.

    Parameters
    ----------
    laterals : array of LineString
        Laterals in metres.
    fields : array of Polygon
        Field boundaries in the same metres.
    regions : array of Polygon, optional
        The drainable ground of each field (the field less its exclusion
        zones), one per field; default the fields. Neighbours are looked for
        and strips kept inside it, so a lateral across a farmstead is no
        neighbour.
    step : float
        Distance between measuring stations along a lateral [m].
    reach : float
        Farthest neighbour looked for [m].
    parallel_tolerance : float
        Laterals whose directions differ by more than this [degrees] are not
        neighbours (a herringbone's other side, a cross lateral).

    Returns
    -------
    LateralGeometry

    Examples
    --------
    >>> field = np.array([shapely.box(0, 0, 100, 60)])
    >>> lats = np.array([shapely.LineString([(0, y), (100, y)]) for y in (10, 30, 50)])
    >>> g = measure_laterals(lats, field)
    >>> g.local_spacing.tolist(), g.strip_area.round().tolist()
    ([20.0, 20.0, 20.0], [2000.0, 2000.0, 2000.0])
    """
    lats = np.asarray(laterals, dtype=object)
    fields = np.asarray(fields, dtype=object)
    n = lats.size
    fld = assign_fields(lats, fields)
    length = shapely.length(lats) if n else np.zeros(0)
    if n == 0:
        e = np.zeros(0)
        return LateralGeometry(fld, e, e, e, e, e, e, np.zeros((0, 2)),
                               np.zeros(0, object), np.zeros(0, object), np.zeros(0, bool))
    P, N, own = _stations(lats, step)
    dirs = line_direction(lats)
    cos_tol = np.cos(np.radians(parallel_tolerance))

    def neighbour_ok(o, t):
        return (t != o) & (fld[t] == fld[o]) & (fld[o] >= 0) & (
            np.abs(np.einsum("ij,ij->i", dirs[o], dirs[t])) >= cos_tol)

    left, right = _ray_hits(P, N, own, lats, neighbour_ok, reach)
    sl = _side_median(np.where(np.isfinite(left), left, np.nan), own, n)
    sr = _side_median(np.where(np.isfinite(right), right, np.nan), own, n)
    regions = fields if regions is None else np.asarray(regions, dtype=object)
    bounds = shapely.boundary(regions) if regions.size else np.zeros(0, object)
    el, er = _ray_hits(P, N, own, bounds, lambda o, t: fld[o] == t, reach)

    def crossing_ok(o, t):
        return (t != o) & (fld[t] == fld[o]) & (fld[o] >= 0) & (
            np.abs(np.einsum("ij,ij->i", dirs[o], dirs[t])) < cos_tol)

    # a lateral at an angle (the other side of a herringbone main) bounds the ground
    # this one drains, as the field edge does
    cl, cr = _ray_hits(P, N, own, lats, crossing_ok, reach)
    el, er = np.minimum(el, cl), np.minimum(er, cr)
    edge_l = _side_median(np.where(np.isfinite(el), el, np.nan), own, n)
    edge_r = _side_median(np.where(np.isfinite(er), er, np.nan), own, n)
    # a neighbour beyond the field edge is no neighbour
    sl = np.where(sl > np.nan_to_num(edge_l, nan=np.inf) + 1e-6, np.nan, sl)
    sr = np.where(sr > np.nan_to_num(edge_r, nan=np.inf) + 1e-6, np.nan, sr)
    lone = np.isnan(sl) & np.isnan(sr)
    lone_spacing = 2.0 * np.fmax(edge_l, edge_r)
    use_l = np.where(np.isnan(sl), np.where(lone, lone_spacing, sr), sl)
    use_r = np.where(np.isnan(sr), np.where(lone, lone_spacing, sl), sr)
    local = np.fmax(use_l, use_r)
    half_l = np.nan_to_num(use_l / 2.0, nan=0.0)
    half_r = np.nan_to_num(use_r / 2.0, nan=0.0)
    # a surveyed wobble of decimetres does not change a strip: lines simplified to 1 m
    # buffer many times faster
    smooth = shapely.simplify(lats, 1.0, preserve_topology=False)
    strip_l = shapely.buffer(smooth, half_l, cap_style="flat", single_sided=True)
    strip_r = shapely.buffer(smooth, -half_r, cap_style="flat", single_sided=True)
    home = np.array([regions[f] if f >= 0 else shapely.Polygon() for f in fld], dtype=object)
    strip_l = shapely.intersection(strip_l, home)
    strip_r = shapely.intersection(strip_r, home)
    return LateralGeometry(fld, length, sl, sr, edge_l, edge_r, local,
                           np.c_[use_l, use_r], strip_l, strip_r,
                           np.isnan(sl) | np.isnan(sr))


@dataclass
class MainNetwork:
    """How laterals and mains join (indices into the input arrays).

    Attributes
    ----------
    lateral_main : ndarray of int
        Main each lateral joins (-1: none within the tolerance).
    lateral_junction : ndarray (n, 2)
        Junction point of each lateral (its end nearest the main).
    lateral_upstream : ndarray (n, 2)
        Its other end.
    main_downstream : ndarray of int
        Main each main discharges into (-1: it is an outlet main).
    main_outlet_point : ndarray (m, 2)
        Downstream point of each main (its outlet or its junction).
    main_upstream_point : ndarray (m, 2)
    order : ndarray of int
        Mains from upstream to downstream (every main after those feeding it).
    notes : list of str
    """

    lateral_main: np.ndarray
    lateral_junction: np.ndarray
    lateral_upstream: np.ndarray
    main_downstream: np.ndarray
    main_outlet_point: np.ndarray
    main_upstream_point: np.ndarray
    order: np.ndarray
    notes: list


def _ends(lines):
    a = shapely.get_coordinates(shapely.get_point(lines, 0))
    b = shapely.get_coordinates(shapely.get_point(lines, -1))
    return a, b


def join_network(laterals, mains, *, tolerance=3.0, outlet=None, elevation_of=None):
    """Which main each lateral joins, and the mains' order down to their outlets.

    Parameters
    ----------
    laterals, mains : array of LineString
    tolerance : float
        A lateral end or a main end closer than this to a main joins it [m].
    outlet : (x, y) or sequence of (x, y), optional
        The receiving outlet(s): in each connected set of mains, the main end
        nearest one of them is the outlet.
    elevation_of : callable, optional
        ``f(xy (k, 2)) -> z``; without an outlet the lowest main end is the
        outlet. Without either, the last vertex of the longest main as drawn
        is (lines drawn in the direction of flow).

    Returns
    -------
    MainNetwork

    Examples
    --------
    >>> m = np.array([shapely.LineString([(0, 0), (0, 100)])])
    >>> lats = np.array([shapely.LineString([(50, y), (0.5, y)]) for y in (20, 40)])
    >>> net = join_network(lats, m)
    >>> net.lateral_main.tolist(), net.main_outlet_point.tolist()
    ([0, 0], [[0.0, 100.0]])
    """
    lats = np.asarray(laterals, dtype=object)
    mains = np.asarray(mains, dtype=object)
    nl, nm = lats.size, mains.size
    notes = []
    la, lb = _ends(lats) if nl else (np.zeros((0, 2)), np.zeros((0, 2)))
    lat_main = np.full(nl, -1, dtype=int)
    junction = la.copy()
    upstream = lb.copy()
    if nm and nl:
        tree = shapely.STRtree(mains)
        da = shapely.distance(shapely.points(la)[:, None], mains[None, :])
        db = shapely.distance(shapely.points(lb)[:, None], mains[None, :])
        ma, mb = da.min(axis=1), db.min(axis=1)
        use_b = mb < ma
        junction = np.where(use_b[:, None], lb, la)
        upstream = np.where(use_b[:, None], la, lb)
        best = np.where(use_b, db.argmin(axis=1), da.argmin(axis=1))
        dist = np.minimum(ma, mb)
        lat_main = np.where(dist <= tolerance, best, -1)
        # a lateral that crosses a main joins it where it crosses
        li, mi = tree.query(lats, predicate="crosses")
        for i, m in zip(li, mi):
            if lat_main[i] < 0:
                lat_main[i] = m
                p = shapely.intersection(lats[i], mains[m])
                junction[i] = shapely.get_coordinates(p)[0]
        del tree
    ma_, mb_ = _ends(mains) if nm else (np.zeros((0, 2)), np.zeros((0, 2)))
    # connections between mains: an end of one within the tolerance of another
    touch = {}
    for i in range(nm):
        for end, xy in ((0, ma_[i]), (1, mb_[i])):
            d = shapely.distance(shapely.Point(xy), mains)
            d[i] = np.inf
            for j in np.flatnonzero(d <= tolerance):
                touch.setdefault(i, []).append((end, int(j)))
    # connected sets of mains
    comp = np.arange(nm)

    def find(x):
        while comp[x] != x:
            comp[x] = comp[comp[x]]
            x = comp[x]
        return x

    for i, lst in touch.items():
        for _, j in lst:
            comp[find(i)] = find(j)
    roots = np.array([find(i) for i in range(nm)], dtype=int)
    down = np.full(nm, -1, dtype=int)
    out_pt = mb_.copy()
    up_pt = ma_.copy()
    visited = np.zeros(nm, bool)
    order_rev = []
    for r in np.unique(roots):
        members = np.flatnonzero(roots == r)
        ends = np.concatenate([ma_[members], mb_[members]])
        owner = np.concatenate([members, members])
        which = np.r_[np.zeros(members.size, int), np.ones(members.size, int)]
        if outlet is not None:
            pts = np.asarray(outlet, float).reshape(-1, 2)
            dd = np.hypot(ends[:, None, 0] - pts[None, :, 0], ends[:, None, 1] - pts[None, :, 1])
            k = int(np.argmin(dd.min(axis=1)))
        elif elevation_of is not None:
            z = np.asarray(elevation_of(ends), float)
            k = int(np.nanargmin(z)) if np.any(np.isfinite(z)) else members.size + int(
                np.argmax(shapely.length(mains[members])))
        else:
            # lines drawn in the direction of flow: a last vertex touching no other
            # main, on the longest such main
            free = np.array([all(e != w for e, _ in touch.get(o, []))
                             for o, w in zip(owner, which)]) & (which == 1)
            lens = np.where(free, shapely.length(mains[owner]), -1.0)
            k = int(np.argmax(lens)) if free.any() else members.size + int(
                np.argmax(shapely.length(mains[members])))
        first = owner[k]
        out_pt[first] = ends[k]
        up_pt[first] = ma_[first] if which[k] == 1 else mb_[first]
        queue = [first]
        visited[first] = True
        while queue:
            cur = queue.pop(0)
            order_rev.append(cur)
            # mains whose end touches cur, or that cur's ends touch, feed cur
            for j in members:
                if visited[j]:
                    continue
                link = [(e, t) for e, t in touch.get(j, []) if t == cur]
                back = [(e, t) for e, t in touch.get(cur, []) if t == j]
                if link:
                    e = link[0][0]
                    out_pt[j] = ma_[j] if e == 0 else mb_[j]
                    up_pt[j] = mb_[j] if e == 0 else ma_[j]
                elif back:
                    # cur's end lies on j: j discharges at that point
                    e = back[0][0]
                    p = ma_[cur] if e == 0 else mb_[cur]
                    pj = mains[j]
                    out_pt[j] = np.asarray(pj.interpolate(pj.project(shapely.Point(p))).coords[0])
                    da, db = np.hypot(*(ma_[j] - out_pt[j])), np.hypot(*(mb_[j] - out_pt[j]))
                    up_pt[j] = ma_[j] if da > db else mb_[j]
                else:
                    continue
                down[j] = cur
                visited[j] = True
                queue.append(j)
    order = np.array(order_rev[::-1], dtype=int)
    if nm and outlet is None and elevation_of is None:
        notes.append("no outlet point and no elevations: mains are taken as drawn in the "
                     "direction of flow (the outlet is a last vertex touching no other main)")
    return MainNetwork(lat_main, junction, upstream, down, out_pt, up_pt, order, notes)
