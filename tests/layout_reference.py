"""The previous layout implementation (one Python pass per field for the mains),
kept unchanged as the reference that the vectorised :mod:`drainplan.geometry.layout`
must reproduce (tests/test_layout_reference.py), with the scan line and its
crossings as they were. Not used by the package.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import shapely
from shapely.ops import substring

from drainplan.errors import InputError
from drainplan.geometry.fields import drainable_regions, long_axis_bearing
from drainplan.geometry.laterals import LateralSet, LineGrid, frame_axes, polygon_edges


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
            key = np.unique(np.stack([self.lateral_field, self.lateral_line,
                                      self.lateral_side], axis=1), axis=0)
            runs = cnt(key[:, 0])
        con_len = cnt(self.connector_field, shapely.length(self.connectors)
                      if self.connectors.size else None)
        unc_len = cnt(self.unconnected_field, shapely.length(self.unconnected)
                      if self.unconnected.size else None)
        main_len = np.array([shapely.length(m) if m is not None else 0.0 for m in self.mains])
        area = np.asarray(field_area, float)
        per = {
            "laterals": runs.astype(int),
            "lateral_length_m": lat_len,
            "connector_length_m": con_len,
            "main_length_m": main_len,
            "field_area_ha": area / 1e4,
            "drained_area_ha": np.minimum(lat_len * self.spacing, area) / 1e4,
            "drain_density_m_per_ha": np.where(area > 0, lat_len / (area / 1e4), 0.0),
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


def _main_chain(poly, u, v, low_side):
    """The stretch of a polygon's outer ring that faces one end of the laterals.

    Edges whose outward normal points within 60 degrees of the chosen end
    (-u for the low side, +u for the high side) face it; the run of consecutive
    facing edges that spans the most across the laterals is the edge along which
    the main runs (within 85 degrees where the squarely facing edges span too
    little, as at a corner cut by a short edge). Returns a LineString ordered by
    increasing s, or None.
    """
    parts = shapely.get_parts(poly)
    parts = parts[shapely.get_type_id(parts) == 3]
    if parts.size == 0:
        return None
    main_part = shapely.orient_polygons(parts[np.argmax(shapely.area(parts))])
    ring = np.asarray(main_part.exterior.coords)   # counter-clockwise, closed
    d = np.diff(ring, axis=0)
    length = np.hypot(d[:, 0], d[:, 1])
    normal = np.stack([d[:, 1], -d[:, 0]], axis=1)          # outward for CCW
    toward = -u if low_side else u
    cosine = (normal @ toward) / np.maximum(length, 1e-12)
    across = np.abs(d @ v)                                   # span across the laterals

    def best_run(facing):
        if not np.any(facing):
            return None
        m = facing.size
        if np.all(facing):
            return list(range(m))
        start = int(np.flatnonzero(~facing)[0])              # begin after a gap
        runs, cur = [], []
        for j in range(1, m + 1):
            e = (start + j) % m
            if facing[e]:
                cur.append(e)
            elif cur:
                runs.append(cur)
                cur = []
        if cur:
            runs.append(cur)
        return max(runs, key=lambda r: across[r].sum())

    # edges facing the chosen end squarely (within 60 degrees); where a field's end is
    # oblique to the laterals that leaves only short pieces (a corner cut by a short
    # edge), so fall back to every edge that faces the end at all (within 85 degrees)
    best = best_run(cosine > 0.5)
    wide = best_run(cosine > 0.087)
    if best is None or (wide is not None and across[best].sum() < 0.8 * across[wide].sum()):
        best = wide
    if best is None:
        return None
    coords = np.vstack([ring[best], ring[best[-1] + 1]])
    if coords[0] @ v > coords[-1] @ v:
        coords = coords[::-1]
    return shapely.LineString(coords)


def _center_line(poly, bearing):
    """Line along ``bearing`` through the centroid of a polygon, clipped to it (the
    longest piece), as the main of a herringbone."""
    if poly is None or shapely.is_empty(poly):
        return None
    u, _ = frame_axes(bearing)
    c = np.asarray(shapely.centroid(poly).coords[0])
    x0, y0, x1, y1 = poly.bounds
    r = 2.0 * np.hypot(x1 - x0, y1 - y0) + 1.0
    line = shapely.LineString([c - r * u, c + r * u])
    parts = shapely.get_parts(shapely.intersection(line, poly))
    parts = parts[shapely.get_type_id(parts) == 1]
    if parts.size == 0:
        return None
    return parts[np.argmax(shapely.length(parts))]


def _halves(region, center, bearing):
    """The parts of ``region`` on the right (+1) and left (-1) of the main's line."""
    u, v = frame_axes(bearing)
    c = np.asarray(center.coords[0])
    x0, y0, x1, y1 = region.bounds if not shapely.is_empty(region) else center.bounds
    r = 2.0 * np.hypot(x1 - x0, y1 - y0) + np.hypot(*(c - (x0, y0))) + 1.0
    out = []
    for sign in (1, -1):
        plane = shapely.Polygon([c - r * u, c + r * u, c + r * u + sign * r * v,
                                 c - r * u + sign * r * v])
        out.append((sign, shapely.intersection(region, plane)))
    return out


def _side_is_low(bearing, side, field_geom, outlet):
    """True when the main goes at the low-t end of the laterals (direction -u)."""
    u, _ = frame_axes(bearing)
    if side == "auto":
        if outlet is None:
            return True
        c = np.asarray(shapely.centroid(field_geom).coords[0])
        return float((np.asarray(outlet) - c) @ u) < 0
    want = np.radians(COMPASS[side])
    w = np.array([np.sin(want), np.cos(want)])
    return float(w @ u) < 0


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
    outlet_all = outlet
    if outlet is not None and np.ndim(outlet) == 2:
        outlet_of = lambda f: outlet_all[f]  # noqa: E731
    else:
        outlet_of = lambda f: outlet_all  # noqa: E731
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
    sub_owner, sub_region, sub_bearing, sub_main = [], [], [], []
    mains = np.full(n, None, dtype=object)
    for f in np.flatnonzero(present):
        user = user_mains[f] if user_mains is not None else None
        if options.pattern == "herringbone":
            center = user if user is not None else _center_line(insets[f], bearing[f])
            mains[f] = center
            if center is None:
                continue
            # laterals leave the main pointing upstream (away from the outlet), so each
            # joins the main at an angle in the direction of flow
            upstream = -1.0 if _side_is_low(bearing[f], "auto", fields_filled[f],
                                            outlet_of(f)) is False else 1.0
            for sign, half in _halves(regions[f], center, bearing[f]):
                sub_owner.append(f)
                sub_region.append(half)
                sub_bearing.append((bearing[f] + sign * upstream * options.herringbone_angle)
                                   % 180.0)
                sub_main.append(center)
        else:
            if user is not None:
                mains[f] = user
            else:
                if low_end is not None and options.main_side == "auto" \
                        and low_end[f] is not None:
                    low = bool(low_end[f])
                else:
                    low = _side_is_low(bearing[f], options.main_side, fields_filled[f],
                                       outlet_of(f))
                mains[f] = _main_chain(insets[f], u_all[f], v_all[f], low)
            sub_owner.append(f)
            sub_region.append(regions[f])
            sub_bearing.append(bearing[f])
            sub_main.append(mains[f])
    sub_owner = np.array(sub_owner, dtype=int)
    m = sub_owner.size
    sub_region = np.array(sub_region + [None], dtype=object)[:m]
    sub_main = np.array(sub_main + [None], dtype=object)[:m]
    sub_bearing = np.array(sub_bearing, dtype=float)

    pieces, grid = scan_laterals(sub_region, sub_bearing, L, offset=options.offset,
                                 n_fields=m)
    # pieces shorter than a micrometre are where a scan line grazes a vertex or a
    # zero-width spike of the boundary: not laterals, and not counted as dropped
    pieces = pieces.subset(pieces.length >= 1e-6)
    short = pieces.length < options.min_length
    dropped_count = np.bincount(sub_owner[pieces.field[short]], minlength=n)
    dropped_length = np.bincount(sub_owner[pieces.field[short]],
                                 weights=pieces.length[short], minlength=n)
    pieces = pieces.subset(~short)

    conn = _connect(pieces, grid, sub_main, fields_filled[sub_owner], zones[sub_owner],
                    features[sub_owner], options.cross_setbacks)
    lat, side, t_main, connected, connectors, con_sub, con_run = conn
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
    if lat.field.size:
        _, first = np.unique(np.stack([lat.field, lat.line, side], axis=1), axis=0,
                             return_index=True)
        js = lat.field[first]
        jp = lat.s[first][:, None] * grid.v[js] + t_m[first][:, None] * grid.u[js]
        junctions = shapely.points(jp)
        jfield = sub_owner[js]
        jline = lat.line[first] + line_offset[js]
        jside = side[first]
    lat_field = sub_owner[lat.field]
    lat_line = lat.line + line_offset[lat.field]
    con_field = sub_owner[con_sub] if con_sub.size else con_sub
    con_line = con_run[0] + line_offset[con_sub] if con_sub.size else con_run[0]

    # trim each main to its junctions, orient it towards the outlet
    outlets = np.full(n, None, dtype=object)
    j_order = np.argsort(jfield, kind="stable")
    j_bounds = np.searchsorted(jfield[j_order], np.arange(n + 1))
    for f in range(n):
        mf = mains[f]
        if mf is None:
            continue
        js = junctions[j_order[j_bounds[f]:j_bounds[f + 1]]]
        if js.size == 0:
            mains[f] = None
            continue
        pos = shapely.line_locate_point(mf, js)
        mf = substring(mf, pos.min(), pos.max()) if pos.max() > pos.min() else None
        if mf is None or shapely.length(mf) < _TOL:
            mains[f] = None
            outlets[f] = js[0]
            continue
        ends = np.asarray(mf.coords)[[0, -1]]
        if outlet_of(f) is not None:
            downstream = int(np.argmin(np.hypot(*(ends - np.asarray(outlet_of(f))).T)))
        else:
            downstream = 1
        if downstream == 0:
            mf = shapely.reverse(mf)
        mains[f] = mf
        outlets[f] = shapely.Point(np.asarray(mf.coords)[-1])
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
    main's t on their line, a connected flag, the connector geometries and
    their field index.
    """
    # crossing of every scan line with its field's main
    a_list, b_list, o_list = [], [], []
    for f, m in enumerate(mains):
        if m is None:
            continue
        c = np.asarray(m.coords)
        a_list.append(c[:-1])
        b_list.append(c[1:])
        o_list.append(np.full(len(c) - 1, f))
    t_main_line = np.full(int(grid.n_lines.sum()), np.nan)
    if a_list:
        mf, mk, _, mt = edge_crossings(np.concatenate(a_list), np.concatenate(b_list),
                                       np.concatenate(o_list), grid)
        g = grid.line_base[mf] + mk
        # several crossings on one line: keep the one nearest the field's lowest t
        order = np.lexsort((mt, g))
        g, mt = g[order], mt[order]
        # (a main that crosses no scan line, e.g. along a short cut corner, gives none)
        firsts = np.r_[True, g[1:] != g[:-1]] if g.size else np.zeros(0, bool)
        t_main_line[g[firsts]] = mt[firsts]
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
            np.empty(0, dtype=object), np.empty(0, int), (np.empty(0, int), np.empty(0, int))
    has_main = np.isfinite(tm)
    mid = 0.5 * (pieces.t0 + pieces.t1)
    side = np.where(mid < np.where(has_main, tm, np.inf), -1, 1)
    near = np.where(side < 0, pieces.t1, pieces.t0)     # end facing the main
    far = np.where(side < 0, pieces.t0, pieces.t1)
    dist = np.abs(near - np.where(has_main, tm, 0.0))
    order = np.lexsort((dist, side, gl))
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
        valid = shapely.covered_by(cand, shapely.buffer(fields[f_i].astype(object), _TOL))
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
    return pieces, side, tm_out, connected, con_geoms, con_field, con_run


# --- the scan line and its crossings as they were -----------------------------------

def scan_laterals(polygons, bearing, spacing, *, offset=None, n_fields=None):
    """The scan line as it was (laterals.scan_laterals)."""
    polygons = np.asarray(polygons, dtype=object).ravel()
    n = polygons.size if n_fields is None else n_fields
    bearing = np.broadcast_to(np.asarray(bearing, float), (n,))
    spacing = np.broadcast_to(np.asarray(spacing, float), (n,))
    u, v = frame_axes(bearing)
    a, b, owner = polygon_edges(polygons)
    empty = LateralSet(*(np.empty(0, int),) * 2, *(np.empty(0),) * 3,
                       np.empty((0, 2)), np.empty((0, 2)))
    if owner.size == 0:
        return empty, LineGrid(u, v, np.zeros(n), spacing, np.zeros(n, int))
    s_min, s_max = _extent_across(a, b, owner, v, n)
    width = np.where(np.isfinite(s_min), s_max - s_min, 0.0)
    if offset is None:
        n_lines = np.maximum(1, np.ceil(width / spacing - 1e-9)).astype(int)
        s0 = s_min + (width - (n_lines - 1) * spacing) / 2.0
    else:
        off = np.broadcast_to(np.asarray(offset, float), (n,))
        n_lines = (np.floor((width - off) / spacing + 1e-9) + 1).astype(int)
        s0 = s_min + off
    n_lines = np.where(np.isfinite(s_min), np.maximum(n_lines, 0), 0)
    grid = LineGrid(u, v, s0, spacing, n_lines)
    f, k, s_line, t = edge_crossings(a, b, owner, grid)
    if f.size == 0:
        return empty, grid
    gline = grid.line_base[f] + k
    order = np.lexsort((t, gline))
    t, gline, f, k, s_line = t[order], gline[order], f[order], k[order], s_line[order]
    # pair consecutive crossings on each line (even-odd); an odd count can only
    # come from a degenerate ring and is dropped for that line
    first = np.r_[True, gline[1:] != gline[:-1]]
    idx_in_line = np.arange(gline.size) - np.maximum.accumulate(
        np.where(first, np.arange(gline.size), 0))
    counts_line = np.bincount(gline, minlength=int(n_lines.sum()))
    even_line = counts_line[gline] % 2 == 0
    is_start = (idx_in_line % 2 == 0) & even_line
    i0 = np.flatnonzero(is_start)
    i1 = i0 + 1
    t0, t1 = t[i0], t[i1]
    keep = t1 > t0
    i0, t0, t1 = i0[keep], t0[keep], t1[keep]
    fi, si = f[i0], s_line[i0]
    start = si[:, None] * v[fi] + t0[:, None] * u[fi]
    end = si[:, None] * v[fi] + t1[:, None] * u[fi]
    return LateralSet(fi, k[i0], si, t0, t1, start, end), grid


def _extent_across(a, b, owner, v, n):
    va = v[owner]
    lo = np.minimum(np.einsum("ij,ij->i", a, va), np.einsum("ij,ij->i", b, va))
    hi = np.maximum(np.einsum("ij,ij->i", a, va), np.einsum("ij,ij->i", b, va))
    s_min = np.full(n, np.inf)
    s_max = np.full(n, -np.inf)
    np.minimum.at(s_min, owner, lo)
    np.maximum.at(s_max, owner, hi)
    return s_min, s_max


def edge_crossings(a, b, owner, grid):
    """Crossings of edges with the scan lines, as it was (laterals.edge_crossings)."""
    u, v = grid.u[owner], grid.v[owner]
    sa = np.einsum("ij,ij->i", a, v)
    sb = np.einsum("ij,ij->i", b, v)
    ta = np.einsum("ij,ij->i", a, u)
    tb = np.einsum("ij,ij->i", b, u)
    lo = np.minimum(sa, sb)
    hi = np.maximum(sa, sb)
    L = grid.spacing[owner]
    s0 = grid.s0[owner]
    k_lo = np.maximum(np.ceil((lo - s0) / L).astype(np.int64), 0)
    k_hi = np.minimum(np.ceil((hi - s0) / L).astype(np.int64) - 1, grid.n_lines[owner] - 1)
    count = np.maximum(k_hi - k_lo + 1, 0)
    total = int(count.sum())
    if total == 0:
        return np.empty(0, int), np.empty(0, int), np.empty(0), np.empty(0)
    e = np.repeat(np.arange(owner.size), count)
    k = k_lo[e] + (np.arange(total) - np.repeat(np.cumsum(count) - count, count))
    f = owner[e]
    s_line = grid.s0[f] + k * grid.spacing[f]
    with np.errstate(invalid="ignore", divide="ignore"):
        frac = (s_line - sa[e]) / (sb[e] - sa[e])
    t = ta[e] + frac * (tb[e] - ta[e])
    return f, k, s_line, t
