"""Field polygons: checks and repair, lateral direction, drainable regions.

Shapely 2 idiom on arrays of geometries, coordinates in metres of a projected
CRS; no CRS and no file handling here.
"""

from __future__ import annotations

import numpy as np
import shapely

from ..errors import GeometryError

__all__ = ["check_fields", "long_axis_bearing", "drainable_regions", "SLIVER_WIDTH_M"]

#: A field whose mean width (2 area / perimeter) is below this is a sliver [m].
SLIVER_WIDTH_M = 5.0


def check_fields(geoms, names, *, repair=False):
    """Validate field polygons; repair them on request.

    Parameters
    ----------
    geoms : array_like of shapely geometries
    names : sequence of str
        Field names used in messages.
    repair : bool
        Repair invalid boundaries with ``shapely.make_valid`` (keeping the
        polygonal parts) instead of refusing them.

    Returns
    -------
    geoms : numpy.ndarray of shapely geometries
        Valid (Multi)Polygons; None where a field is skipped.
    reports : list of str
        One line per repaired or skipped field.

    Raises
    ------
    GeometryError
        For a geometry that is not polygonal, or an invalid one without
        ``repair`` (the message names the field and the reason).
    """
    geoms = np.asarray(geoms, dtype=object).copy()
    reports = []
    for i, (g, name) in enumerate(zip(geoms, names)):
        if g is None or shapely.is_empty(g):
            reports.append(f"field {name!r}: empty geometry, skipped")
            geoms[i] = None
            continue
        if shapely.get_type_id(g) not in (3, 6):
            raise GeometryError(f"field {name!r}: a field boundary must be a polygon, "
                                f"got {g.geom_type}", param="fields")
        if not shapely.is_valid(g):
            reason = shapely.is_valid_reason(g)
            if not repair:
                raise GeometryError(f"field {name!r}: invalid boundary ({reason}); fix it "
                                    "or use --repair", param="fields")
            fixed = shapely.make_valid(g)
            parts = shapely.get_parts(fixed)
            parts = parts[shapely.get_type_id(parts) == 3]
            g = shapely.union_all(parts) if parts.size else shapely.Polygon()
            reports.append(f"field {name!r}: invalid boundary ({reason}) repaired")
            geoms[i] = g
        area = shapely.area(g)
        if area <= 0:
            reports.append(f"field {name!r}: zero area, skipped")
            geoms[i] = None
            continue
        width = 2.0 * area / shapely.length(g)
        if width < SLIVER_WIDTH_M:
            reports.append(f"field {name!r}: sliver (mean width {width:.1f} m), skipped")
            geoms[i] = None
    return geoms, reports


def long_axis_bearing(geoms):
    """Bearing of the long axis of each geometry's minimum rotated rectangle.

    Returns degrees clockwise from grid north in [0, 180); NaN for empty input.

    Examples
    --------
    >>> float(long_axis_bearing([shapely.box(0, 0, 300, 100)])[0])
    90.0
    """
    geoms = np.asarray(geoms, dtype=object)
    out = np.full(geoms.shape, np.nan)
    ok = ~shapely.is_empty(geoms) & ~shapely.is_missing(geoms)
    if not np.any(ok):
        return out
    rect = shapely.oriented_envelope(geoms[ok])
    coords, idx = shapely.get_coordinates(shapely.get_exterior_ring(rect), return_index=True)
    first = np.searchsorted(idx, np.arange(rect.size))
    p0, p1, p2 = coords[first], coords[first + 1], coords[first + 2]
    e1, e2 = p1 - p0, p2 - p1
    longer = np.where((np.hypot(*e1.T) >= np.hypot(*e2.T))[:, None], e1, e2)
    bearing = np.degrees(np.arctan2(longer[:, 0], longer[:, 1])) % 180.0
    out[ok] = np.round(bearing, 9) % 180.0
    return out


def drainable_regions(fields, setback, exclusions=None, exclusion_setbacks=None):
    """Areas where laterals may lie: field less the headland setback and the
    exclusions' setback zones.

    Parameters
    ----------
    fields : array_like of (Multi)Polygon (None entries are skipped)
    setback : float
        Headland setback from the field boundary [m], >= 0.
    exclusions : array_like of shapely geometries, optional
        Points (wells), lines (hedges, waterways) or polygons (ponds, buildings).
    exclusion_setbacks : array_like, optional
        Setback around each exclusion [m].

    Returns
    -------
    insets : numpy.ndarray
        Fields less the headland setback.
    regions : numpy.ndarray
        Insets less the exclusion zones.
    zones : numpy.ndarray
        Per field, the union of exclusion zones that touch it (empty if none).
    features : numpy.ndarray
        Per field, the union of the exclusion features themselves.
    """
    fields = np.asarray(fields, dtype=object)
    present = np.array([g is not None for g in fields], dtype=bool)
    empty = shapely.Polygon()
    insets = np.full(fields.shape, empty, dtype=object)
    if np.any(present):
        with np.errstate(divide="ignore", invalid="ignore"):   # degenerate spikes
            insets[present] = shapely.buffer(fields[present].astype(object),
                                             -float(setback), join_style="mitre") \
                if setback > 0 else fields[present]
    regions = insets.copy()
    zones = np.full(fields.shape, empty, dtype=object)
    features = np.full(fields.shape, shapely.GeometryCollection(), dtype=object)
    if exclusions is not None and len(exclusions):
        ex = np.asarray(exclusions, dtype=object)
        sb = np.broadcast_to(np.asarray(exclusion_setbacks, float), ex.shape)
        with np.errstate(divide="ignore", invalid="ignore"):
            buffered = shapely.buffer(ex, sb, quad_segs=16)
        tree = shapely.STRtree(buffered)
        field_idx = np.flatnonzero(present)
        pairs = tree.query(fields[field_idx].astype(object), predicate="intersects")
        owners = field_idx[pairs[0]]
        order = np.argsort(owners, kind="stable")       # group once: sort and split
        owners, hits = owners[order], pairs[1][order]
        starts = np.flatnonzero(np.r_[True, owners[1:] != owners[:-1]]) if owners.size \
            else np.zeros(0, int)
        for f, which in zip(owners[starts], np.split(hits, starts[1:])):
            zone = shapely.union_all(buffered[which])
            zones[f] = zone
            features[f] = shapely.union_all(ex[which])
            regions[f] = shapely.difference(insets[f], zone)
    return insets, regions, zones, features
