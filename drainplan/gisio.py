"""The one module that opens and writes GIS files (vector layers, survey points, DEMs).

Readers turn a file into a GeoDataFrame in a metric projected CRS (or refuse,
with a one-line message); writers write to a temporary file beside the target
and rename it, so a failure leaves no half-written file, and they refuse to
overwrite unless told. GeoPackages are written with a fixed timestamp so the
same input gives the same file.
"""

from __future__ import annotations

import contextlib
import csv
import math
import os
import signal
import stat
import tempfile
import threading
from pathlib import Path

import numpy as np

from .errors import InputError

__all__ = ["read_layer", "to_metric", "read_survey", "read_dem", "write_layers",
           "write_atomic", "write_outputs", "write_geojson", "check_input_file",
           "check_output_target", "field_overlaps", "signals_deferred", "clear_stale_temps",
           "FIXED_TIMESTAMP", "SCALE_TOLERANCE", "LAYER_SCHEMA"]

#: Timestamp written into GeoPackage metadata (deterministic output).
FIXED_TIMESTAMP = "2000-01-01T00:00:00.000Z"

#: Largest departure of a working CRS's scale factor from 1 at the fields (0.5 %):
#: beyond it distances on the map are not distances on the ground, and the layout
#: is done in the local UTM zone instead.
SCALE_TOLERANCE = 0.005

#: Largest absolute coordinate accepted in any CRS (1e8 m is 2.5 times around the
#: Earth): larger values cannot be a real position.
MAX_COORDINATE = 1e8

#: Largest GIS or survey file read (4 GiB); device files and pipes are refused.
MAX_INPUT_BYTES = 4 * 2**30

#: Declared geometry type and column types of the layers drainplan writes, so an
#: empty layer keeps its schema. Columns not listed keep the type of their data.
LAYER_SCHEMA = {
    "field": ("Polygon", {"field_id": "str", "area_ha": "float", "bearing_deg": "float",
                          "spacing_m": "float", "laterals": "int", "lateral_length_m": "float",
                          "main_length_m": "float", "work_crs": "str"}),
    "laterals": ("LineString", {"field_id": "str", "lateral_id": "str", "length_m": "float",
                                "spacing_m": "float"}),
    "connectors": ("LineString", {"field_id": "str", "lateral_id": "str", "length_m": "float",
                                  "pipe": "str"}),
    "junctions": ("Point", {"field_id": "str", "lateral_id": "str"}),
    "mains": ("LineString", {"field_id": "str", "main_id": "str", "length_m": "float",
                             "kind": "str"}),
    "outlets": ("Point", {"field_id": "str", "kind": "str"}),
    "exclusions": ("Polygon", {"kind": "str", "setback_m": "float"}),
    "unconnected": ("LineString", {"field_id": "str", "length_m": "float"}),
    "lateral_pipes": ("LineString", {"reach_id": "str", "field_id": "str"}),
    "main_reaches": ("LineString", {"reach_id": "str", "field_id": "str"}),
    "pipe_warnings": ("Point", {"reach_id": "str", "chainage_m": "float", "problem": "str",
                                "fix": "str"}),
}


def _gpd():
    import geopandas

    return geopandas


def _looks_like_degrees(bounds):
    minx, miny, maxx, maxy = bounds
    return (np.all(np.isfinite(bounds)) and -180 <= minx <= maxx <= 180
            and -90 <= miny <= maxy <= 90)


_IMAGE_MAGIC = {b"\x89PNG\r\n\x1a\n": "PNG", b"\xff\xd8\xff": "JPEG", b"GIF87a": "GIF",
                b"GIF89a": "GIF"}


def check_input_file(path, *, what, max_bytes=MAX_INPUT_BYTES, image=False, param=None):
    """Refuse a referenced file that cannot be read sensibly, before any work starts.

    It must exist, be a regular file (not a folder, device or pipe), hold at least
    one byte and at most ``max_bytes``; with ``image`` it must be a PNG, JPEG or
    GIF image that decodes.

    Raises
    ------
    InputError
        One line naming ``what`` and the path.
    """
    p = Path(path)
    try:
        st = p.stat()
    except FileNotFoundError:
        raise InputError(f"{what} file not found: {path}", param=param) from None
    except OSError as exc:
        raise InputError(f"cannot read {what} file {path}: {exc.strerror}", param=param) \
            from None
    if stat.S_ISDIR(st.st_mode):
        raise InputError(f"{what} {path} is a folder, not a file", param=param)
    if not stat.S_ISREG(st.st_mode):
        raise InputError(f"{what} {path} is not a regular file (a device or a pipe?)",
                         param=param)
    if st.st_size == 0:
        raise InputError(f"{what} file {path} is empty (0 bytes)", param=param)
    if st.st_size > max_bytes:
        raise InputError(f"{what} file {path} is {st.st_size / 2**20:,.0f} MiB, more than the "
                         f"limit of {max_bytes / 2**20:,.0f} MiB", param=param)
    if image:
        with open(p, "rb") as fh:
            head = fh.read(8)
        kind = next((k for m, k in _IMAGE_MAGIC.items() if head.startswith(m)), None)
        ok = kind is not None
        if ok:
            try:
                from PIL import Image

                with Image.open(p) as im:
                    im.verify()
            except ImportError:
                pass
            except Exception:
                ok = False
        if not ok:
            raise InputError(f"{what} {path} is not a PNG, JPEG or GIF image", param=param)
    return p


def _swapped_hint(bounds):
    """' ... wrong order' when lon/lat bounds read as lat/lon would make sense."""
    minx, miny, maxx, maxy = bounds
    if max(abs(minx), abs(maxx)) <= 84 and max(abs(miny), abs(maxy)) <= 180:
        return ("; they look like latitude/longitude in the wrong order (GeoJSON and "
                "EPSG:4326 take longitude first, then latitude)")
    return ""


def read_layer(path, *, layer=None, crs=None, what="fields", option="FIELDS", keep_z=False):
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
    keep_z : bool
        Keep Z coordinates (a drawn proposal whose Z values are pipe inverts); by
        default polygons lose theirs (elevations in a boundary are not used).

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
    check_input_file(p, what=what, param=option)
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
    if not keep_z:
        gdf = _drop_z(gdf)
    bounds = np.asarray(gdf.total_bounds, float) if len(gdf) else np.full(4, np.nan)
    if len(gdf) and not gdf.geometry.is_empty.all():
        if not np.all(np.isfinite(bounds)) or np.max(np.abs(bounds)) > MAX_COORDINATE:
            big = bounds[np.isfinite(bounds)]
            worst = f"{big[np.argmax(np.abs(big))]:.6g}" if big.size else "NaN"
            raise InputError(f"{what} file {path} holds coordinates that cannot be a real "
                             f"position ({worst}; at most {MAX_COORDINATE:g} in any CRS)",
                             param=option)
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
        hint = _swapped_hint(bounds)
        raise InputError(f"{what} file {path} says its CRS is {file_crs.to_string()} "
                         "(degrees) but its coordinates are not degrees" + (
                             hint or "; give the right CRS with --crs"), param="crs")
    if file_crs.is_geographic and len(gdf) and (bounds[3] > 84 or bounds[1] < -80):
        hint = _swapped_hint(bounds)
        raise InputError(f"{what} file {path} puts the features at latitude "
                         f"{bounds[3] if bounds[3] > 84 else bounds[1]:.6g}, beyond the UTM "
                         "zones (80 S to 84 N)" + (hint or "; give a polar --work-crs"),
                         param="crs" if hint else "work_crs")
    if file_crs.is_projected and len(gdf) and degrees and max(abs(bounds[[0, 2]])) <= 180 \
            and (bounds[2] - bounds[0]) < 5 and (bounds[3] - bounds[1]) < 5:
        raise InputError(f"{what} file {path} says its CRS is {file_crs.to_string()} "
                         "(projected) but its coordinates look like degrees; the CRS is "
                         "probably mislabelled (EPSG:4326?)", param="crs")
    return gdf, file_crs


def to_metric(gdf, file_crs, work_crs=None, notes=None):
    """Reproject to a metric projected CRS whose scale at the features is true.

    ``work_crs`` if given (refused if its scale factor at the features departs
    from 1 by more than :data:`SCALE_TOLERANCE`), else the file's CRS if it is
    projected in metres and true to scale there, else the local UTM zone. When a
    metric file CRS is set aside for its scale (Web Mercator, a polar
    stereographic CRS far from its pole), a line saying so is appended to
    ``notes``.
    """
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
        err = scale_error(target, gdf)
        if err > SCALE_TOLERANCE:
            raise InputError(f"--work-crs {work_crs!r} is not true to scale at the fields: "
                             f"distances are off by {err:.1%} there (at most "
                             f"{SCALE_TOLERANCE:.1%}); use the local UTM zone or a national "
                             "grid", param="work_crs")
        return gdf.to_crs(target), target
    if file_crs.is_projected and _unit_factor(file_crs) == 1.0:
        err = scale_error(file_crs, gdf)
        if err <= SCALE_TOLERANCE:
            return gdf.to_crs(file_crs), file_crs
        target = _utm(gdf)
        if notes is not None:
            notes.append(f"the fields' CRS {file_crs.to_string()} is not true to scale at the "
                         f"fields (distances off by {err:.1%}); the layout is computed in the "
                         f"local UTM zone {target.to_string()} instead")
        return gdf.to_crs(target), target
    target = _utm(gdf)
    return gdf.to_crs(target), target


def _utm(gdf):
    """The WGS 84 UTM zone at the centre of ``gdf``'s extent (lon/lat of its bounds)."""
    from pyproj import CRS

    try:
        x0, y0, x1, y1 = gdf.total_bounds
        if not gdf.crs.is_geographic:
            from pyproj import Transformer

            x0, y0, x1, y1 = Transformer.from_crs(gdf.crs, "EPSG:4326", always_xy=True) \
                .transform_bounds(x0, y0, x1, y1)
        if x0 > x1:                                 # across the antimeridian
            x1 += 360.0
        lon = ((x0 + x1) / 2.0 + 180.0) % 360.0 - 180.0
        lat = (y0 + y1) / 2.0
        ok = math.isfinite(lon) and -80.0 <= lat <= 84.0     # UTM's latitude band
    except Exception:
        ok = False
    if not ok:
        raise InputError("no UTM zone fits these coordinates; give a metric --work-crs",
                         param="work_crs")
    # zones of 6 degrees eastward from 180 W (the UTM definition; as EPSG's WGS 84 / UTM
    # CRSs 326zz north and 327zz south of the equator)
    zone = min(int((lon + 180.0) // 6.0), 59) + 1
    return CRS.from_epsg((32600 if lat >= 0 else 32700) + zone)


def scale_error(crs, gdf):
    """Largest departure from 1 of ``crs``'s scale at the corners and centre of
    ``gdf``'s extent: the larger of pyproj's projection factors (which take a
    spherical projection such as Web Mercator on its own sphere) and the ratio of
    geodesic distance on the CRS's ellipsoid (pyproj ``Geod``) to grid distance
    over short east and north steps (which sees that sphere is not the datum's
    ellipsoid)."""
    from pyproj import CRS, Proj, Transformer

    if len(gdf) == 0:
        return 0.0
    target = CRS.from_user_input(crs)
    x0, y0, x1, y1 = np.asarray(gdf.total_bounds, float)
    xs = np.array([x0, x1, x0, x1, (x0 + x1) / 2])
    ys = np.array([y0, y0, y1, y1, (y0 + y1) / 2])
    src = CRS.from_user_input(gdf.crs)
    try:
        if src.is_geographic:
            lon, lat = xs, ys
        else:
            lon, lat = Transformer.from_crs(src, "EPSG:4326", always_xy=True).transform(xs, ys)
        lon, lat = np.asarray(lon, float), np.asarray(lat, float)
        f = Proj(target).get_factors(lon, lat)
        k = [np.atleast_1d(f.meridional_scale), np.atleast_1d(f.parallel_scale)]
        # grid steps of 100 m east and north against their geodesic lengths
        geo = target.geodetic_crs
        fwd = Transformer.from_crs("EPSG:4326", target, always_xy=True)
        inv = Transformer.from_crs(target, geo, always_xy=True)
        gx, gy = fwd.transform(lon, lat)
        geod = target.get_geod()
        step = 100.0
        for dx, dy in ((step, 0.0), (0.0, step)):
            a_lon, a_lat = inv.transform(np.asarray(gx), np.asarray(gy))
            b_lon, b_lat = inv.transform(np.asarray(gx) + dx, np.asarray(gy) + dy)
            _, _, dist = geod.inv(a_lon, a_lat, b_lon, b_lat)
            k.append(step / np.asarray(dist, float))
        k = np.concatenate(k)
    except Exception:
        return float("inf")
    k = k[np.isfinite(k)]
    return float(np.max(np.abs(k - 1.0))) if k.size else float("inf")


#: Farthest an outlet may lie from the nearest field [m].
MAX_OUTLET_DISTANCE = 20_000.0


def check_outlet_near(points, geoms, file_crs=None):
    """Refuse outlet points (working CRS, metres) that are not finite or lie more than
    :data:`MAX_OUTLET_DISTANCE` from every field: a point given in the wrong CRS or
    with its coordinates swapped."""
    import shapely

    pts = np.asarray(points, float).reshape(-1, 2)
    usable = [g for g in geoms if g is not None]
    if not usable:
        return
    where = f" (in {file_crs.to_string()}, the fields file's CRS)" if file_crs else ""
    if not np.all(np.isfinite(pts)):
        raise InputError(f"the outlet is not near the fields: its coordinates{where} do not "
                         "transform to a nearby position", param="outlet")
    union = shapely.union_all(np.array(usable, dtype=object))
    d = shapely.distance(shapely.points(pts), union)
    if np.max(d) > MAX_OUTLET_DISTANCE:
        raise InputError(f"the outlet is not near the fields: it lies {np.max(d) / 1000:,.1f} "
                         f"km from the nearest one; give it in the fields' coordinates{where}",
                         param="outlet")


def field_overlaps(geoms, ids, *, min_area=1.0):
    """Pairs of fields that overlap by more than ``min_area`` [m2]:
    list of (id_a, id_b, shared area m2)."""
    import shapely

    arr = np.array([g if g is not None else shapely.Polygon() for g in geoms], dtype=object)
    if arr.size < 2:
        return []
    tree = shapely.STRtree(arr)
    i, j = tree.query(arr, predicate="intersects")
    keep = i < j
    i, j = i[keep], j[keep]
    if i.size == 0:
        return []
    area = shapely.area(shapely.intersection(arr[i], arr[j]))
    return [(ids[a], ids[b], float(s)) for a, b, s in zip(i, j, area) if s > min_area]


def _drop_z(gdf):
    """Polygons without Z (elevations in a boundary are not used, and mixed 2D/3D
    coordinates break the layout); lines and points keep theirs (a drawn pipe's Z
    may be its invert)."""
    import shapely

    geom = np.asarray(gdf.geometry.values, dtype=object)
    if not len(gdf):
        return gdf
    poly = np.isin(shapely.get_type_id(geom), (3, 6))          # Polygon, MultiPolygon
    hit = poly & shapely.has_z(geom)
    if bool(np.any(hit)):
        geom = geom.copy()
        geom[hit] = shapely.force_2d(geom[hit])
        gdf = gdf.set_geometry(geom, crs=gdf.crs)
    return gdf


def _unit_factor(crs):
    try:
        return float(crs.axis_info[0].unit_conversion_factor)
    except Exception:
        return float("nan")


def _short(exc):
    text = " ".join(str(exc).split())
    return text[:200]


_SIGNALS = (signal.SIGINT, signal.SIGTERM)


@contextlib.contextmanager
def signals_deferred():
    """Hold Ctrl-C and SIGTERM while a set of outputs is renamed into place, so an
    interruption comes after the commit (all outputs) or before it (none)."""
    if threading.current_thread() is not threading.main_thread() \
            or not hasattr(signal, "pthread_sigmask"):
        yield
        return
    old = signal.pthread_sigmask(signal.SIG_BLOCK, _SIGNALS)
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)


def _pid_alive(pid):
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except (PermissionError, OSError):
        return True
    return True


def temp_prefix(name):
    """Prefix of drainplan's temporary files and folders for the target ``name``:
    '.NAME.dpPID.' (the process id lets a later run tell a stale one)."""
    return f".{name}.dp{os.getpid()}."


def clear_stale_temps(folder, name=None):
    """Remove temporary files and folders that an interrupted drainplan run left in
    ``folder`` ('.NAME.dpPID.XXXX' whose process no longer runs). Returns their paths."""
    import re
    import shutil

    folder = Path(folder)
    pat = re.compile(r"^\.(?P<name>.+)\.dp(?P<pid>\d+)\.[A-Za-z0-9_]{6,}(\.[^/]*)?$")
    removed = []
    try:
        entries = list(folder.iterdir())
    except OSError:
        return removed
    for e in entries:
        m = pat.match(e.name)
        if not m or (name is not None and m["name"] != name) or _pid_alive(int(m["pid"])):
            continue
        try:
            if e.is_dir() and not e.is_symlink():
                shutil.rmtree(e)
            else:
                e.unlink()
            removed.append(e)
        except OSError:
            pass
    return removed


def _read_only(path):
    """True if ``path`` cannot be written: no permission, or no write bit at all
    (honoured even for a superuser)."""
    try:
        mode = os.stat(path).st_mode
    except OSError:
        return False
    return not os.access(path, os.W_OK) or not (mode & 0o222)


def check_output_target(path, *, overwrite=False, param="output"):
    """Check one output file before any output is written; return the real path
    to write (a symbolic link is written through, never replaced).

    Raises
    ------
    InputError
        The target exists without ``overwrite``, is a folder, or its folder is
        missing or read-only.
    """
    path = Path(path)
    real = path.resolve() if path.is_symlink() else path
    if path.is_symlink() and not real.exists() and not real.parent.exists():
        raise InputError(f"{path} is a link to {real}, whose folder does not exist",
                         param=param)
    if real.is_dir():
        raise InputError(f"{path} is a folder; give a file name", param=param)
    if real.exists() and not overwrite:
        raise InputError(f"{path} exists; use --overwrite to replace it", param=param)
    parent = real.parent if str(real.parent) else Path(".")
    if not parent.exists():
        raise InputError(f"folder {parent} does not exist", param=param)
    if _read_only(parent):
        raise InputError(f"cannot write {path}: folder {parent} is read-only", param=param)
    if real.exists() and _read_only(real):
        raise InputError(f"cannot replace {path}: the file is read-only", param=param)
    return real


def _remove_temp(tmp):
    for leftover in (tmp, tmp + "-journal", tmp + "-wal", tmp + "-shm"):
        if os.path.lexists(leftover):
            try:
                os.unlink(leftover)
            except OSError:
                pass


def write_outputs(jobs, *, overwrite=False):
    """Write several output files together: all or none.

    Every target is checked first (none written if one is refused); each is
    written to a temporary file beside it; only when all succeeded are they
    renamed into place, with Ctrl-C and SIGTERM held during the renames.

    Parameters
    ----------
    jobs : list of (path, writer) or (path, writer, option)
        ``writer(tmp_path)`` writes the file; ``option`` names the option in
        messages (default "output").
    overwrite : bool

    Returns
    -------
    list of Path
    """
    jobs = [(Path(j[0]), j[1], j[2] if len(j) > 2 else "output") for j in jobs]
    reals = [check_output_target(p, overwrite=overwrite, param=opt) for p, _, opt in jobs]
    seen = {}
    for (p, _, opt), real in zip(jobs, reals):
        key = os.path.abspath(real)
        if key in seen:
            raise InputError(f"{p} is given twice as an output", param=opt)
        seen[key] = p
    for real in reals:
        clear_stale_temps(real.parent, real.name)
    temps = []
    try:
        for (p, writer, _), real in zip(jobs, reals):
            fd, tmp = tempfile.mkstemp(prefix=temp_prefix(real.name), suffix=real.suffix,
                                       dir=real.parent)
            os.close(fd)
            os.unlink(tmp)
            temps.append(tmp)
            writer(tmp)
            if os.path.exists(tmp):
                _match_mode(tmp, real)
        with signals_deferred():
            for tmp, real in zip(temps, reals):
                os.replace(tmp, real)
    except BaseException:
        for tmp in temps:
            _remove_temp(tmp)
        raise
    return [p for p, _, _ in jobs]


def _match_mode(tmp, real):
    """Give a new file the usual permissions (mkstemp makes it private)."""
    try:
        if os.path.exists(real):
            os.chmod(tmp, stat.S_IMODE(os.stat(real).st_mode))
        else:
            umask = os.umask(0)
            os.umask(umask)
            os.chmod(tmp, 0o666 & ~umask)
    except OSError:
        pass


def write_atomic(path, writer, *, overwrite=False, suffix=None, param="output"):
    """Call ``writer(tmp_path)`` and rename the result onto ``path``.

    Refuses an existing ``path`` unless ``overwrite``; removes the temporary
    file if the writer fails. A symbolic link is written through.
    """
    return write_outputs([(path, writer, param)], overwrite=overwrite)[0]


def _typed(name, gdf):
    """``gdf`` with the declared column types of :data:`LAYER_SCHEMA` when empty."""
    import pandas as pd

    schema = LAYER_SCHEMA.get(name)
    if schema is None or len(gdf):
        return gdf
    gdf = gdf.copy()
    for col, kind in schema[1].items():
        if col in gdf.columns:
            gdf[col] = pd.Series([], dtype={"str": object, "float": "float64",
                                            "int": "int64"}[kind], index=gdf.index)
    return gdf


def _write_layer(gdf, path, name, driver, **kw):
    import pyogrio

    schema = LAYER_SCHEMA.get(name)
    if len(gdf) == 0 and schema is not None:
        gdf = _typed(name, gdf)
        kw["geometry_type"] = schema[0]
    pyogrio.write_dataframe(gdf, path, layer=name, driver=driver, **kw)


def write_layers(path, layers, *, overwrite=False, param="output"):
    """Write named GeoDataFrames as layers of one GeoPackage, atomically.

    Parameters
    ----------
    path : str or Path
        Target ``.gpkg`` file.
    layers : dict of str -> GeoDataFrame
        Layer name to data, written in this order. Empty layers keep their
        declared geometry type and column types (:data:`LAYER_SCHEMA`).
    overwrite : bool
    """
    return write_atomic(path, layers_writer(layers), overwrite=overwrite, param=param)


def layers_writer(layers):
    """A writer (for :func:`write_outputs`) of a GeoPackage holding ``layers``."""
    import pyogrio

    def writer(tmp):
        # SQLite need not wait for the disk after each layer: the file is a temporary
        # one, renamed into place only when complete
        pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": FIXED_TIMESTAMP,
                                         "OGR_SQLITE_SYNCHRONOUS": "OFF"})
        try:
            for name, gdf in layers.items():
                _write_layer(gdf, tmp, name, "GPKG", append=os.path.exists(tmp))
        finally:
            pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": None,
                                             "OGR_SQLITE_SYNCHRONOUS": None})

    return writer


def geojson_writer(gdf, name):
    """A writer of one layer as GeoJSON (WGS 84 lon/lat) whose ``name`` member is
    the layer's own name (the same file on every run)."""
    out = gdf.to_crs("EPSG:4326") if gdf.crs is not None else gdf

    def writer(tmp):
        _write_layer(out, tmp, name, "GeoJSON")

    return writer


def write_geojson(path, gdf, *, overwrite=False, name=None, param="output"):
    """Write one GeoDataFrame as GeoJSON (WGS 84 longitude/latitude), atomically."""
    name = name or Path(path).stem
    return write_atomic(path, geojson_writer(gdf, name), overwrite=overwrite, param=param)


def read_survey(path, *, crs, z_unit="m", work_crs=None):
    """Survey points from a CSV with columns x, y, z (or lon/lat, easting/northing,
    elevation); returns (xy in work_crs, z in metres)."""
    from pyproj import CRS, Transformer

    from .units import convert

    check_input_file(path, what="survey", param="survey")
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
    if not np.all(np.isfinite(xy)) or np.max(np.abs(xy)) > MAX_COORDINATE:
        raise InputError(f"survey file {path} holds x, y that cannot be a real position",
                         param="survey")
    z = np.asarray(convert(z, z_unit, "m"), float)
    try:
        src = CRS.from_user_input(crs)
    except Exception:
        raise InputError(f"survey CRS {crs!r} is not a known CRS (e.g. EPSG:4326)",
                         param="survey_crs") from None
    lo, hi = xy.min(axis=0), xy.max(axis=0)
    degrees = (-180 <= lo[0] and hi[0] <= 180 and -90 <= lo[1] and hi[1] <= 90
               and np.all(hi - lo < 5))
    if src.is_projected and degrees:
        named = " (its columns are named " + f"{cx}, {cy})" if cx.strip().lower() in (
            "lon", "longitude") else ""
        raise InputError(f"survey file {path}: x, y look like longitude and latitude in "
                         f"degrees{named}, but are read in {src.to_string()} (metres); give "
                         "their CRS with --survey-crs EPSG:4326 (survey_crs in a project "
                         "file)", param="survey_crs")
    if work_crs is not None and src != work_crs:
        tr = Transformer.from_crs(src, work_crs, always_xy=True)
        xy = np.c_[tr.transform(xy[:, 0], xy[:, 1])]
    return xy, z


def read_dem(path, work_crs):
    """A GeoTIFF DEM's first band, reprojected to ``work_crs`` if needed.

    Returns ``(values, affine transform (a, b, c, d, e, f), nodata)``; needs
    rasterio (the ``dem`` extra).
    """
    check_input_file(path, what="DEM", param="dem")
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
