"""The one module that opens and writes GIS files (vector layers, survey points, DEMs).

Readers turn a file into a GeoDataFrame in a metric projected CRS (or refuse,
with a one-line message); writers write to a temporary file beside the target
and rename it, so a failure leaves no half-written file, and they refuse to
overwrite unless told. GeoPackages are written with a fixed timestamp so the
same input gives the same file.
"""

from __future__ import annotations

import csv
import os
import tempfile
from pathlib import Path

import numpy as np

from .errors import InputError

__all__ = ["read_layer", "to_metric", "read_survey", "read_dem", "write_layers",
           "write_atomic", "write_geojson", "FIXED_TIMESTAMP"]

#: Timestamp written into GeoPackage metadata (deterministic output).
FIXED_TIMESTAMP = "2000-01-01T00:00:00.000Z"


def _gpd():
    import geopandas

    return geopandas


def _looks_like_degrees(bounds):
    minx, miny, maxx, maxy = bounds
    return (np.all(np.isfinite(bounds)) and -180 <= minx <= maxx <= 180
            and -90 <= miny <= maxy <= 90)


def read_layer(path, *, layer=None, crs=None, what="fields", option="FIELDS"):
    """Read a vector layer: GeoJSON, GeoPackage, Shapefile (also zipped), FlatGeobuf.

    Parameters
    ----------
    path : str or Path
    layer : str, optional
        Layer name (GeoPackages with several layers).
    crs : str, optional
        CRS to assign when the file has none (e.g. "EPSG:4326").
    what : str
        Name used in messages ("fields", "exclusions").
    option : str
        Option or argument name used in messages.

    Returns
    -------
    (GeoDataFrame, pyproj.CRS)
        The data in the file's CRS, and that CRS.

    Raises
    ------
    InputError
        Missing or unreadable file, unknown layer, no CRS, coordinates that
        contradict the CRS (degrees labelled as metres or the reverse).
    """
    import pyogrio
    from pyproj import CRS

    p = Path(path)
    if crs is not None:
        try:
            CRS.from_user_input(crs)
        except Exception:
            raise InputError(f"--crs {crs!r} is not a known CRS (e.g. EPSG:4326)",
                             param="crs") from None
    if not p.exists():
        raise InputError(f"{what} file not found: {path}", param=option)
    src = str(p)
    if p.suffix.lower() == ".zip":
        src = f"/vsizip/{p.resolve()}"
    try:
        layers = [row[0] for row in pyogrio.list_layers(src)]
    except Exception as exc:
        raise InputError(f"cannot read {what} file {path}: {_short(exc)}", param=option) from None
    if layer is not None and layer not in layers:
        raise InputError(f"layer {layer!r} not found in {path}; layers: {', '.join(layers)}",
                         param="layer" if what == "fields" else f"{what}-layer")
    if layer is None and len(layers) > 1 and p.suffix.lower() == ".gpkg":
        raise InputError(f"{path} has several layers ({', '.join(layers)}); choose one with "
                         f"--{'layer' if what == 'fields' else what + '-layer'}",
                         param="layer" if what == "fields" else f"{what}-layer")
    try:
        gdf = _gpd().read_file(src, layer=layer, engine="pyogrio")
    except Exception as exc:
        raise InputError(f"cannot read {what} file {path}: {_short(exc)}", param=option) from None
    if not hasattr(gdf, "geometry") or "geometry" not in getattr(gdf, "columns", []):
        raise InputError(f"{what} file {path} holds no geometries (a table without "
                         "coordinates?)", param=option)
    bounds = np.asarray(gdf.total_bounds, float) if len(gdf) else np.full(4, np.nan)
    degrees = _looks_like_degrees(bounds)
    if gdf.crs is None:
        if crs is None:
            hint = (" (its coordinates look like degrees of longitude and latitude: "
                    "--crs EPSG:4326)" if degrees else "")
            raise InputError(f"{what} file {path} has no coordinate reference system; give "
                             f"one with --crs EPSG:<code>{hint}", param="crs")
        try:
            gdf = gdf.set_crs(CRS.from_user_input(crs))
        except Exception:
            raise InputError(f"--crs {crs!r} is not a known CRS (e.g. EPSG:4326)",
                             param="crs") from None
    file_crs = CRS.from_user_input(gdf.crs)
    if file_crs.is_geographic and len(gdf) and not _looks_like_degrees(bounds):
        raise InputError(f"{what} file {path} says its CRS is {file_crs.to_string()} "
                         "(degrees) but its coordinates are not degrees; give the right CRS "
                         "with --crs", param="crs")
    if file_crs.is_projected and len(gdf) and degrees and max(abs(bounds[[0, 2]])) <= 180 \
            and (bounds[2] - bounds[0]) < 5 and (bounds[3] - bounds[1]) < 5:
        raise InputError(f"{what} file {path} says its CRS is {file_crs.to_string()} "
                         "(projected) but its coordinates look like degrees; the CRS is "
                         "probably mislabelled (EPSG:4326?)", param="crs")
    return gdf, file_crs


def to_metric(gdf, file_crs, work_crs=None):
    """Reproject to a metric projected CRS: ``work_crs`` if given, the file's CRS
    if it is projected in metres, otherwise the local UTM zone."""
    from pyproj import CRS

    if work_crs is not None:
        try:
            target = CRS.from_user_input(work_crs)
        except Exception:
            raise InputError(f"--work-crs {work_crs!r} is not a known CRS",
                             param="work_crs") from None
        if not target.is_projected or _unit_factor(target) != 1.0:
            raise InputError(f"--work-crs {work_crs!r} must be a projected CRS in metres",
                             param="work_crs")
    elif file_crs.is_projected and _unit_factor(file_crs) == 1.0:
        target = file_crs
    else:
        target = gdf.estimate_utm_crs()
    return gdf.to_crs(target), target


def _unit_factor(crs):
    try:
        return float(crs.axis_info[0].unit_conversion_factor)
    except Exception:
        return float("nan")


def _short(exc):
    text = " ".join(str(exc).split())
    return text[:200]


def write_atomic(path, writer, *, overwrite=False, suffix=None):
    """Call ``writer(tmp_path)`` and rename the result onto ``path``.

    Refuses an existing ``path`` unless ``overwrite``; removes the temporary
    file if the writer fails.
    """
    path = Path(path)
    if path.exists() and not overwrite:
        raise InputError(f"{path} exists; use --overwrite to replace it", param="output")
    if not path.parent.exists():
        raise InputError(f"folder {path.parent} does not exist", param="output")
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=suffix or path.suffix,
                               dir=path.parent)
    os.close(fd)
    os.unlink(tmp)
    try:
        writer(tmp)
        os.replace(tmp, path)
    except BaseException:
        for leftover in (tmp, tmp + "-journal", tmp + "-wal", tmp + "-shm"):
            if os.path.exists(leftover):
                os.unlink(leftover)
        raise
    return path


def write_layers(path, layers, *, overwrite=False):
    """Write named GeoDataFrames as layers of one GeoPackage, atomically.

    Parameters
    ----------
    path : str or Path
        Target ``.gpkg`` file.
    layers : dict of str -> GeoDataFrame
        Layer name to data, written in this order.
    overwrite : bool
    """
    import pyogrio

    def writer(tmp):
        pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": FIXED_TIMESTAMP})
        try:
            for name, gdf in layers.items():
                pyogrio.write_dataframe(gdf, tmp, layer=name, driver="GPKG",
                                        append=os.path.exists(tmp))
        finally:
            pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": None})

    return write_atomic(path, writer, overwrite=overwrite)


def write_geojson(path, gdf, *, overwrite=False):
    """Write one GeoDataFrame as GeoJSON (WGS 84 longitude/latitude), atomically."""
    import pyogrio

    out = gdf.to_crs("EPSG:4326") if gdf.crs is not None else gdf
    return write_atomic(path, lambda tmp: pyogrio.write_dataframe(out, tmp, driver="GeoJSON"),
                        overwrite=overwrite)


def read_survey(path, *, crs, z_unit="m", work_crs=None):
    """Survey points from a CSV with columns x, y, z (or lon/lat, easting/northing,
    elevation); returns (xy in work_crs, z in metres)."""
    from pyproj import CRS, Transformer

    from .units import convert

    try:
        with open(path, newline="", encoding="utf-8-sig") as fh:
            rows = list(csv.DictReader(fh))
    except FileNotFoundError:
        raise InputError(f"survey file not found: {path}", param="survey") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read survey file {path}: {exc}", param="survey") from None
    if not rows:
        raise InputError(f"survey file {path} holds no points", param="survey")
    cols = {c.strip().lower(): c for c in rows[0].keys() if c}
    pick = lambda *names: next((cols[n] for n in names if n in cols), None)  # noqa: E731
    cx, cy = pick("x", "lon", "longitude", "easting", "e"), pick("y", "lat", "latitude",
                                                                 "northing", "n")
    cz = pick("z", "elevation", "elev", "height", "h")
    missing = [n for n, c in (("x", cx), ("y", cy), ("z", cz)) if c is None]
    if missing:
        raise InputError(f"survey file {path} needs columns x, y and z (missing: "
                         f"{', '.join(missing)})", param="survey")
    try:
        xy = np.array([[float(r[cx]), float(r[cy])] for r in rows])
        z = np.array([float(r[cz]) if r[cz] not in ("", None) else np.nan for r in rows])
    except (TypeError, ValueError):
        raise InputError(f"survey file {path} holds a value that is not a number",
                         param="survey") from None
    if np.any(~np.isfinite(z)):
        i = int(np.flatnonzero(~np.isfinite(z))[0])
        raise InputError(f"survey file {path}: point {i + 1} has no z", param="survey")
    z = np.asarray(convert(z, z_unit, "m"), float)
    try:
        src = CRS.from_user_input(crs)
    except Exception:
        raise InputError(f"survey CRS {crs!r} is not a known CRS (e.g. EPSG:4326)",
                         param="survey_crs") from None
    if work_crs is not None and src != work_crs:
        tr = Transformer.from_crs(src, work_crs, always_xy=True)
        xy = np.c_[tr.transform(xy[:, 0], xy[:, 1])]
    return xy, z


def read_dem(path, work_crs):
    """A GeoTIFF DEM's first band, reprojected to ``work_crs`` if needed.

    Returns ``(values, affine transform (a, b, c, d, e, f), nodata)``; needs
    rasterio (the ``dem`` extra).
    """
    try:
        import rasterio
        from rasterio.warp import Resampling, calculate_default_transform, reproject
    except ImportError:
        raise InputError("reading a DEM needs rasterio: pip install 'drainplan[dem]'",
                         param="dem") from None
    try:
        with rasterio.open(path) as ds:
            if ds.crs is None:
                raise InputError(f"DEM {path} has no CRS", param="dem")
            band = ds.read(1).astype(float)
            nodata = ds.nodata
            if ds.crs != work_crs:
                # reproject the grid to the layout's metric CRS
                tr, w, h = calculate_default_transform(ds.crs, work_crs.to_wkt(), ds.width,
                                                       ds.height, *ds.bounds)
                out = np.full((h, w), np.nan)
                reproject(band, out, src_transform=ds.transform, src_crs=ds.crs,
                          src_nodata=nodata, dst_transform=tr, dst_crs=work_crs.to_wkt(),
                          dst_nodata=np.nan, resampling=Resampling.bilinear)
                return out, tuple(tr)[:6], None
            return band, tuple(ds.transform)[:6], nodata
    except rasterio.errors.RasterioIOError as exc:
        raise InputError(f"cannot read DEM {path}: {exc}", param="dem") from None


# --- batch work files (drainplan batch): finished partitions of an unfinished run ---


def write_batch_part(path, result):
    """Write one finished batch partition (a dict of arrays) atomically.

    These are drainplan's own work files in the hidden ``.OUT.gpkg.parts`` folder
    beside the output, read back by :func:`read_batch_part` when a run resumes.
    """
    import pickle

    def writer(tmp):
        with open(tmp, "wb") as fh:
            pickle.dump(result, fh, protocol=pickle.HIGHEST_PROTOCOL)

    return write_atomic(path, writer, overwrite=True)


def read_batch_part(path):
    """Read a partition written by :func:`write_batch_part` (only drainplan's own
    work files: they are pickles)."""
    import pickle

    try:
        with open(path, "rb") as fh:
            return pickle.load(fh)
    except (OSError, EOFError, pickle.UnpicklingError) as exc:
        raise InputError(f"cannot read the batch work file {path} ({exc}); start again "
                         "with --overwrite", param="resume") from None
