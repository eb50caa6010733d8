"""Many fields at once: soil per field, spacing, layout and pipe quantities.

:func:`run_batch` reads a fields layer (and a soil map), splits the fields into
spatially compact partitions (Hilbert order of their centroids, so neighbouring
fields and the soil polygons under them travel together), runs
:func:`design_partition` on each partition in an engine (this process, local
worker processes, or a Dask distributed cluster; see :mod:`drainplan.engines`),
writes each finished partition to a work folder as it goes, and assembles the
``fields`` layer of a GeoPackage and a summary table at the end. The numbers of
a field depend on that field alone, so every engine and partitioning gives the
same results, in the input order.

Inside a partition everything is vectorised over the fields: one call of
:func:`drainplan.spacing.drain_spacing` per drain depth and criterion for all
fields, one layout call per distinct spacing, one size selection for all pipes.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import shutil
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import ConvergenceWarning, InputError
from .spacing import drain_spacing

__all__ = ["BatchSettings", "BatchInputs", "BatchResult", "load_batch_settings",
           "field_spacing", "design_partition", "run_batch", "SOIL_RANGES",
           "partition_order"]

#: Plausible ranges of per-field soil values; a field outside them is reported and
#: not designed (a value outside is most often a unit mistake in the soil map).
#: K: 0.001-100 m/d spans clays to clean gravels; barrier depth 0-100 m; drainable
#: porosity 0.005-0.5 [common practice; no single source].
SOIL_RANGES = {"k": (1e-3, 100.0, "m/d"), "barrier_depth": (0.0, 100.0, "m"),
               "drainable_porosity": (0.005, 0.5, "")}

_SECONDS_PER_DAY = 86400.0


# --------------------------------------------------------------------------- settings


@dataclass(frozen=True)
class BatchSettings:
    """What every field shares: criteria, drains, layout and pipe options (SI).

    ``soil`` holds the project's [soil] values, used for every property a soil
    map or the fields' attributes do not give.
    """

    criteria: dict
    drains: dict
    soil: dict = field(default_factory=dict)
    layout: dict = field(default_factory=dict)
    pipes: dict = field(default_factory=dict)
    name: str = ""

    @property
    def steady_method(self):
        m = self.criteria.get("method", "hooghoudt")
        return None if m == "glover-dumm" else m

    @property
    def coefficient(self):
        return self.pipes.get("coefficient", self.criteria.get("recharge"))


def load_batch_settings(path):
    """Read a project file for a batch: [criteria], [drains], [layout], [pipes] as in
    :func:`drainplan.project.load_project`; [site], [fields] and [soil] may be left out.

    Raises
    ------
    InputError
        One line naming the file and the key.
    """
    from . import project as pj

    p, raw = pj.read_project_toml(path)
    if all(s in raw for s in ("site", "fields", "soil")):
        proj = pj.load_project(p)          # a whole project: its own checks apply
        out = {s: getattr(proj, s) for s in ("criteria", "drains", "soil", "layout", "pipes")}
        out["name"] = proj.site.get("name", "")
    else:
        base = p.parent.resolve()
        out = {}
        for section, content in raw.items():
            if section not in pj.SCHEMA:
                raise InputError(f"{p.name}: unknown section [{section}]"
                                 + pj._suggest(section, pj.SCHEMA), param="project")
            if not isinstance(content, dict):
                raise InputError(f"{p.name}: {section} must be a [section] of keys",
                                 param="project")
        for section, keys in pj.SCHEMA.items():
            values = {}
            for key, value in raw.get(section, {}).items():
                if key not in keys:
                    raise InputError(f"{p.name}: unknown key {section}.{key}"
                                     + pj._suggest(f"{section}.{key}",
                                                   [f"{section}.{k}" for k in keys]),
                                     param="project")
                try:
                    values[key] = pj._convert(section, key, keys[key][0], value, base)
                except InputError as exc:
                    raise InputError(f"{p.name}: {exc}", param="project") from None
            if section in raw and section not in ("fields", "site"):
                for key, (_, required) in keys.items():
                    if required and key not in values:
                        raise InputError(f"{p.name}: {section}.{key} is required",
                                         param="project")
            out[section] = values
        if "drains" not in raw:
            raise InputError(f"{p.name}: section [drains] is required", param="project")
        out["name"] = out.pop("site", {}).get("name", "")
        soil = out.get("soil", {})
        if "layers" in soil and "barrier_depth" not in soil:
            soil["barrier_depth"] = sum(ly["thickness"] for ly in soil["layers"])
        out.pop("fields", None)
        out.pop("report", None)
        out.pop("simulation", None)          # batches do not run the season simulation
    crit = out["criteria"]
    steady, _ = pj.check_criteria(p.name, crit)
    if steady and crit.get("method") == "glover-dumm":
        raise InputError(f"{p.name}: criteria.method glover-dumm needs no steady recharge; "
                         "choose hooghoudt, ernst or kirkham for the steady criterion",
                         param="project")
    s = BatchSettings(**out)
    if s.coefficient is None:
        raise InputError(f"{p.name}: pipes.coefficient is required when no steady recharge "
                         "is given", param="project")
    return s


# --------------------------------------------------------------------------- spacing


def _project_soil(settings, n, depth):
    """The project's [soil] as arrays for ``n`` fields at drain depth ``depth``."""
    s = dict(settings.soil)
    out = {}
    if "layers" in s:
        from .design import reduce_project_layers

        r = reduce_project_layers(s, settings.criteria, depth)
        out.update(k_above=r["k_above"], k_below=r["k_below"],
                   barrier_depth=r["barrier_depth"])
        if r["drainable_porosity"] is not None:
            out["drainable_porosity"] = r["drainable_porosity"]
    elif "k" in s:
        out["k_above"] = out["k_below"] = s["k"]
    elif "k_above" in s:
        out["k_above"], out["k_below"] = s["k_above"], s["k_below"]
    for key in ("barrier_depth", "drainable_porosity"):
        if key in s:
            out[key] = s[key]
    return {k: np.full(n, float(v)) for k, v in out.items()}


def _soil_at(soil, settings, depth, n):
    """Per-field k_above, k_below, barrier depth and porosity at drain ``depth``: the
    field's own values (``soil``) where given, the project's otherwise."""
    out = _project_soil(settings, n, depth)
    if "k" in soil:
        out["k_above"] = out["k_below"] = np.asarray(soil["k"], float)
    for key in ("barrier_depth", "drainable_porosity"):
        if key in soil:
            out[key] = np.asarray(soil[key], float)
    for key in ("k_above", "k_below", "barrier_depth"):
        out.setdefault(key, np.full(n, np.nan))
    return out


def _solve(common, arrays, idx, errors):
    """drain_spacing for the cases ``idx`` in one call; where it refuses, halve the set
    until each refused case is named (an error path: the cases that pass are still
    solved together)."""
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            r = drain_spacing(**common, **{k: v[idx] for k, v in arrays.items()})
        return np.broadcast_to(np.asarray(r.spacing, float), idx.shape).copy()
    except InputError as exc:
        if idx.size == 1:
            errors[int(idx[0])] = str(exc)
            return np.full(1, np.nan)
        h = idx.size // 2
        return np.concatenate([_solve(common, arrays, idx[:h], errors),
                               _solve(common, arrays, idx[h:], errors)])


def _method_spacing(method, soil, depth, settings, usable):
    """Spacing by ``method`` at one drain depth for every usable field (NaN elsewhere),
    and the messages of fields the method refused."""
    c, d = settings.criteria, settings.drains
    n = usable.size
    s = _soil_at(soil, settings, depth, n)
    common = dict(method=method, drain_depth=depth, drain_radius=d["radius"],
                  equivalent_depth_method=d.get("equivalent_depth", "series"))
    arrays = {"barrier_depth": s["barrier_depth"]}
    errors = {}
    ok = usable.copy()
    homogeneous = s["k_above"] == s["k_below"]
    if method == "glover-dumm":
        if "drainable_porosity" not in s:
            raise InputError("the falling criterion needs a drainable porosity: give "
                             "soil.drainable_porosity in the project or a porosity column",
                             param="soil_porosity_column")
        common.update(initial_depth=c["initial_depth"], final_depth=c["final_depth"],
                      days=c["days"], shape=c.get("initial_shape", "parabolic"),
                      flow_depth=c.get("flow_depth", "equivalent"))
        arrays["k"] = s["k_below"]           # falling water table: K below drain level
        arrays["drainable_porosity"] = s["drainable_porosity"]
    else:
        common.update(recharge=c["recharge"], water_table_depth=c["water_table_depth"])
        if method == "kirkham":
            arrays["k"] = s["k_below"]
            for i in np.flatnonzero(ok & ~homogeneous):
                errors[int(i)] = "kirkham assumes one homogeneous layer"
            ok &= homogeneous
        else:
            arrays["k_above"], arrays["k_below"] = s["k_above"], s["k_below"]
        if method == "ernst":
            for key in ("interface_depth", "k_vertical"):
                if key in settings.soil:
                    common[key] = settings.soil[key]
    for name, v in arrays.items():
        bad = ok & ~np.isfinite(v)
        for i in np.flatnonzero(bad):
            errors[int(i)] = f"no {name.replace('_', ' ')} for this field"
        ok &= ~bad
    out = np.full(n, np.nan)
    idx = np.flatnonzero(ok)
    if idx.size:
        out[idx] = _solve(common, arrays, idx, errors)
    return out, errors


def field_spacing(soil, settings, usable=None):
    """Drain depth and spacing of every field by the project's method and criteria.

    Parameters
    ----------
    soil : dict of str -> array_like
        Per field: ``"k"`` [m/d], ``"barrier_depth"`` [m] and
        ``"drainable_porosity"`` [-] where known (missing keys take the project's
        [soil] values).
    settings : BatchSettings
    usable : array_like of bool, optional
        Fields to design (default all; required when ``soil`` is empty, i.e. the
        project's [soil] serves every field).

    Returns
    -------
    dict of str -> numpy.ndarray
        ``drain_depth_m``, ``spacing_calc_m`` (before rounding), ``spacing_m``
        (rounded down to the project's spacing increment), ``steady_spacing_m``,
        ``falling_spacing_m``, ``governing`` ("steady"/"falling"/""), and
        ``note`` (why a field got no spacing, "" otherwise). One call of
        :func:`drain_spacing` per drain depth and criterion covers every field.

    Examples
    --------
    >>> s = BatchSettings(criteria={"recharge": 0.001, "water_table_depth": 0.2},
    ...                   drains={"depth": [1.2], "radius": 0.1, "spacing_increment": 1.0})
    >>> r = field_spacing({"k": [0.14, 0.5], "barrier_depth": [6.0, 6.0]}, s)
    >>> r["spacing_calc_m"].round(1).tolist(), r["spacing_m"].tolist()
    ([64.0, 131.6], [63.0, 131.0])
    """
    soil = {k: np.asarray(v, float) for k, v in soil.items()}
    if usable is None:
        usable = np.ones(len(next(iter(soil.values()))), bool)
    usable = np.asarray(usable, bool).copy()
    n = usable.size
    c, d = settings.criteria, settings.drains
    depths = sorted(d["depth"])
    has_steady, has_falling = "recharge" in c, "initial_depth" in c
    gov_all, steady_all, falling_all, notes_all = [], [], [], []
    for z in depths:
        steady = falling = np.full(n, np.nan)
        notes = {}
        if has_steady:
            steady, e = _method_spacing(settings.steady_method, soil, z, settings, usable)
            notes.update(e)
        if has_falling:
            falling, e = _method_spacing("glover-dumm", soil, z, settings, usable)
            for i, msg in e.items():
                notes.setdefault(i, msg)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            gov = np.fmin(steady, falling)
        gov_all.append(gov)
        steady_all.append(steady)
        falling_all.append(falling)
        notes_all.append(notes)
    gov = np.array(gov_all)                        # depths x fields
    ok = np.isfinite(gov) & (gov > 0)
    if d.get("choose_depth", "deepest") == "deepest":
        pick = np.where(ok.any(0), len(depths) - 1 - np.argmax(ok[::-1], axis=0), -1)
    else:
        pick = np.where(ok.any(0), np.argmax(ok, axis=0), -1)
    cols = np.arange(n)
    p = np.maximum(pick, 0)
    has = pick >= 0
    raw = np.where(has, gov[p, cols], np.nan)
    steady = np.where(has, np.array(steady_all)[p, cols], np.nan)
    falling = np.where(has, np.array(falling_all)[p, cols], np.nan)
    inc = d.get("spacing_increment", 1.0)
    rounded = np.where(has, np.maximum(inc, np.floor(raw / inc + 1e-9) * inc), np.nan)
    governing = np.where(~has, "", np.where(has_steady & (steady == raw), "steady", "falling"))
    note = np.full(n, "", dtype=object)
    for i in np.flatnonzero(usable & ~has):
        msgs = [nt[i] for nt in notes_all if i in nt]
        note[i] = "no workable spacing" + (f" ({msgs[-1]})" if msgs else "")
    return {"drain_depth_m": np.where(has, np.asarray(depths)[p], np.nan),
            "spacing_calc_m": raw, "spacing_m": rounded, "steady_spacing_m": steady,
            "falling_spacing_m": falling, "governing": governing.astype(object),
            "note": note}


def check_soil_ranges(soil):
    """Per field, a message for each soil value outside :data:`SOIL_RANGES` ("" if none).

    Examples
    --------
    >>> check_soil_ranges({"k": [0.5, 250.0], "barrier_depth": [3.0, 3.0]}).tolist()
    ['', 'K 250 m/d outside the plausible 0.001-100 m/d (check the units of the soil data)']
    """
    n = len(next(iter(soil.values())))
    out = np.full(n, "", dtype=object)
    label = {"k": "K", "barrier_depth": "barrier depth",
             "drainable_porosity": "drainable porosity"}
    for prop, (lo, hi, unit) in SOIL_RANGES.items():
        if prop not in soil:
            continue
        v = np.asarray(soil[prop], float)
        bad = np.isfinite(v) & ((v <= lo) if prop != "k" else (v < lo)) | (v > hi)
        bad = np.isfinite(v) & bad
        for i in np.flatnonzero(bad):
            msg = (f"{label[prop]} {v[i]:.4g}{' ' + unit if unit else ''} outside the "
                   f"plausible {lo:g}-{hi:g}{' ' + unit if unit else ''} (check the units "
                   "of the soil data)")
            out[i] = f"{out[i]}; {msg}" if out[i] else msg
    return out


# --------------------------------------------------------------------------- layout, pipes


def _layout_api():
    """The layout and pipe functions a batch uses (one place to follow their moves)."""
    from .geometry.fields import check_fields
    from .geometry.layout import LayoutOptions, layout_fields
    from .network.hydraulics import pipe_series, select_size

    return check_fields, LayoutOptions, layout_fields, pipe_series, select_size


def _size_label(nominal):
    return str(nominal).replace(" ", "").replace(".", "p")


def pipe_columns(settings):
    """Names of the per-size pipe-length columns (laterals, then mains)."""
    *_, pipe_series, _ = _layout_api()
    pp = settings.pipes
    series = pipe_series(pp.get("material", "corrugated"), pp.get("series", "metric"),
                         path=pp.get("sizes"))
    return ([f"lateral_{_size_label(s)}_m" for s in series.nominal]
            + [f"main_{_size_label(s)}_m" for s in series.nominal])


def _pipe_flows(lay, spacing, coefficient):
    """Design flows of the lateral runs and main reaches of a layout.

    A lateral carries q x (perforated length x spacing); a main reach between two
    junctions carries the laterals upstream of it. Returns ``(run_field, run_flow,
    run_length)`` and ``(reach_field, reach_flow, reach_length)`` [m3/s, m]; field
    indices are those of the layout.
    """
    import shapely

    empty = (np.empty(0, int), np.empty(0), np.empty(0))
    if lay.lateral_field.size == 0:
        return empty, empty
    key = np.stack([lay.lateral_field, lay.lateral_line, lay.lateral_side], axis=1)
    runs, inv = np.unique(key, axis=0, return_inverse=True)
    inv = inv.ravel()
    perf = np.bincount(inv, weights=lay.lateral_length, minlength=len(runs))
    q_run = coefficient * perf * spacing / _SECONDS_PER_DAY
    run_len = perf.copy()
    if lay.connectors.size:                # solid connectors: same pipe as their run
        ckey = np.stack([lay.connector_field, lay.connector_line, lay.connector_side], axis=1)
        pos = _rows_in(runs, ckey)
        hit = pos >= 0
        np.add.at(run_len, pos[hit], shapely.length(lay.connectors)[hit])
    laterals = (runs[:, 0], q_run, run_len)
    mains = empty
    if lay.junctions.size:
        jkey = np.stack([lay.junction_field, lay.junction_line, lay.junction_side], axis=1)
        jrun = _rows_in(runs, jkey)
        jf = lay.junction_field
        has_main = np.array([lay.mains[f] is not None for f in jf], dtype=bool)
        sel = has_main & (jrun >= 0)
        if np.any(sel):
            jf, jq = jf[sel], q_run[jrun[sel]]
            pos = shapely.line_locate_point(lay.mains[jf].astype(object), lay.junctions[sel])
            order = np.lexsort((pos, jf))
            jf, jq, pos = jf[order], jq[order], pos[order]
            start = np.r_[True, jf[1:] != jf[:-1]]
            csum = np.cumsum(jq)
            base = np.maximum.accumulate(np.where(start, csum - jq, 0.0))
            q_cum = csum - base                     # flow below each junction
            last = np.r_[jf[1:] != jf[:-1], True]
            seg = np.where(last, 0.0, np.r_[pos[1:] - pos[:-1], 0.0])
            use = seg > 0
            mains = (jf[use], q_cum[use], seg[use])
    return laterals, mains


def _size_pipes(laterals, mains, n, series, settings, select_size):
    """Lengths by size per field (laterals, mains), length beyond the largest size and
    outlet flow [m3/s]. Every pipe is sized at the project's minimum grade (a batch
    has no terrain): the conservative size. One size selection for all pipes."""
    pp = settings.pipes
    grade = pp.get("min_grade", 0.001)
    method = pp.get("capacity_method", "manning")
    factor = pp.get("capacity_factor", 0.75)
    ns = len(series.nominal)
    out = []
    beyond = np.zeros(n)
    for (f, q, length), uniform in ((laterals, True), (mains, False)):
        by = np.zeros((n, ns))
        if f.size:
            size, _ = select_size(q, np.full(q.shape, grade), series, method=method,
                                  uniform_inflow=uniform, capacity_factor=factor)
            size = np.atleast_1d(size)
            ok = size >= 0
            np.add.at(by, (f[ok], size[ok]), length[ok])
            np.add.at(beyond, f[~ok], length[~ok])
        out.append(by)
    flow = np.bincount(laterals[0], weights=laterals[1], minlength=n)
    return out[0], out[1], beyond, flow


def _rows_in(table, rows):
    """Index of each row of ``rows`` in the sorted unique int rows of ``table`` (-1 if none)."""
    if len(rows) == 0:
        return np.empty(0, int)
    t = np.ascontiguousarray(table).view([("", table.dtype)] * table.shape[1]).ravel()
    r = np.ascontiguousarray(rows.astype(table.dtype)).view(
        [("", table.dtype)] * table.shape[1]).ravel()
    pos = np.searchsorted(t, r)
    pos = np.minimum(pos, len(t) - 1)
    return np.where(t[pos] == r, pos, -1)


def _layout_quantities(geoms, spacing, settings, with_lines):
    """Layout and pipe quantities of each field at its own spacing (one layout call per
    distinct spacing)."""
    import shapely

    _, LayoutOptions, layout_fields, pipe_series, select_size = _layout_api()
    pp, lo = settings.pipes, settings.layout
    series = pipe_series(pp.get("material", "corrugated"), pp.get("series", "metric"),
                         path=pp.get("sizes"))
    n = geoms.size
    cols = {k: np.zeros(n) for k in ("lateral_length_m", "connector_length_m",
                                     "main_length_m", "drained_area_ha", "unconnected_length_m",
                                     "outlet_flow_l_s", "pipe_beyond_sizes_m")}
    cols["laterals"] = np.zeros(n, dtype=np.int64)
    cols["bearing_deg"] = np.full(n, np.nan)
    pipe_lat, pipe_main = [], []
    notes = np.full(n, "", dtype=object)
    lines = {"laterals": ([], [], []), "mains": ([], [], [])}
    area = np.array([shapely.area(g) if g is not None else 0.0 for g in geoms])
    todo = np.array([g is not None for g in geoms]) & np.isfinite(spacing)
    opts = dict(direction=lo.get("direction", "auto"), setback=lo.get("setback", 0.0),
                min_length=lo.get("min_length", 10.0), offset=lo.get("offset"),
                main_side=lo.get("main_side", "auto"),
                cross_setbacks=lo.get("cross_setbacks", True),
                pattern=lo.get("pattern", "parallel"),
                herringbone_angle=lo.get("herringbone_angle", 45.0))
    for s in np.unique(spacing[todo]):
        idx = np.flatnonzero(todo & (spacing == s))
        lay = _layout_group(layout_fields, geoms[idx], LayoutOptions(spacing=float(s),
                                                                          **opts))
        if lay is None:
            continue
        per, _ = lay.quantities(np.r_[area[idx], np.ones(lay.bearing.size - idx.size)])
        per = {k: v[:idx.size] for k, v in per.items()}
        cols["laterals"][idx] = per["laterals"]
        for k in ("lateral_length_m", "connector_length_m", "main_length_m",
                  "drained_area_ha", "unconnected_length_m"):
            cols[k][idx] = per[k]
        m = idx.size
        cols["bearing_deg"][idx] = lay.bearing[:m]
        lt, mn = _pipe_flows(lay, float(s), settings.coefficient)
        k, j = lt[0] < m, mn[0] < m
        pipe_lat.append((idx[lt[0][k]], lt[1][k], lt[2][k]))
        pipe_main.append((idx[mn[0][j]], mn[1][j], mn[2][j]))
        if with_lines:
            mine = lay.lateral_field < m
            lt = lines["laterals"]
            lt[0].append(idx[lay.lateral_field[mine]])
            lt[1].append(shapely.to_wkb(lay.laterals[mine]) if mine.any()
                         else np.empty(0, object))
            lt[2].append(lay.lateral_length[mine])
            has = np.array([x is not None for x in lay.mains[:m]], dtype=bool)
            mn = lines["mains"]
            mn[0].append(idx[has])
            mn[1].append(shapely.to_wkb(lay.mains[:m][has].astype(object)) if has.any()
                         else np.empty(0, object))
            mn[2].append(shapely.length(lay.mains[:m][has].astype(object)) if has.any()
                         else np.empty(0))

    def cat(parts):
        return tuple(np.concatenate([p[k] for p in parts]) if parts else
                     np.empty(0, int if k == 0 else float) for k in range(3))

    lat_by, main_by, beyond, flow = _size_pipes(cat(pipe_lat), cat(pipe_main), n, series,
                                                settings, select_size)
    cols["pipe_beyond_sizes_m"] = beyond
    cols["outlet_flow_l_s"] = flow * 1000.0
    cols["bearing_deg"][cols["laterals"] == 0] = np.nan     # no lateral, no direction
    for i in np.flatnonzero(todo & (cols["laterals"] == 0) & (notes == "")):
        notes[i] = "no lateral fits in the field at this spacing"
    for i in np.flatnonzero(cols["unconnected_length_m"] > 0):
        notes[i] = _join(notes[i], f"{cols['unconnected_length_m'][i]:.0f} m of lateral "
                                   "cannot reach the main (needs a sub-main)")
    for i in np.flatnonzero(cols["pipe_beyond_sizes_m"] > 0):
        notes[i] = _join(notes[i], "flow beyond the largest pipe size: split the main or "
                                   "add an outlet")
    out_lines = {}
    for name, (f, g, length) in lines.items():
        out_lines[name] = (np.concatenate(f) if f else np.empty(0, int),
                           np.concatenate(g) if g else np.empty(0, object),
                           np.concatenate(length) if length else np.empty(0))
    return cols, lat_by, main_by, series, notes, out_lines


def _layout_group(layout_fields, geoms, options):
    """``layout_fields`` for fields sharing one spacing.

    ``layout_fields`` refuses a call in which the spacing is wider than every
    field, while a narrow field among wider ones is simply laid out; so that a
    field's result never depends on its neighbours in the call, a refused call
    is repeated with one wide square added after the fields (its results are
    not used: callers keep the first ``len(geoms)`` fields).
    """
    import shapely

    try:
        return layout_fields(geoms, options)
    except InputError:
        side = 10.0 * options.spacing + 4.0 * options.setback + 100.0
        extra = np.r_[geoms, np.array([shapely.box(0.0, 0.0, side, side)], dtype=object)]
        try:
            return layout_fields(extra.astype(object), options)
        except InputError:
            return None


def _join(a, b):
    return f"{a}; {b}" if a and b else (a or b)


# --------------------------------------------------------------------------- one partition


def _check_geometries(geoms, ids, repair):
    """Usable field polygons (None where not) and a message per refused or repaired field."""
    import shapely

    check_fields = _layout_api()[0]
    n = geoms.size
    msg = np.full(n, "", dtype=object)
    keep = np.zeros(n, bool)
    for i, g in enumerate(geoms):
        if g is None or shapely.is_empty(g):
            msg[i] = "empty geometry"
        elif shapely.get_type_id(g) not in (3, 6):
            msg[i] = f"not a polygon ({g.geom_type})"
        elif not repair and not shapely.is_valid(g):
            msg[i] = f"invalid boundary ({shapely.is_valid_reason(g)}); fix it or use --repair"
        else:
            keep[i] = True
    out = np.full(n, None, dtype=object)
    idx = np.flatnonzero(keep)
    if idx.size:
        names = [f"#{i}" for i in idx]
        checked, reports = check_fields(geoms[idx], names, repair=repair)
        out[idx] = checked
        for text in reports:             # "field '#12': sliver ..., skipped"
            head, _, rest = text.partition(": ")
            i = int(head.split("#", 1)[1].rstrip("'\""))
            msg[i] = rest
    return out, msg


def design_partition(task):
    """Soil, spacing, layout and pipe quantities of one partition of fields.

    ``task`` is a dict built by :func:`run_batch` (rows, ids, WKB geometries in
    the working CRS, soil source, settings); returns a dict with ``rows`` (the
    fields' positions in the input), ``columns`` (name -> array) and ``lines``.
    Pure computation: no files, no printing.
    """
    import shapely

    from .soilmap import area_weighted_soil

    settings = task["settings"]
    rows = np.asarray(task["rows"], int)
    n = rows.size
    geoms = shapely.from_wkb(np.asarray(task["geoms"], dtype=object))
    geoms = np.asarray(geoms, dtype=object)
    geoms, geo_msg = _check_geometries(geoms, task["ids"], task.get("repair", False))
    usable = np.array([g is not None for g in geoms], dtype=bool)
    notes = geo_msg.copy()
    soil_src = task["soil"]
    soil = {}
    cover = np.ones(n)
    if soil_src["kind"] == "map":
        sg = shapely.from_wkb(np.asarray(soil_src["geoms"], dtype=object))
        r = area_weighted_soil(geoms, sg, soil_src["values"])
        soil = {k: r[k] for k in soil_src["values"]}
        cover = r["soil_cover"]
        for i in np.flatnonzero(usable & (r["soil_bad_k"] > 0)):
            notes[i] = _join(notes[i], f"soil polygons with a K of zero or less cover "
                                       f"{r['soil_bad_k'][i]:.0%} of the field")
            usable[i] = False
        uncovered = usable & (cover <= 0)
        for i in np.flatnonzero(uncovered):
            notes[i] = _join(notes[i], "not covered by the soil map")
        usable &= ~uncovered
        low = usable & (cover < task.get("min_soil_cover", 0.5))
        for i in np.flatnonzero(low):
            notes[i] = _join(notes[i], f"soil map covers only {cover[i]:.0%} of the field "
                                       "(below --min-soil-cover)")
        usable &= ~low
        for i in np.flatnonzero(usable & (cover < 0.995)):
            notes[i] = _join(notes[i], f"soil map covers {cover[i]:.0%} of the field; values "
                                       "from the covered part")
    elif soil_src["kind"] == "columns":
        soil = {k: np.asarray(v, float) for k, v in soil_src["values"].items()}
        for prop, v in soil.items():
            miss = usable & ~np.isfinite(v)
            for i in np.flatnonzero(miss):
                notes[i] = _join(notes[i], f"no {prop.replace('_', ' ')} in the field's "
                                           "attributes")
            usable &= ~miss
        cover = np.where(usable, 1.0, 0.0)
    rng = check_soil_ranges(soil) if soil else np.full(n, "", dtype=object)
    bad = usable & (rng != "")
    for i in np.flatnonzero(bad):
        notes[i] = _join(notes[i], rng[i])
    usable &= ~bad
    sp = field_spacing(soil, settings, usable)
    for i in np.flatnonzero(sp["note"] != ""):
        notes[i] = _join(notes[i], sp["note"][i])
    cols, lat_by, main_by, series, lnotes, lines = _layout_quantities(
        geoms, sp["spacing_m"], settings, task.get("with_lines", False))
    for i in np.flatnonzero(lnotes != ""):
        notes[i] = _join(notes[i], lnotes[i])
    area = np.array([shapely.area(g) if g is not None else np.nan for g in geoms])
    used = {}
    for prop in ("k", "barrier_depth", "drainable_porosity"):
        if prop in soil:
            used[prop] = soil[prop]
        else:
            ps = _project_soil(settings, n, max(settings.drains["depth"]))
            key = "k_below" if prop == "k" else prop
            used[prop] = ps.get(key, np.full(n, np.nan))
    status = np.where(np.isfinite(sp["spacing_m"]), "designed", "not designed")
    out = {
        "field_id": np.asarray(task["ids"], dtype=object),
        "status": status.astype(object),
        "area_ha": area / 1e4,
        "soil_k_m_d": used["k"],
        "soil_barrier_depth_m": used["barrier_depth"],
        "soil_drainable_porosity": used["drainable_porosity"],
        "soil_cover": cover,
        "drain_depth_m": sp["drain_depth_m"],
        "spacing_calc_m": sp["spacing_calc_m"],
        "spacing_m": sp["spacing_m"],
        "governing": sp["governing"],
        **cols,
    }
    out["lateral_m_per_ha"] = np.where(out["area_ha"] > 0,
                                       cols["lateral_length_m"] / np.where(
                                           out["area_ha"] > 0, out["area_ha"], 1.0), 0.0)
    for j, nom in enumerate(series.nominal):
        out[f"lateral_{_size_label(nom)}_m"] = lat_by[:, j]
    for j, nom in enumerate(series.nominal):
        out[f"main_{_size_label(nom)}_m"] = main_by[:, j]
    out["warnings"] = notes
    return {"part": task["part"], "rows": rows, "columns": out,
            "lines": {k: (rows[v[0]], v[1], v[2]) for k, v in lines.items()}}


# --------------------------------------------------------------------------- the job


@dataclass
class BatchInputs:
    """Everything :func:`run_batch` needs."""

    fields_path: str
    output: str
    settings: BatchSettings
    layer: str | None = None
    id_attribute: str | None = None
    crs: str | None = None
    work_crs: str | None = None
    soil_path: str | None = None
    soil_layer: str | None = None
    soil_columns: dict = field(default_factory=dict)   # property -> column name
    soil_units: dict = field(default_factory=dict)     # property -> unit text
    min_soil_cover: float = 0.5
    with_lines: bool = False
    workers: int | None = None
    scheduler: str | None = None
    partition_size: int | None = None
    resume: bool = False
    overwrite: bool = False
    repair: bool = False
    summary_path: str | None = None


@dataclass
class BatchResult:
    """Result of :func:`run_batch`."""

    output: Path
    summary_path: Path
    fields: object            # GeoDataFrame of the 'fields' layer
    summary: list             # rows (item, value, unit)
    partitions: int
    resumed: int              # partitions taken from an interrupted run
    engine: str


def partition_order(geoms, size):
    """Fields in Hilbert order of their centroids, cut into partitions of ``size``.

    Returns a list of index arrays (into ``geoms``), each sorted. The order depends
    only on the geometries, so every engine and every run gets the same
    partitions (which is what lets ``--resume`` find its finished parts).
    """
    import geopandas as gpd
    import shapely

    geoms = np.asarray(geoms, dtype=object)
    n = geoms.size
    if n == 0:
        return []
    pts = shapely.centroid(np.where(_present(geoms), geoms, shapely.Point()))
    xy = shapely.get_coordinates(pts, include_z=False)
    empty = shapely.is_empty(pts)
    s = gpd.GeoSeries(np.where(empty, shapely.Point(0, 0), pts))
    if (~empty).any():
        x0, y0 = xy[:, 0].min(), xy[:, 1].min()
        x1, y1 = xy[:, 0].max(), xy[:, 1].max()
        if x1 == x0:
            x1 = x0 + 1.0
        if y1 == y0:
            y1 = y0 + 1.0
        h = s.hilbert_distance(total_bounds=(x0, y0, x1, y1), level=16).to_numpy()
    else:
        h = np.zeros(n)
    order = np.lexsort((np.arange(n), h))
    return [np.sort(order[i:i + size]) for i in range(0, n, size)]


def _present(geoms):
    return np.array([g is not None for g in geoms], dtype=bool)


def default_partition_size(n):
    """Fields per partition: about 32 partitions, 100-2000 fields each (depends on the
    number of fields only, so a resumed run cuts the same partitions). A layout call
    per distinct spacing costs a fixed overhead, so partitions are not made smaller."""
    return int(min(2000, max(100, math.ceil(n / 32))))


def _read_inputs(inp):
    """Fields (metric) and the soil source, read through gisio."""
    from .gisio import read_layer, to_metric
    from .layout_plan import _field_ids
    from .soilmap import SOIL_PROPERTIES, column_to_si

    src, file_crs = read_layer(inp.fields_path, layer=inp.layer, crs=inp.crs,
                               what="fields", option="fields")
    ids = _field_ids(src, inp.id_attribute) if len(src) else []
    if len(src):
        metric, work_crs = to_metric(src, file_crs, inp.work_crs)
    else:
        metric, work_crs = src, file_crs
    cols = dict(inp.soil_columns)
    soil = {"kind": "project"}
    if inp.soil_path is not None:
        sm, sm_crs = read_layer(inp.soil_path, layer=inp.soil_layer, crs=inp.crs,
                                what="soil", option="soil")
        values = {}
        for prop in SOIL_PROPERTIES:
            col = cols.get(prop) or (prop if prop in sm.columns else None)
            if prop in cols and cols[prop] not in sm.columns:
                raise InputError(_missing_col(cols[prop], sm, "soil map"),
                                 param=f"soil_{SOIL_PROPERTIES[prop][2]}_column")
            if col is None and prop == "k":
                raise InputError(_missing_col("k", sm, "soil map") + "; name the K column "
                                 "with --soil-k-column", param="soil_k_column")
            if col is not None:
                values[prop] = column_to_si(sm[col].to_numpy(), col, prop,
                                            inp.soil_units.get(prop))
        sm_metric = sm.to_crs(work_crs) if len(src) else sm
        geoms = sm_metric.geometry.values
        keep = np.array([g is not None and g.geom_type in ("Polygon", "MultiPolygon")
                         for g in geoms], dtype=bool)
        import shapely

        gg = np.asarray(geoms, dtype=object)[keep]
        gg = np.asarray(shapely.make_valid(gg), dtype=object) if gg.size else gg
        soil = {"kind": "map", "geoms": gg,
                "values": {k: v[keep] for k, v in values.items()}}
    else:
        values = {}
        for prop in SOIL_PROPERTIES:
            col = cols.get(prop)
            if col is None:
                continue
            if col not in src.columns:
                raise InputError(_missing_col(col, src, "fields file"),
                                 param=f"soil_{SOIL_PROPERTIES[prop][2]}_column")
            values[prop] = column_to_si(src[col].to_numpy(), col, prop,
                                        inp.soil_units.get(prop))
        if values:
            soil = {"kind": "columns", "values": values}
    if soil["kind"] == "project":
        s = inp.settings.soil
        if not ("k" in s or "k_above" in s or "layers" in s):
            raise InputError("no soil for the fields: give a soil map (--soil), soil "
                             "columns of the fields (--soil-k-column ...) or a [soil] "
                             "section in the project", param="soil")
    have = set(soil.get("values", {}))
    if "barrier_depth" not in have and "barrier_depth" not in inp.settings.soil and \
            "layers" not in inp.settings.soil:
        raise InputError("no barrier depth: give a barrier column (--soil-barrier-column) "
                         "or soil.barrier_depth in the project", param="soil_barrier_column")
    return src, file_crs, metric, work_crs, ids, soil


def _missing_col(col, gdf, what):
    cols = ", ".join(c for c in gdf.columns if c != "geometry")
    return f"column {col!r} not found in the {what}; columns: {cols or 'none'}"


def _fingerprint(inp, n, size):
    """What a resumed run must share with the interrupted one."""
    def stat(p):
        if p is None:
            return None
        st = os.stat(p)
        return [str(Path(p).resolve()), st.st_size, st.st_mtime_ns]

    data = {"fields": stat(inp.fields_path), "soil": stat(inp.soil_path),
            "layer": inp.layer, "soil_layer": inp.soil_layer, "id": inp.id_attribute,
            "crs": inp.crs, "work_crs": inp.work_crs, "columns": inp.soil_columns,
            "units": inp.soil_units, "min_cover": inp.min_soil_cover,
            "with_lines": inp.with_lines, "repair": inp.repair, "n": n, "size": size,
            "settings": repr(inp.settings)}
    return hashlib.sha256(json.dumps(data, sort_keys=True, default=str).encode()).hexdigest()


def _parts_dir(output):
    out = Path(output)
    return out.parent / f".{out.name}.parts"


def run_batch(inp: BatchInputs, *, progress=None):
    """Design every field of a fields layer and write ``fields`` (and line) layers.

    Parameters
    ----------
    inp : BatchInputs
    progress : callable, optional
        Called as ``progress(done_fields, total_fields, resumed_fields)`` after each
        partition (and once at the start).

    Returns
    -------
    BatchResult

    Raises
    ------
    InputError
        For a bad input (one line naming it).
    """
    import shapely

    from .engines import make_engine
    from .gisio import read_batch_part, write_atomic, write_batch_part

    out = Path(inp.output)
    summary_path = Path(inp.summary_path) if inp.summary_path else \
        out.parent / f"{out.stem}_summary.csv"
    if not out.parent.exists():
        raise InputError(f"folder {out.parent} does not exist", param="output")
    parts_dir = _parts_dir(out)
    from .gisio import check_output_target

    check_output_target(out, overwrite=inp.overwrite, param="output")
    check_output_target(summary_path, overwrite=inp.overwrite, param="summary")
    if parts_dir.exists() and not inp.resume:
        if not inp.overwrite:
            raise InputError(f"an interrupted run left {parts_dir}; use --resume to continue "
                             "it or --overwrite to start again", param="output")
        shutil.rmtree(parts_dir)
    if inp.resume and not parts_dir.exists():
        inp = _replace(inp, resume=False)
    pp = inp.settings.pipes
    _layout_api()[3](pp.get("material", "corrugated"), pp.get("series", "metric"),
                     path=pp.get("sizes"))                  # a bad size table fails now
    src, file_crs, metric, work_crs, ids, soil = _read_inputs(inp)
    n = len(src)
    size = inp.partition_size or default_partition_size(n)
    if size < 1:
        raise InputError("partition size must be 1 or more", param="partition_size")
    geoms = np.asarray(metric.geometry.values, dtype=object) if n else np.empty(0, object)
    parts = partition_order(geoms, size)
    fp = _fingerprint(inp, n, size)
    done = {}
    if inp.resume:
        manifest = parts_dir / "manifest.json"
        try:
            old = json.loads(manifest.read_text())
        except (OSError, ValueError):
            old = {}
        if old.get("fingerprint") != fp:
            raise InputError(f"{parts_dir} belongs to a run with other inputs or options; "
                             "use --overwrite to start again", param="resume")
        for f in sorted(parts_dir.glob("part-*.pkl")):
            k = int(f.stem.split("-")[1])
            if k < len(parts):
                done[k] = f
    else:
        parts_dir.mkdir()
        write_atomic(parts_dir / "manifest.json", lambda tmp: Path(tmp).write_text(
            json.dumps({"fingerprint": fp, "partitions": len(parts)})), overwrite=True)
    wkb = shapely.to_wkb(geoms) if n else np.empty(0, object)
    soil_tree = None
    if soil["kind"] == "map" and len(soil["geoms"]):
        soil_tree = shapely.STRtree(soil["geoms"])
        soil_wkb = shapely.to_wkb(soil["geoms"])

    def task(k):
        rows = parts[k]
        t = {"part": k, "rows": rows, "ids": [ids[i] for i in rows], "geoms": wkb[rows],
             "settings": inp.settings, "with_lines": inp.with_lines,
             "min_soil_cover": inp.min_soil_cover, "repair": inp.repair}
        if soil["kind"] == "map":
            if soil_tree is not None:
                g = geoms[rows]
                g = g[_present(g)]
                si = np.unique(soil_tree.query(g)[1]) if g.size else np.empty(0, int)
            else:
                si = np.empty(0, int)
            t["soil"] = {"kind": "map",
                         "geoms": soil_wkb[si] if si.size else np.empty(0, object),
                         "values": {k2: v[si] for k2, v in soil["values"].items()}}
        elif soil["kind"] == "columns":
            t["soil"] = {"kind": "columns",
                         "values": {k2: v[rows] for k2, v in soil["values"].items()}}
        else:
            t["soil"] = {"kind": "project"}
        return t

    todo = [k for k in range(len(parts)) if k not in done]
    resumed = sum(len(parts[k]) for k in done)
    count = [resumed]
    if progress:
        progress(count[0], n, resumed)

    def finished(result):
        k = result["part"]
        path = parts_dir / f"part-{k:06d}.pkl"
        write_batch_part(path, result)
        done[k] = path
        count[0] += len(result["rows"])
        if progress:
            progress(count[0], n, resumed)

    engine = make_engine(workers=inp.workers, scheduler=inp.scheduler)
    with engine:
        engine.run(design_partition, (task(k) for k in todo), finished, total=len(todo))
    results = [read_batch_part(done[k]) for k in range(len(parts))]
    gdf, line_layers = _assemble(results, src, file_crs, work_crs, n, inp)
    summary = _summary_rows(gdf, inp, n)
    from .gisio import layers_writer, write_outputs

    layers = {"fields": gdf, **line_layers}
    text = _summary_csv(summary)
    write_outputs([(out, layers_writer(layers)),
                   (summary_path, lambda tmp: Path(tmp).write_text(text, encoding="utf-8"),
                    "summary")], overwrite=inp.overwrite)
    shutil.rmtree(parts_dir, ignore_errors=True)
    return BatchResult(out, summary_path, gdf, summary, len(parts), len(parts) - len(todo),
                       engine.name)


def _replace(inp, **kw):
    import dataclasses

    return dataclasses.replace(inp, **kw)


def _assemble(results, src, file_crs, work_crs, n, inp):
    """The fields layer in input order (and line layers), in the fields' CRS."""
    import geopandas as gpd
    import pandas as pd
    import shapely

    if results:
        rows = np.concatenate([r["rows"] for r in results])
        names = list(results[0]["columns"])
        data = {c: np.concatenate([np.asarray(r["columns"][c]) for r in results])
                for c in names}
        order = np.argsort(rows, kind="stable")
        data = {c: v[order] for c, v in data.items()}
    else:
        names = ["field_id", "status", "spacing_m", "warnings"]
        data = {"field_id": np.empty(0, object), "status": np.empty(0, object),
                "spacing_m": np.empty(0), "warnings": np.empty(0, object)}
    frame = pd.DataFrame({c: _rounded(c, data[c]) for c in names})
    gdf = gpd.GeoDataFrame(frame, geometry=gpd.GeoSeries(
        np.asarray(src.geometry.values, dtype=object) if n else [], crs=file_crs))
    lines = {}
    if inp.with_lines:
        for name in ("laterals", "mains"):
            f = np.concatenate([r["lines"][name][0] for r in results]) if results else \
                np.empty(0, int)
            g = np.concatenate([r["lines"][name][1] for r in results]) if results else \
                np.empty(0, object)
            length = np.concatenate([r["lines"][name][2] for r in results]) if results else \
                np.empty(0)
            order = np.argsort(f, kind="stable")
            f, g, length = f[order], g[order], length[order]
            ids = gdf["field_id"].to_numpy()[f] if f.size else np.empty(0, object)
            geo = gpd.GeoSeries(shapely.from_wkb(g) if g.size else [], crs=work_crs)
            layer = gpd.GeoDataFrame({"field_id": list(ids), "length_m": np.round(length, 3)},
                                     geometry=geo)
            lines[name] = layer.to_crs(file_crs) if file_crs != work_crs else layer
    return gdf, lines


_ROUND = {"area_ha": 4, "soil_k_m_d": 5, "soil_barrier_depth_m": 4,
          "soil_drainable_porosity": 4, "soil_cover": 4, "drain_depth_m": 4,
          "spacing_calc_m": 4, "spacing_m": 4, "bearing_deg": 3, "lateral_m_per_ha": 2,
          "outlet_flow_l_s": 4}


def _rounded(name, values):
    v = np.asarray(values)
    if v.dtype.kind == "f":
        return np.round(v, _ROUND.get(name, 2))
    if v.dtype.kind == "O":
        return [str(x) for x in v]
    return v


def _summary_rows(gdf, inp, n):
    """Totals of the batch as (item, value, unit) rows."""
    des = gdf["status"] == "designed" if n else np.zeros(0, bool)
    sp = gdf["spacing_m"][des].to_numpy(float) if n else np.empty(0)
    warn = (gdf["warnings"] != "").sum() if n else 0
    uncovered = gdf["warnings"].str.contains("not covered by the soil map").sum() if n else 0
    rows = [("fields", n, ""), ("fields designed", int(des.sum()) if n else 0, ""),
            ("fields not designed", int(n - (des.sum() if n else 0)), ""),
            ("fields not covered by the soil map", int(uncovered), ""),
            ("fields with warnings", int(warn), "")]
    if n:
        rows += [("area", round(float(gdf["area_ha"].sum()), 2), "ha"),
                 ("area designed", round(float(gdf["area_ha"][des].sum()), 2), "ha")]
    if sp.size:
        rows += [("spacing, smallest", float(sp.min()), "m"),
                 ("spacing, median", float(np.median(sp)), "m"),
                 ("spacing, largest", float(sp.max()), "m")]
    for col, unit in (("laterals", ""), ("lateral_length_m", "m"),
                      ("connector_length_m", "m"), ("main_length_m", "m"),
                      ("drained_area_ha", "ha"), ("outlet_flow_l_s", "L/s"),
                      ("pipe_beyond_sizes_m", "m")):
        if col in gdf.columns:
            v = gdf[col].sum()
            rows.append((col.removesuffix("_m").removesuffix("_ha").removesuffix("_l_s")
                         .replace("_", " "), round(float(v), 2) if unit else int(v), unit))
    for col in gdf.columns:
        if (col.startswith("lateral_") or col.startswith("main_")) and col.endswith("_m") \
                and col not in ("lateral_length_m", "main_length_m") and \
                col != "lateral_m_per_ha":
            v = float(gdf[col].sum())
            if v > 0:
                kind, size = col.removesuffix("_m").split("_", 1)
                rows.append((f"{kind} pipe {size}", round(v, 1), "m"))
    return rows


def _summary_csv(rows):
    lines = ["item,value,unit"]
    for item, value, unit in rows:
        lines.append(f"{item},{value},{unit}")
    return "\n".join(lines) + "\n"


def summary_table(rows):
    """The summary rows as aligned text (for the CLI)."""
    w = max((len(r[0]) for r in rows), default=0)
    return "\n".join(f"{item:<{w}}  {value} {unit}".rstrip() for item, value, unit in rows)


def describe_progress(done, total, elapsed):
    """'fields 1,200 / 10,000 (12 %), 350 fields/s, about 25 s left' (for the CLI)."""
    rate = done / elapsed if elapsed > 0 else 0.0
    left = (total - done) / rate if rate > 0 else float("nan")
    pct = 100.0 * done / total if total else 100.0
    text = f"fields {done:,} / {total:,} ({pct:.0f} %)"
    if done and elapsed > 0:
        text += f", {rate:,.0f} fields/s"
        if done < total and math.isfinite(left):
            text += f", about {_duration(left)} left"
    return text


def _duration(s):
    if s < 90:
        return f"{s:.0f} s"
    if s < 5400:
        return f"{s / 60:.0f} min"
    return f"{s / 3600:.1f} h"

