"""Ground elevations: surfaces from survey points or a DEM, profiles along lines,
and the plane that best fits a field.

Coordinates are metres in the layout's projected CRS; elevations in metres.
The surface objects take arrays of points and return arrays of elevations.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .errors import InputError

__all__ = ["PointSurface", "RasterSurface", "fit_plane", "fall_bearing", "sample_line",
           "check_coverage"]


@dataclass
class PointSurface:
    """Elevation surface from scattered survey points.

    Linear interpolation on the Delaunay triangulation of the points (scipy
    ``Delaunay``: the triangle by ``find_simplex``, barycentric weights from its
    transform, as scipy's ``LinearNDInterpolator`` computes them, without loading
    ``scipy.interpolate``); outside the triangulated hull the nearest point's
    elevation is used (a ``cKDTree`` built on the first such point), so small gaps at
    the field edge do not break the design.
    :func:`check_coverage` refuses fields that lie largely outside the survey.

    Notes
    -----
    Two things keep it fast whatever the caller's thread settings: the barycentric
    transform of every triangle is computed here with numpy (closed-form 2 x 2
    inverses, the same numbers scipy computes with one small LAPACK call per
    triangle, which with multithreaded BLAS on a busy machine can cost seconds), and
    the points of a call are looked up in a space-filling order so that scipy's walk
    from one point's triangle to the next stays short.
    """

    xy: np.ndarray
    z: np.ndarray

    def __post_init__(self):
        from scipy.spatial import Delaunay, QhullError

        self.xy = np.asarray(self.xy, float)
        self.z = np.asarray(self.z, float)
        if self.xy.ndim != 2 or self.xy.shape[1] != 2 or len(self.xy) != len(self.z):
            raise InputError("survey points need x, y and z for every point", param="survey")
        if len(self.z) < 3:
            raise InputError("at least 3 survey points are needed", param="survey")
        if not np.all(np.isfinite(self.xy)) or not np.all(np.isfinite(self.z)):
            raise InputError("survey points hold missing or non-numeric values",
                             param="survey")
        try:
            tri = Delaunay(self.xy)
        except QhullError:
            raise InputError("survey points are all on one line; they cannot describe a "
                             "surface", param="survey") from None
        _set_barycentric_transforms(tri)
        self._tri = tri
        self._nearest = None
        lo, hi = self.xy.min(axis=0), self.xy.max(axis=0)
        # cells of about 16 survey points each for the lookup order
        self._cell = max(float(np.sqrt(np.prod(np.maximum(hi - lo, 1e-9)) * 16.0 /
                                       len(self.z))), 1e-6)
        self._origin = lo

    def __call__(self, xy):
        xy = np.asarray(xy, float).reshape(-1, 2)
        # points far apart one after the other (not along lines): look them up in cell
        # order, so that scipy's walk from one point's triangle to the next stays short
        if len(xy) >= 64 and _mean_step(xy) > self._cell:
            order = _cell_order(xy, self._origin, self._cell)
            z = np.empty(len(xy))
            z[order] = self._linear(xy[order])
        else:
            z = self._linear(xy)
        miss = np.isnan(z)
        if np.any(miss):
            if self._nearest is None:
                from scipy.spatial import cKDTree

                self._nearest = cKDTree(self.xy)
            z[miss] = self.z[self._nearest.query(xy[miss])[1]]
        return z

    def _linear(self, xy, block=65536):
        """Linear interpolation in the triangle holding each point (NaN outside); the
        triangles found in one pass, the weights in blocks of points (small
        temporaries: large ones cost fresh memory pages on a busy machine)."""
        tri = self._tri
        s = tri.find_simplex(xy)
        transform = tri.transform
        z = np.full(len(xy), np.nan)
        for a in range(0, len(xy), block):
            sb = s[a:a + block]
            inside = np.flatnonzero(sb >= 0)
            si = sb[inside]
            q = xy[a:a + block][inside]
            t = transform[si]                                 # (m, 3, 2): T^-1, r
            dx, dy = q[:, 0] - t[:, 2, 0], q[:, 1] - t[:, 2, 1]
            # barycentric weights and the weighted sum in scipy's order of operations
            # (LinearNDInterpolator), so the numbers are the same to the last bit
            c0 = t[:, 0, 0] * dx + t[:, 0, 1] * dy
            c1 = t[:, 1, 0] * dx + t[:, 1, 1] * dy
            c2 = (1.0 - c0) - c1
            zv = self.z[tri.simplices[si]]
            z[a + inside] = (c0 * zv[:, 0] + c1 * zv[:, 1]) + c2 * zv[:, 2]
        return z

    def hull(self):
        import shapely

        return shapely.convex_hull(shapely.multipoints(self.xy))


def _set_barycentric_transforms(tri):
    """Give a 2-D scipy ``Delaunay`` its barycentric transforms, computed with numpy.

    scipy computes ``tri.transform`` on first use with one LAPACK solve per triangle;
    the same array is built here in one vectorised pass: for a triangle with vertices
    r0, r1, r2, ``T = [r0 - r2, r1 - r2]`` (as columns), the transform holds
    ``T^-1`` and ``r2``; triangles whose reciprocal condition number (1-norm) is below
    ``1000 eps`` get NaN, as in scipy. Left to scipy if its layout differs.
    """
    if not hasattr(tri, "_transform") or tri.ndim != 2:
        return
    p = tri.points[tri.simplices]                      # (n, 3, 2)
    r = p[:, 2, :]
    a, c = p[:, 0, 0] - r[:, 0], p[:, 0, 1] - r[:, 1]  # T = [[a, b], [c, d]]
    b, d = p[:, 1, 0] - r[:, 0], p[:, 1, 1] - r[:, 1]
    det = a * d - b * c
    with np.errstate(divide="ignore", invalid="ignore"):
        inv = np.stack([np.stack([d, -b], axis=1), np.stack([-c, a], axis=1)],
                       axis=1) / det[:, None, None]
        norm = np.maximum(np.abs(a) + np.abs(c), np.abs(b) + np.abs(d))
        norm_inv = np.max(np.abs(inv).sum(axis=1), axis=1)
        bad = ~(1.0 / (norm * norm_inv) >= 1000.0 * np.finfo(float).eps)
    out = np.concatenate([inv, r[:, None, :]], axis=1)
    out[bad] = np.nan
    tri._transform = np.ascontiguousarray(out)


def _mean_step(xy, windows=8, width=1000):
    """Mean distance between consecutive points, over a few windows of the array."""
    n = len(xy)
    starts = np.unique(np.linspace(0, max(n - width, 0), windows).astype(int))
    idx = (starts[:, None] + np.arange(min(width, n))[None, :]).ravel()
    d = np.diff(xy[idx].reshape(len(starts), -1, 2), axis=1)
    return float(np.mean(np.hypot(d[..., 0], d[..., 1])))


def _cell_order(xy, origin, cell):
    """Order of points along rows of square cells, every other row reversed (a
    serpentine), so that consecutive points are near each other."""
    if len(xy) < 64:
        return np.arange(len(xy))
    ij = np.floor((xy - origin) / cell)
    ij = np.nan_to_num(ij, nan=0.0, posinf=0.0, neginf=0.0)
    ij = np.clip(ij, -1e6, 1e6).astype(np.int64)
    ij -= ij.min(axis=0)
    ncol = int(ij[:, 0].max()) + 1
    col = np.where(ij[:, 1] % 2 == 0, ij[:, 0], ncol - 1 - ij[:, 0])
    return np.argsort(ij[:, 1] * ncol + col, kind="stable")


@dataclass
class RasterSurface:
    """Elevation surface from a DEM grid (bilinear interpolation).

    ``transform`` is the affine transform (a, b, c, d, e, f) of the grid as in
    rasterio: x = c + a col + b row, y = f + d col + e row, at pixel corners.
    """

    values: np.ndarray
    transform: tuple
    nodata: float | None = None

    def __post_init__(self):
        from scipy.interpolate import RegularGridInterpolator

        a, b, c, d, e, f = self.transform[:6]
        if b != 0 or d != 0:
            raise InputError("rotated DEM grids are not supported", param="dem")
        v = np.asarray(self.values, float)
        if self.nodata is not None:
            v = np.where(v == self.nodata, np.nan, v)
        self.values = v
        rows, cols = v.shape
        xs = c + a * (np.arange(cols) + 0.5)
        ys = f + e * (np.arange(rows) + 0.5)
        ox = np.argsort(xs)
        oy = np.argsort(ys)
        self._interp = RegularGridInterpolator((ys[oy], xs[ox]), v[np.ix_(oy, ox)],
                                               bounds_error=False, fill_value=np.nan)
        self._bounds = (min(xs), min(ys), max(xs), max(ys))

    def __call__(self, xy):
        xy = np.asarray(xy, float).reshape(-1, 2)
        return self._interp(xy[:, ::-1])

    def hull(self):
        import shapely

        valid = np.isfinite(self.values)
        if not np.any(valid):
            return shapely.Polygon()
        return shapely.box(*self._bounds)


def check_coverage(surface, fields, names, *, max_outside=0.05):
    """Refuse fields whose area lies largely outside the surveyed area.

    Raises
    ------
    InputError
        Naming the first field with more than ``max_outside`` of its area
        outside the survey's hull (or with elevations missing).
    """
    import shapely

    hull = surface.hull()
    for g, name in zip(fields, names):
        if g is None:
            continue
        outside = shapely.area(shapely.difference(g, hull)) / shapely.area(g)
        if outside > max_outside:
            raise InputError(f"the elevations do not cover field {name!r}: {outside:.0%} "
                             "of its area lies outside the surveyed area", param="survey")
        pts = shapely.get_coordinates(g)
        if np.any(~np.isfinite(surface(pts))):
            raise InputError(f"the elevation surface has no value at part of field {name!r}",
                             param="survey")


def fit_plane(xy, z):
    """Least-squares plane z = a x + b y + c; returns (a, b, c)."""
    xy = np.asarray(xy, float)
    A = np.c_[xy, np.ones(len(xy))]
    coef, *_ = np.linalg.lstsq(A, np.asarray(z, float), rcond=None)
    return tuple(coef)


def fall_bearing(a, b):
    """Bearing (degrees clockwise from north) of steepest descent of z = a x + b y + c,
    and the slope [m/m]."""
    bearing = np.degrees(np.arctan2(-a, -b)) % 360.0
    return float(bearing), float(np.hypot(a, b))


def sample_line(line, step=5.0):
    """Points along a LineString every ``step`` metres (ends included).

    Returns ``(chainage, xy)``.
    """
    import shapely

    length = line.length
    n = max(2, int(np.ceil(length / step)) + 1)
    ch = np.linspace(0.0, length, n)
    pts = shapely.line_interpolate_point(line, ch)
    return ch, shapely.get_coordinates(pts)
