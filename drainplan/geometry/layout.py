"""Lay out a drainage system over field polygons: laterals, collector mains,
connectors, outlets and quantities.

Input and output are shapely geometries in metres (a projected CRS chosen by
the caller). The laterals come from the vectorised scan line in
:mod:`drainplan.geometry.laterals`; each field gets a collector main along the
edge at one end of its laterals (or along a line the user drew), and every
lateral piece is joined to the main along its own line, through a short
non-perforated connector where an exclusion zone or a bend of the boundary
lies in between. Pieces that cannot reach the main without leaving the field
or crossing an exclusion are reported, never silently kept or dropped.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import shapely

from ..errors import InputError
from .fields import drainable_regions, long_axis_bearing
from .laterals import (LateralSet, edge_crossings, frame_axes, order_by_group, polygon_edges,
                       polygon_parts, scan_laterals)

__all__ = ["LayoutOptions", "Layout", "layout_fields", "COMPASS"]

#: Compass names accepted for the main's side, as bearings in degrees.
COMPASS = {"N": 0, "NE": 45, "E": 90, "SE": 135, "S": 180, "SW": 225, "W": 270, "NW": 315}

_TOL = 1e-3  # m; ends closer than this touch


@dataclass(frozen=True)
class LayoutOptions:
    """Options of :func:`layout_fields` (SI: metres, degrees).

    Attributes
    ----------
    spacing : float
        Lateral spacing [m].
    direction : float, array of float or "auto"
        Bearing of the laterals, degrees clockwise from grid north (one for all
        fields or one per field), or "auto" for the long axis of each field's
        minimum rotated rectangle.
    setback : float
        Headland setback from the field boundary [m].
    min_length : float
        Lateral pieces shorter than this are dropped and counted [m].
    offset : float or None
        Distance of the first lateral from the edge of the drainable area
        across the laterals [m]; None balances the strips at both sides.
    main_side : str
        "auto" (the end of the laterals nearest the outlet, or the lower-t end
        without an outlet) or a compass direction (N, NE, ... NW).
    cross_setbacks : bool
        Let non-perforated connectors cross exclusion setback zones (never the
        excluded feature itself).
    pattern : {"parallel", "herringbone"}
        Parallel laterals on one side of an edge main (gridiron), or a main
        through the middle of the field along ``direction`` with laterals joining
        it at ``herringbone_angle`` from both sides.
    herringbone_angle : float
        Angle between the laterals and the main in the herringbone pattern
        [degrees], 15-75.
    """

    spacing: float
    direction: object = "auto"
    setback: float = 0.0
    min_length: float = 10.0
    offset: float | None = None
    main_side: str = "auto"
    cross_setbacks: bool = True
    pattern: str = "parallel"
    herringbone_angle: float = 45.0


@dataclass
class Layout:
    """Result of :func:`layout_fields` (all geometries in the working CRS, metres).

    Per-field arrays have one entry per input field; per-item arrays carry the
    index of their field in ``*_field``.
    """

    bearing: np.ndarray
    insets: np.ndarray
    regions: np.ndarray
    laterals: np.ndarray
    lateral_field: np.ndarray
    lateral_line: np.ndarray
    lateral_side: np.ndarray
    lateral_length: np.ndarray
    junctions: np.ndarray
    junction_field: np.ndarray
    junction_line: np.ndarray
    junction_side: np.ndarray
    connectors: np.ndarray
    connector_field: np.ndarray
    connector_line: np.ndarray
    connector_side: np.ndarray
    mains: np.ndarray
    outlets: np.ndarray
    unconnected: np.ndarray
    unconnected_field: np.ndarray
    dropped_count: np.ndarray
    dropped_length: np.ndarray
    spacing: float
    notes: list = field(default_factory=list)
    unconnected_line: np.ndarray = None
    zones: np.ndarray = None          # per field: exclusion setback zones touching it
    features: np.ndarray = None       # per field: the exclusion features themselves

    def quantities(self, field_area):
        """Per-field quantities (dict of arrays) and totals (dict of floats).

        ``field_area`` is the area of each field [m2].
        """
        n = self.bearing.size
        cnt = lambda idx, w=None: np.bincount(idx, weights=w, minlength=n)  # noqa: E731
        lat_len = cnt(self.lateral_field, self.lateral_length)
        runs = np.zeros(n)
        if self.lateral_field.size:
            first = _first_of_runs(self.lateral_field, self.lateral_line, self.lateral_side)
            runs = cnt(self.lateral_field[first])
        con_len = cnt(self.connector_field, shapely.length(self.connectors)
                      if self.connectors.size else None)
        unc_len = cnt(self.unconnected_field, shapely.length(self.unconnected)
                      if self.unconnected.size else None)
        mains = np.asarray(self.mains, dtype=object)
        main_len = np.zeros(n)
        has_main = np.array([m is not None for m in mains], bool)
        main_len[has_main] = shapely.length(mains[has_main])
        area = np.asarray(field_area, float)
        per = {
            "laterals": runs.astype(int),
            "lateral_length_m": lat_len,
            "connector_length_m": con_len,
            "main_length_m": main_len,
            "field_area_ha": area / 1e4,
            "drained_area_ha": np.minimum(lat_len * self.spacing, area) / 1e4,
            "drain_density_m_per_ha": np.divide(lat_len, area / 1e4, out=np.zeros(n),
                                                where=area > 0),
            "dropped_pieces": self.dropped_count.astype(int),
            "dropped_length_m": self.dropped_length,
            "unconnected_pieces": cnt(self.unconnected_field).astype(int),
            "unconnected_length_m": unc_len,
        }
        tot = {k: (int(v.sum()) if v.dtype.kind == "i" else float(v.sum()))
               for k, v in per.items()}
        tot["drain_density_m_per_ha"] = (tot["lateral_length_m"] / tot["field_area_ha"]
                                         if tot["field_area_ha"] > 0 else 0.0)
        return per, tot


def _first_of_runs(field, line, side):
    """Index of the first piece of each lateral run (field, line, side), runs in
    (field, line, side) order, as ``numpy.unique(..., axis=0, return_index=True)`` on
    the stacked keys: one stable sort of a combined integer key."""
    n_line = int(line.max()) + 1 if line.size else 1
    if line.size and (line.min() < 0 or (int(field.max()) + 1) * n_line >= 2 ** 61):
        order = np.lexsort((side, line, field))
        f, ln, sd = field[order], line[order], side[order]
        new = np.r_[True, (f[1:] != f[:-1]) | (ln[1:] != ln[:-1]) | (sd[1:] != sd[:-1])]
        return order[new]
    key = (field.astype(np.int64) * n_line + line) * 2 + (side > 0)
    order = np.argsort(key, kind="stable")
    k = key[order]
    return order[np.r_[True, k[1:] != k[:-1]]]


def _bearings(fields, direction):
    if isinstance(direction, np.ndarray):      # one bearing per field
        return np.where(np.isfinite(direction), direction % 180.0, long_axis_bearing(fields))
    if isinstance(direction, str):
        if direction != "auto":
            raise InputError(f"direction {direction!r}: give a bearing in degrees or 'auto'",
                             param="direction")
        return long_axis_bearing(fields)
    b = float(direction)
    if not np.isfinite(b):
        raise InputError("direction must be a finite bearing in degrees", param="direction")
    return np.full(len(fields), b % 180.0)


def _main_chains(polys, u, v, low_side):
    """The stretch of each polygon's outer ring that faces one end of its laterals.

    For every polygon (the largest part of a multipolygon), edges whose outward
    normal points within 60 degrees of the chosen end (-u for the low side, +u for
    the high side) face it; the run of consecutive facing edges that spans the most
    across the laterals is the edge along which the main runs (within 85 degrees
    where the squarely facing edges span too little, as at a corner cut by a short
    edge). All polygons at once: one pass over all ring edges, runs found by sorting.

    Parameters
    ----------
    polys : array of (Multi)Polygon
    u, v : arrays, shape (n, 2)
        Frame axes of each polygon (along and across the laterals).
    low_side : array of bool
        True for the main at the low-t end of the laterals.

    Returns
    -------
    array of LineString or None
        Per polygon, the main ordered by increasing s; None where no edge faces.
    """
    polys = np.asarray(polys, dtype=object)
    n = polys.size
    out = np.full(n, None, dtype=object)
    if n == 0:
        return out
    parts, owner = polygon_parts(polys)
    if parts.size == 0:
        return out
    # the largest part of each polygon (the first of equal ones)
    order = np.lexsort((-shapely.area(parts), owner))
    owner_o = owner[order]
    first = order[np.r_[True, owner_o[1:] != owner_o[:-1]]]
    main_part, pid = shapely.orient_polygons(parts[first]), owner[first]
    xy, ring = shapely.get_coordinates(shapely.get_exterior_ring(main_part),
                                       return_index=True)     # closed, counter-clockwise
    if ring.size < 2:
        return out
    same = ring[1:] == ring[:-1]
    estart = np.flatnonzero(same)                 # index in xy of each edge's start
    er = ring[estart]                             # edge -> ring
    d = xy[estart + 1] - xy[estart]
    length = np.hypot(d[:, 0], d[:, 1])
    f = pid[er]
    toward = np.where(low_side[f][:, None], -u[f], u[f])
    # outward normal (d_y, -d_x) of a counter-clockwise ring
    cosine = (d[:, 1] * toward[:, 0] - d[:, 0] * toward[:, 1]) / np.maximum(length, 1e-12)
    across = np.abs(d[:, 0] * v[f][:, 0] + d[:, 1] * v[f][:, 1])
    n_ring = main_part.size
    m_edges = np.bincount(er, minlength=n_ring)
    ebase = np.r_[0, np.cumsum(m_edges)[:-1]]
    e = np.arange(er.size) - ebase[er]            # edge number within its ring

    def best_runs(facing):
        """The best run of consecutive facing edges of every ring, walking each ring
        from just after its first non-facing edge (so no run wraps round), as
        ``max(runs, key=span)`` would pick it (the first of equal spans).

        Returns per ring the run's number (-1 where no edge faces) and its span
        across the laterals, then the walking order of the edges, their facing
        flags and run numbers in that order."""
        gap = np.where(~facing, e, np.iinfo(np.int64).max)
        start = np.full(n_ring, np.iinfo(np.int64).max)
        np.minimum.at(start, er, gap)
        all_facing = start == np.iinfo(np.int64).max
        start = np.where(all_facing, -1, start)
        pos = (e - start[er] - 1) % m_edges[er]
        walk = np.lexsort((pos, er))
        fw, rw = facing[walk], er[walk]
        new = fw & np.r_[True, (~fw[:-1]) | (rw[1:] != rw[:-1])]
        run = np.cumsum(new) - 1
        runs = np.flatnonzero(new)
        if runs.size == 0:
            return np.full(n_ring, -1), np.zeros(n_ring), walk, fw, run
        total = np.bincount(run[fw], weights=across[walk][fw], minlength=runs.size)
        run_ring = rw[runs]
        pick = np.lexsort((np.arange(runs.size), -total, run_ring))
        pick = pick[np.r_[True, run_ring[pick][1:] != run_ring[pick][:-1]]]
        best = np.full(n_ring, -1)
        best[run_ring[pick]] = pick
        best_total = np.zeros(n_ring)
        best_total[run_ring[pick]] = total[pick]
        return best, best_total, walk, fw, run

    sq = best_runs(cosine > 0.5)
    wd = best_runs(cosine > 0.087)
    use_wide = (sq[0] < 0) | ((wd[0] >= 0) & (sq[1] < 0.8 * wd[1]))
    chosen = np.where(use_wide, wd[0], sq[0])
    # edges of the chosen run, in walking order
    pts, idx = [], []
    for which, rings in ((sq, ~use_wide & (chosen >= 0)), (wd, use_wide & (chosen >= 0))):
        best, _, walk, fw, run = which
        sel = fw & rings[er[walk]] & (run == best[er[walk]])
        edges = walk[sel]
        pts.append(estart[edges])
        idx.append(er[edges])
    pts, idx = np.concatenate(pts), np.concatenate(idx)
    if idx.size == 0:
        return out
    # keep the walking order within a ring, add the end of each run's last edge
    order = np.argsort(idx, kind="stable")
    pts, idx = pts[order], idx[order]
    last = np.r_[idx[1:] != idx[:-1], True]
    k = np.arange(idx.size) + np.cumsum(np.r_[False, last[:-1]])   # room for the ends
    all_pts = np.empty(idx.size + int(last.sum()), dtype=np.int64)
    all_idx = np.empty_like(all_pts)
    all_pts[k], all_idx[k] = pts, idx
    all_pts[k[last] + 1], all_idx[k[last] + 1] = pts[last] + 1, idx[last]
    coords = xy[all_pts]
    # order each main by increasing s
    first_pt = np.r_[True, all_idx[1:] != all_idx[:-1]]
    last_pt = np.r_[first_pt[1:], True]
    rings_used = all_idx[first_pt]
    vf = v[pid[rings_used]]
    s_first = coords[first_pt][:, 0] * vf[:, 0] + coords[first_pt][:, 1] * vf[:, 1]
    s_last = coords[last_pt][:, 0] * vf[:, 0] + coords[last_pt][:, 1] * vf[:, 1]
    flip = np.zeros(n_ring, bool)
    flip[rings_used] = s_first > s_last
    within = np.arange(all_idx.size) - np.flatnonzero(first_pt)[np.cumsum(first_pt) - 1]
    count = np.bincount(all_idx, minlength=n_ring)
    key = np.where(flip[all_idx], count[all_idx] - 1 - within, within)
    order = np.lexsort((key, all_idx))
    lines = shapely.linestrings(coords[order], indices=(np.cumsum(first_pt) - 1)[order])
    out[pid[rings_used]] = lines
    return out


def _per_field(outlet, which):
    """The outlet of the fields ``which``: one point for all, or one per field."""
    if outlet is None or np.ndim(outlet) < 2:
        return outlet
    return np.asarray(outlet, float)[which]


def _low_sides(bearing, side, fields, outlet, low_end):
    """Per field, True when the main goes at the low-t end of the laterals (-u).

    ``side`` "auto": the end towards the outlet (from the field's centroid), the
    low-t end without an outlet, or ``low_end`` where given (per field, None for
    no choice); a compass direction: the end facing it. All fields at once."""
    n = bearing.size
    u, _ = frame_axes(bearing)
    if side != "auto":
        want = np.radians(COMPASS[side])
        return np.sin(want) * u[:, 0] + np.cos(want) * u[:, 1] < 0
    low = np.ones(n, bool)
    if outlet is not None:
        c = shapely.get_coordinates(shapely.centroid(fields), include_z=False)
        has_c = ~shapely.is_empty(fields)
        full = np.full((n, 2), np.nan)
        full[has_c] = c
        d = np.broadcast_to(np.asarray(outlet, float), (n, 2)) - full
        with np.errstate(invalid="ignore"):
            low = np.where(has_c, d[:, 0] * u[:, 0] + d[:, 1] * u[:, 1] < 0, True)
    if low_end is not None:
        given = np.array([e is not None for e in low_end], bool)
        low[given] = np.array([bool(e) for e in np.asarray(low_end, dtype=object)[given]],
                              bool)
    return low


def _trim_mains(mains, junctions, jfield, along, outlet):
    """Trim each field's main to the stretch between its first and last junction and
    orient it towards the outlet (downstream end last).

    ``along`` tells roughly how far along its main each junction lies: it picks the
    first and last junction of each main, whose positions GEOS then gives exactly.

    Returns the trimmed mains (None where a field has no junction or a single
    junction point) and the outlet points (the downstream end, or the junction
    itself where the main shrinks to a point). All fields at once.
    """
    n = mains.size
    new = np.full(n, None, dtype=object)
    outlets = np.full(n, None, dtype=object)
    has_main = np.array([m is not None for m in mains], bool)
    if jfield.size == 0 or not np.any(has_main):
        return new, outlets
    # junctions grouped by field (they come sorted); positions along their field's main
    if np.any(jfield[1:] < jfield[:-1]):
        by_field = np.argsort(jfield, kind="stable")
        jfield, junctions, along = jfield[by_field], junctions[by_field], along[by_field]
    jm = has_main[jfield]
    jf, jp, along = jfield[jm], junctions[jm], along[jm]
    if jf.size == 0:
        return new, outlets
    starts = np.flatnonzero(np.r_[True, jf[1:] != jf[:-1]])
    ends = np.r_[starts[1:], jf.size] - 1
    fids = jf[starts]
    first_junction = jp[starts]
    if not np.all(np.isfinite(along)):
        along = shapely.line_locate_point(mains[jf].astype(object), jp)
    size = ends - starts + 1
    # the first and last junction of each main (the first of equals)
    at = np.flatnonzero(along == np.repeat(np.minimum.reduceat(along, starts), size))
    first_on_main = at[np.searchsorted(at, starts)]
    at = np.flatnonzero(along == np.repeat(np.maximum.reduceat(along, starts), size))
    last_on_main = at[np.searchsorted(at, starts)]
    line = mains[fids].astype(object)
    lo = shapely.line_locate_point(line, jp[first_on_main])
    hi = shapely.line_locate_point(line, jp[last_on_main])
    # the stretch between lo and hi: the two interpolated ends and the vertices
    # strictly between them (as shapely.ops.substring)
    trim = hi > lo
    a = shapely.line_interpolate_point(line[trim], lo[trim])
    b = shapely.line_interpolate_point(line[trim], hi[trim])
    xy, li = shapely.get_coordinates(line[trim], return_index=True)
    nv = np.bincount(li, minlength=int(trim.sum()))
    vbase = np.r_[0, np.cumsum(nv)[:-1]]
    k = np.arange(li.size) - vbase[li]
    seg = np.zeros(li.size)
    nxt = np.r_[li[1:] == li[:-1], False]
    dxy = xy[1:] - xy[:-1]
    seg[:-1] = np.where(nxt[:-1], np.sqrt(dxy[:, 0] ** 2 + dxy[:, 1] ** 2), 0.0)
    # distance along the line to each vertex, summed vertex by vertex (one numpy
    # step per vertex position, over all lines)
    cum = np.zeros(li.size)
    by_k = np.argsort(k, kind="stable")
    k_bounds = np.searchsorted(k[by_k], np.arange(int(nv.max()) + 1 if nv.size else 1))
    for j in range(1, k_bounds.size - 1):
        at = by_k[k_bounds[j]:k_bounds[j + 1]]
        cum[at] = cum[at - 1] + seg[at - 1]
    inner = (k < nv[li] - 1) & (cum > lo[trim][li]) & (cum < hi[trim][li])
    ends_a = shapely.get_coordinates(a)
    ends_b = shapely.get_coordinates(b)
    t_idx = np.arange(trim.sum())
    pts = np.concatenate([ends_a, xy[inner], ends_b])
    owner = np.concatenate([t_idx, li[inner], t_idx])
    rank = np.concatenate([np.full(t_idx.size, -1), k[inner], np.full(t_idx.size, 1 << 40)])
    order = np.lexsort((rank, owner))
    pts, owner = pts[order], owner[order]
    # towards the outlet: the end nearer it goes last (the first end if equally near)
    if outlet is not None:
        o = np.broadcast_to(np.asarray(outlet, float), (n, 2))[fids[trim]]
        d_a = np.hypot(*(ends_a - o).T)
        d_b = np.hypot(*(ends_b - o).T)
        # (as numpy's argmin of the two distances: a NaN counts as the nearest)
        flip = np.isnan(d_a) | (~np.isnan(d_b) & (d_a <= d_b))
    else:
        flip = np.zeros(t_idx.size, bool)
    counts = np.bincount(owner, minlength=t_idx.size)
    obase = np.r_[0, np.cumsum(counts)[:-1]]
    within = np.arange(owner.size) - obase[owner]
    order = np.lexsort((np.where(flip[owner], -within, within), owner))
    lines = shapely.linestrings(pts[order], indices=owner[order]) if t_idx.size \
        else np.empty(0, dtype=object)
    ok = shapely.length(lines) >= _TOL
    f_trim = fids[trim]
    new[f_trim[ok]] = lines[ok]
    outlets[f_trim[ok]] = shapely.points(np.where(flip[ok][:, None], ends_a[ok], ends_b[ok]))
    point_only = np.concatenate([fids[~trim], f_trim[~ok]])
    outlets[point_only] = np.concatenate([first_junction[~trim], first_junction[trim][~ok]])
    return new, outlets


def _center_lines(polys, bearing):
    """Per polygon, the line along its bearing through its centroid, clipped to it
    (the longest piece), as the main of a herringbone; None for an empty polygon or
    where the line misses it. All polygons at once."""
    polys = np.asarray(polys, dtype=object)
    out = np.full(polys.size, None, dtype=object)
    idx = np.flatnonzero(~(shapely.is_missing(polys) | shapely.is_empty(polys)))
    if idx.size == 0:
        return out
    u, _ = frame_axes(bearing[idx])
    c = shapely.get_coordinates(shapely.centroid(polys[idx]))
    box = shapely.bounds(polys[idx])
    r = (2.0 * np.hypot(box[:, 2] - box[:, 0], box[:, 3] - box[:, 1]) + 1.0)[:, None]
    lines = shapely.linestrings(np.stack([c - r * u, c + r * u], axis=1))
    parts, owner = shapely.get_parts(shapely.intersection(lines, polys[idx]),
                                     return_index=True)
    keep = shapely.get_type_id(parts) == 1
    parts, owner = parts[keep], owner[keep]
    if parts.size == 0:
        return out
    order = np.lexsort((-shapely.length(parts), owner))      # the longest, the first of equal
    first = order[np.r_[True, owner[order][1:] != owner[order][:-1]]]
    out[idx[owner[first]]] = parts[first]
    return out


def _halves(regions, centers, bearing):
    """The parts of each region on the right (+1) and left (-1) of its main's line,
    as two arrays (all regions at once)."""
    u, v = frame_axes(bearing)
    c = shapely.get_coordinates(shapely.get_point(centers, 0))
    box = np.where(shapely.is_empty(regions)[:, None], shapely.bounds(centers),
                   shapely.bounds(regions))
    r = (2.0 * np.hypot(box[:, 2] - box[:, 0], box[:, 3] - box[:, 1])
         + np.hypot(c[:, 0] - box[:, 0], c[:, 1] - box[:, 1]) + 1.0)[:, None]
    out = []
    for sign in (1, -1):
        plane = shapely.polygons(np.stack([c - r * u, c + r * u, c + r * u + sign * r * v,
                                           c - r * u + sign * r * v], axis=1))
        out.append(shapely.intersection(regions, plane))
    return out


def layout_fields(fields, options, *, exclusions=None, exclusion_setbacks=None,
                  outlet=None, user_mains=None, low_end=None):
    """Lay out laterals and collector mains over fields.

    Parameters
    ----------
    fields : array_like of (Multi)Polygon or None
        Checked field boundaries in metres (None entries are skipped).
    options : LayoutOptions
    exclusions : array_like of shapely geometries, optional
    exclusion_setbacks : array_like, optional
        Setback per exclusion [m].
    outlet : tuple (x, y) or (n, 2) array, optional
        Outlet point in the same coordinates (one for all fields, or one per
        field); the main drains towards it.
    low_end : array of bool, optional
        Per field, True to put the main at the low-t end of the laterals (-u),
        False at the high-t end, where ``main_side`` is "auto" (the terrain's
        choice: the end where the ground is lower).
    user_mains : array_like of LineString or None, optional
        Per field, a main drawn by the user instead of the edge main.

    Returns
    -------
    Layout

    Raises
    ------
    InputError
        For a spacing that is not positive, or larger than every field.
    """
    fields = np.asarray(fields, dtype=object)
    n = fields.size
    if options.pattern not in ("parallel", "herringbone"):
        raise InputError(f"pattern {options.pattern!r} is unknown; choose parallel or "
                         "herringbone", param="pattern")
    if options.pattern == "herringbone" and not 15 <= options.herringbone_angle <= 75:
        raise InputError("herringbone angle must lie between 15 and 75 degrees",
                         param="herringbone_angle")
    L = float(options.spacing)
    if not (L > 0 and np.isfinite(L)):
        raise InputError("spacing must be greater than 0 m", param="spacing")
    if options.setback < 0:
        raise InputError("setback must be 0 m or more", param="setback")
    present = np.array([g is not None for g in fields], dtype=bool)
    fields_filled = np.where(present, fields, shapely.Polygon())
    bearing = _bearings(fields_filled, options.direction)
    insets, regions, zones, features = drainable_regions(
        fields_filled, options.setback, exclusions, exclusion_setbacks)
    regions = np.where(present, regions, shapely.Polygon())
    notes = []

    # spacing larger than the field: no room for even one lateral
    u_all, v_all = frame_axes(bearing)
    a, b, owner = polygon_edges(fields_filled)
    width = np.zeros(n)
    if owner.size:
        va = v_all[owner]
        sa, sb = np.einsum("ij,ij->i", a, va), np.einsum("ij,ij->i", b, va)
        lo, hi = np.full(n, np.inf), np.full(n, -np.inf)
        np.minimum.at(lo, owner, np.minimum(sa, sb))
        np.maximum.at(hi, owner, np.maximum(sa, sb))
        width = np.where(np.isfinite(lo), hi - lo, 0.0)
    too_narrow = present & (width < L)
    if np.any(present) and np.all(too_narrow[present]):
        raise InputError(f"spacing {L:g} m is larger than every field (widest across the "
                         f"laterals: {width[present].max():.1f} m)", param="spacing")

    # work areas: one per field (parallel pattern) or two halves (herringbone)
    mains = np.full(n, None, dtype=object)
    user = np.asarray(user_mains, dtype=object) if user_mains is not None \
        else np.full(n, None, dtype=object)
    if options.pattern == "herringbone":
        # a main through the middle of each field (or the drawn one)
        hb = np.flatnonzero(present)
        drawn = np.array([g is not None for g in user[hb]], bool)
        centers = np.where(drawn, user[hb], None)
        centers[~drawn] = _center_lines(insets[hb[~drawn]], bearing[hb[~drawn]])
        mains[hb] = centers
        has = np.array([g is not None for g in centers], bool)
        hb, centers = hb[has], centers[has].astype(object)
        # laterals leave the main pointing upstream (away from the outlet), so each
        # joins the main at an angle in the direction of flow
        upstream = np.where(_low_sides(bearing[hb], "auto", fields_filled[hb], _per_field(
            outlet, hb), None), 1.0, -1.0)
        right, left = _halves(regions[hb], centers, bearing[hb])
        sign = np.tile([1, -1], hb.size)
        sub_owner = np.repeat(hb, 2)
        sub_region = np.stack([right, left], axis=1).ravel()
        sub_main = np.repeat(centers, 2)
        sub_bearing = (bearing[sub_owner] + sign * np.repeat(upstream, 2)
                       * options.herringbone_angle) % 180.0
    else:
        # the edge main of every field without a drawn one, all fields at once
        drawn = present & np.array([g is not None for g in user], bool)
        edge = present & ~drawn
        mains[drawn] = user[drawn]
        if np.any(edge):
            low = _low_sides(bearing[edge], options.main_side, fields_filled[edge],
                             _per_field(outlet, edge), None if low_end is None
                             else np.asarray(low_end, dtype=object)[edge])
            mains[edge] = _main_chains(insets[edge], u_all[edge], v_all[edge], low)
        sub_owner = np.flatnonzero(present)
        sub_region, sub_bearing, sub_main = regions[present], bearing[present], mains[present]
    m = sub_owner.size

    pieces, grid = scan_laterals(sub_region, sub_bearing, L, offset=options.offset,
                                 n_fields=m)
    # pieces shorter than a micrometre are where a scan line grazes a vertex or a
    # zero-width spike of the boundary: not laterals, and not counted as dropped
    length = pieces.length
    real = length >= 1e-6
    short = real & (length < options.min_length)
    dropped_count = np.bincount(sub_owner[pieces.field[short]], minlength=n)
    dropped_length = np.bincount(sub_owner[pieces.field[short]],
                                 weights=length[short], minlength=n)
    pieces = pieces.subset(real & ~short)

    conn = _connect(pieces, grid, sub_main, fields_filled[sub_owner], zones[sub_owner],
                    features[sub_owner], options.cross_setbacks)
    lat, side, t_main, connected, connectors, con_sub, con_run, along_line = conn
    unconnected = lat.subset(~connected)
    lat = lat.subset(connected)
    side = side[connected]
    t_m = t_main[connected]
    # lines numbered across each field (the second half of a herringbone continues)
    # (sub_owner is sorted: one sort-and-split, no scan per field)
    before = np.cumsum(grid.n_lines) - grid.n_lines
    first_of = np.maximum.accumulate(np.where(np.r_[True, sub_owner[1:] != sub_owner[:-1]],
                                              np.arange(m), 0)) if m else np.zeros(0, int)
    line_offset = (before - before[first_of]).astype(int) if m else np.zeros(0, int)

    # junctions: one per lateral run (field, line, side)
    junctions = np.empty(0, dtype=object)
    jfield = jline = jside = np.empty(0, int)
    j_along = np.empty(0)
    if lat.field.size:
        first = _first_of_runs(lat.field, lat.line, side)
        js = lat.field[first]
        jp = lat.s[first][:, None] * grid.v[js] + t_m[first][:, None] * grid.u[js]
        junctions = shapely.points(jp)
        j_along = along_line[grid.line_base[js] + lat.line[first]]
        jfield = sub_owner[js]
        jline = lat.line[first] + line_offset[js]
        jside = side[first]
    lat_field = sub_owner[lat.field]
    lat_line = lat.line + line_offset[lat.field]
    con_field = sub_owner[con_sub] if con_sub.size else con_sub
    con_line = con_run[0] + line_offset[con_sub] if con_sub.size else con_run[0]

    # trim each main to its junctions, orient it towards the outlet
    mains, outlets = _trim_mains(mains, junctions, jfield, j_along, outlet)
    if np.any(connected == 0):
        notes.append(f"{int((~connected).sum())} lateral piece(s) cannot reach the main "
                     "without leaving the field or crossing an exclusion; they need a "
                     "sub-main (layer 'unconnected')")
    if connectors.size:
        notes.append(f"{connectors.size} non-perforated connector(s) join lateral pieces "
                     "to the main across exclusion zones or bends of the boundary")
    return Layout(
        bearing=bearing, insets=insets, regions=regions,
        laterals=lat.geometries(), lateral_field=lat_field, lateral_line=lat_line,
        lateral_side=side, lateral_length=lat.length, junctions=junctions,
        junction_field=jfield, junction_line=jline, junction_side=jside,
        connectors=connectors, connector_field=con_field,
        connector_line=con_line, connector_side=con_run[1], mains=mains, outlets=outlets,
        unconnected=unconnected.geometries(), unconnected_field=sub_owner[unconnected.field],
        dropped_count=dropped_count, dropped_length=dropped_length, spacing=L, notes=notes,
        unconnected_line=unconnected.line + line_offset[unconnected.field],
        zones=zones, features=features)


def _connect(pieces, grid, mains, fields, zones, features, cross_setbacks):
    """Join lateral pieces to the main along their lines.

    Returns the (possibly split) pieces, their side of the main (-1, +1), the
    main's t on their line, a connected flag, the connector geometries, their
    field index and their (line, side), and per scan line roughly how far along
    the main it crosses it [m] (NaN where it does not).
    """
    # crossing of every scan line with its field's main
    mains = np.asarray(mains, dtype=object)
    has_main = np.flatnonzero([m is not None for m in mains])
    c, ci = shapely.get_coordinates(mains[has_main], return_index=True)
    seg = np.flatnonzero(ci[1:] == ci[:-1])           # segments of the mains, in order
    t_main_line = np.full(int(grid.n_lines.sum()), np.nan)
    along_main_line = np.full(int(grid.n_lines.sum()), np.nan)
    if seg.size:
        mf, mk, _, mt, me, mfrac = edge_crossings(c[seg], c[seg + 1], has_main[ci[seg]],
                                                  grid, return_edge=True)
        g = grid.line_base[mf] + mk
        # several crossings on one line: keep the one nearest the field's lowest t
        order = order_by_group(g, mt)
        g, mt = g[order], mt[order]
        # (a main that crosses no scan line, e.g. along a short cut corner, gives none)
        firsts = np.r_[True, g[1:] != g[:-1]] if g.size else np.zeros(0, bool)
        t_main_line[g[firsts]] = mt[firsts]
        # and roughly how far along the main the crossing lies (to find each main's
        # first and last junction)
        d = c[seg + 1] - c[seg]
        seg_len = np.hypot(d[:, 0], d[:, 1])
        run = np.cumsum(seg_len)
        main_start = np.r_[True, ci[seg][1:] != ci[seg][:-1]]
        before = run - seg_len
        before -= before[np.maximum.accumulate(np.where(main_start, np.arange(seg.size), 0))]
        along = before[me] + mfrac * seg_len[me]
        along_main_line[g[firsts]] = along[order][firsts]
    gl = grid.line_base[pieces.field] + pieces.line if pieces.field.size else np.empty(0, int)
    tm = t_main_line[gl] if pieces.field.size else np.empty(0)

    # split pieces that the main crosses
    inside = (pieces.t0 + _TOL < tm) & (tm < pieces.t1 - _TOL)
    if np.any(inside):
        lo_t1 = np.where(inside, tm, pieces.t1)
        extra = pieces.subset(inside)
        extra_t0 = tm[inside]
        fields_idx = np.concatenate([pieces.field, extra.field])
        t0 = np.concatenate([pieces.t0, extra_t0])
        t1 = np.concatenate([lo_t1, extra.t1])
        s = np.concatenate([pieces.s, extra.s])
        line = np.concatenate([pieces.line, extra.line])
        u, v = grid.u[fields_idx], grid.v[fields_idx]
        pieces = LateralSet(fields_idx, line, s, t0, t1, s[:, None] * v + t0[:, None] * u,
                            s[:, None] * v + t1[:, None] * u)
        tm = np.concatenate([tm, extra_t0])
        gl = grid.line_base[pieces.field] + pieces.line
    m = pieces.field.size
    if m == 0:
        return pieces, np.empty(0, int), np.empty(0), np.zeros(0, bool), \
            np.empty(0, dtype=object), np.empty(0, int), (np.empty(0, int), np.empty(0, int)), \
            along_main_line
    has_main = np.isfinite(tm)
    mid = 0.5 * (pieces.t0 + pieces.t1)
    side = np.where(mid < np.where(has_main, tm, np.inf), -1, 1)
    near = np.where(side < 0, pieces.t1, pieces.t0)     # end facing the main
    far = np.where(side < 0, pieces.t0, pieces.t1)
    dist = np.abs(near - np.where(has_main, tm, 0.0))
    order = order_by_group(2 * gl + (side > 0), dist)     # as lexsort((dist, side, gl))
    inv = np.empty(m, int)
    inv[order] = np.arange(m)
    gl_o, side_o = gl[order], side[order]
    grp_start = np.r_[True, (gl_o[1:] != gl_o[:-1]) | (side_o[1:] != side_o[:-1])]
    prev_far = np.r_[np.nan, far[order][:-1]]
    from_t = np.where(grp_start, tm[order], prev_far)      # where the connector starts
    to_t = near[order]
    gap = np.abs(to_t - from_t)
    need = has_main[order] & (gap > _TOL)
    ok = has_main[order].copy()
    con_geoms = np.empty(0, dtype=object)
    con_field = np.empty(0, int)
    if np.any(need):
        idx = np.flatnonzero(need)
        f_i = pieces.field[order][idx]
        s_i = pieces.s[order][idx]
        u_i, v_i = grid.u[f_i], grid.v[f_i]
        p0 = s_i[:, None] * v_i + from_t[idx][:, None] * u_i
        p1 = s_i[:, None] * v_i + to_t[idx][:, None] * u_i
        cand = shapely.linestrings(np.stack([p0, p1], axis=1))
        # each field buffered once (prepared: it is tested against many connectors)
        uf, which = np.unique(f_i, return_inverse=True)
        grown = shapely.buffer(fields[uf].astype(object), _TOL)
        shapely.prepare(grown)
        valid = shapely.covered_by(cand, grown[which])
        valid &= ~shapely.intersects(cand, features[f_i].astype(object))
        if not cross_setbacks:
            overlap = shapely.length(shapely.intersection(cand, zones[f_i].astype(object)))
            valid &= overlap <= 2 * _TOL
        ok[idx] = valid
        con_geoms, con_field, con_pos = cand, f_i, idx
        con_line = pieces.line[order][idx]
        con_side = side[order][idx]
    # connected if every link from the main out to the piece is valid
    bad = (~ok).astype(int)
    cum_bad = np.cumsum(bad)
    base = np.maximum.accumulate(np.where(grp_start, cum_bad - bad, 0))
    connected_o = (cum_bad - base) == 0
    connected = connected_o[inv]
    con_run = (np.empty(0, int), np.empty(0, int))
    if con_geoms.size:
        keep = connected_o[con_pos]
        con_geoms, con_field = con_geoms[keep], con_field[keep]
        con_run = (con_line[keep], con_side[keep])
    tm_out = np.where(has_main, tm, np.nan)
    return pieces, side, tm_out, connected, con_geoms, con_field, con_run, along_main_line

