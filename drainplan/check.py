"""Check a contractor's proposal (numbers or drawn lines) against a project's criteria.

A proposal is either a ``[proposal]`` section of numbers (lateral spacing,
depth, lateral and main sizes, grade, envelope) in a small TOML file, or a
GIS line layer of the proposed or installed laterals and mains (read through
:mod:`drainplan.gisio`, any format and CRS drainplan reads), with optional
attributes ``kind`` (lateral/main), ``size``, ``depth`` and an id; unknown
attributes are ignored, missing ones come from the numbers. A TOML proposal
may name its line layer with ``lines = "file"``.

Numbers alone are laid out by drainplan's own layout at the proposed spacing,
so the pipe network (and its flows) is the one the design would build.

:func:`check_proposal` measures every lateral (local spacing on both sides,
drained strip, length, grade, main it joins: see
:mod:`drainplan.geometry.proposal`), then checks

* every drain-spacing criterion of the project (steady, falling; each an
  entry of :data:`SPACING_CRITERIA`, so further criteria are one function
  each) at each lateral's local spacing and depth;
* the full-flow capacity of the proposed sizes for the flow each lateral and
  each main carries (drainage coefficient x drained area);
* minimum and maximum grade, cover and full-flow velocity where elevations
  or a grade are given.

Each check gives the required value, the proposed one and the margin; the
verdict is per lateral and for the whole proposal, with the share of the
drained area meeting each criterion.
"""

from __future__ import annotations

import dataclasses
import difflib
import math
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import ConvergenceWarning, InputError
from .units import parse_quantity, show

__all__ = ["Proposal", "CheckResult", "SPACING_CRITERIA", "read_proposal", "check_proposal",
           "confidence_criteria", "season_criterion", "EDGE_TREATMENT", "PROPOSAL_KEYS"]

#: Keys of a ``[proposal]`` section: kind of quantity.
PROPOSAL_KEYS = {"name": "text", "lateral_spacing": "length", "depth": "length",
                 "lateral_size": "size", "main_size": "size", "grade": "fraction",
                 "envelope": "radius", "lines": "path", "layer": "text", "crs": "text",
                 "contractor": "text", "notes": "text"}

#: A lateral end (or a main end) this close to a main joins it [m].
JOIN_TOLERANCE = 3.0

EDGE_TREATMENT = (
    "Local spacing is the perpendicular distance to the nearest roughly parallel lateral "
    "of the same field, measured every 5 m along each lateral (median). An edge lateral "
    "(no neighbour on one side) takes the spacing to its one neighbour for that side "
    "too, and its distance to the field edge is reported; the ground between its strip "
    "and the field edge is not counted as drained. A lateral alone in its field takes "
    "twice its larger distance to the field edge.")


def _pipe_lib():
    """The pipe hydraulics module (one place to change if it moves)."""
    from .network import hydraulics

    return hydraulics


# --------------------------------------------------------------------------- criteria

@dataclass(frozen=True)
class SpacingCriterion:
    """A drain-spacing criterion of the project: the widest spacing that meets it.

    ``allowed(project, depth, radius)`` returns the widest spacing [m] at a drain
    depth [m] with an effective radius [m] (NaN where none meets it);
    ``applies(project)`` says whether the project has it; ``describe(project)``
    is the one-line statement shown beside the verdict.
    """

    key: str
    applies: object
    allowed: object
    describe: object
    source: str


def _design_spacing(p, method, depth, radius, k_scale=1.0):
    from .design import project_spacing

    q = dataclasses.replace(p, drains={**p.drains, "radius": radius})
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        r = project_spacing(q, method, depth, k_scale=k_scale)
    if r is None:
        return float("nan")
    if isinstance(r, Exception):
        raise InputError(f"at drain depth {depth:g} m: {r}", param="proposal")
    return float(r.spacing)


def _steady_method(p):
    m = p.criteria.get("method", "hooghoudt")
    return "hooghoudt" if m == "glover-dumm" else m


_NAMES = {"hooghoudt": "Hooghoudt", "ernst": "Ernst", "kirkham": "Kirkham",
          "glover-dumm": "Glover–Dumm"}

SPACING_CRITERIA = [
    SpacingCriterion(
        "steady",
        lambda p: "recharge" in p.criteria,
        lambda p, z, r: _design_spacing(p, _steady_method(p), z, r),
        lambda p, u: (f"steady: water table at least "
                      f"{show(p.criteria['water_table_depth'], 'length', u, 2)} below the "
                      f"surface midway under {show(p.criteria['recharge'], 'recharge', u, 1)} "
                      f"({_NAMES[_steady_method(p)]})"),
        "steady drain-spacing formula of the project's method (Hooghoudt 1940 with van der "
        "Molen & Wesseling 1991; Ernst 1956; Kirkham 1958)"),
    SpacingCriterion(
        "falling",
        lambda p: "initial_depth" in p.criteria,
        lambda p, z, r: _design_spacing(p, "glover-dumm", z, r),
        lambda p, u: (f"falling: midway water table from "
                      f"{show(p.criteria['initial_depth'], 'length', u, 2)} to "
                      f"{show(p.criteria['final_depth'], 'length', u, 2)} in "
                      f"{p.criteria['days']:g} d (Glover–Dumm)"),
        "Glover–Dumm falling water table (Dumm 1954, 1964)"),
]


def confidence_criteria(k_cv, confidence):
    """The project's spacing criteria met with probability ``confidence`` when K is
    lognormal with coefficient of variation ``k_cv`` around the project's K.

    When only K varies and the spacing grows with K, P[L(K) >= L0] = P[K >= K0]:
    the spacing met with confidence c is the deterministic spacing at
    K_c = K50 exp(-z_c sigma), sigma = sqrt(ln(1 + cv^2)) (drainplan's method
    notes 14.5; exact, no sampling). Every K of the project is scaled by the same
    factor, so layered ratios are kept.
    """
    from .uncertainty import k_at_confidence, lognormal_log_sd

    if not (math.isfinite(k_cv) and 0 < k_cv <= 5):
        raise InputError(f"coefficient of variation of K {k_cv:g} must lie in (0, 5]",
                         param="k_cv")
    if not (0.5 <= confidence < 1):
        raise InputError(f"confidence {confidence:g} must lie in [0.5, 1)", param="confidence")
    f = k_at_confidence(1.0, lognormal_log_sd(k_cv), confidence)
    out = []
    for c in SPACING_CRITERIA:
        method = (lambda p: _steady_method(p)) if c.key == "steady" else \
            (lambda p: "glover-dumm")
        out.append(SpacingCriterion(
            f"{c.key} at {confidence:.0%} confidence", c.applies,
            lambda p, z, r, m=method: _design_spacing(p, m(p), z, r, k_scale=f),
            lambda p, u, c=c: (c.describe(p, u) + f", met with {confidence:.0%} "
                               f"confidence for K lognormal with cv {k_cv:g} (K x {f:.3f})"),
            c.source + "; K at confidence K50 exp(-z sigma), lognormal K (method notes "
            "14.5, exact when only K varies)"))
    return out


def season_criterion(weather, target, *, season=None, basis="mean", season_text="all"):
    """The season-simulation criterion: SEW30 (cm d per season) within ``target``.

    The widest spacing meeting it at a drain depth comes from simulating the
    project's site over the daily ``weather`` record (non-linear Boussinesq flow
    between drains with the equivalent depth; :mod:`drainplan.simulation_plan`),
    refined to 0.1 m. ``season`` is a parsed growing season (None: the whole year).
    """
    from .design import soil_at_depth
    from .simulation_plan import SimulationSite, widest_spacing_for_target

    if not (math.isfinite(target) and target >= 0):
        raise InputError("SEW30 target must be 0 cm·d or more", param="target_sew30")
    grid = np.geomspace(3.0, 200.0, 14)

    def allowed(p, z, r):
        soil = soil_at_depth(p, z)
        mu = soil.get("drainable_porosity")
        if mu is None:
            raise InputError(f"{p.path.name}: the season simulation needs "
                             "soil.drainable_porosity", param="project")
        site = SimulationSite(drain_depth=z, barrier_depth=soil["barrier_depth"],
                              drain_radius=r, k_below=soil.get("k", soil.get("k_below")),
                              k_above=soil.get("k", soil.get("k_above")),
                              drainable_porosity=mu,
                              equivalent_depth_method=p.drains.get("equivalent_depth",
                                                                   "series"))
        site.check()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            res = widest_spacing_for_target(site, weather, grid, target=target, basis=basis,
                                            season=season, refine=3)
        return float("nan") if res["spacing_m"] is None else float(res["spacing_m"])

    return SpacingCriterion(
        "season", lambda p: True, allowed,
        lambda p, u: (f"season: SEW30 at most {target:g} cm·d per season ({basis}, season "
                      f"{season_text}) over the weather record, simulated"),
        "non-linear Boussinesq simulation between drains with Hooghoudt's equivalent depth; "
        "SEW30 after Sieben (1964)")


# --------------------------------------------------------------------------- proposal

@dataclass
class Proposal:
    """A parsed proposal: numbers (SI) and, for a drawn one, its lines.

    ``lines`` is a GeoDataFrame in the file's CRS (or None), with columns
    ``kind``, ``size``, ``depth_m`` and ``line_id`` filled where the file had them.
    """

    path: Path
    numbers: dict
    lines: object = None
    notes: list = field(default_factory=list)


def _suggest(word, options):
    close = difflib.get_close_matches(word, list(options), n=1, cutoff=0.5)
    return f" (did you mean {close[0]!r}?)" if close else ""


def read_proposal(path, *, crs=None):
    """Read a proposal file: TOML with a ``[proposal]`` section, or a GIS line layer.

    Raises
    ------
    InputError
        One line naming the file and what is wrong (exit code 2 on the CLI).
    """
    p = Path(path)
    if not p.exists():
        raise InputError(f"proposal file not found: {path}", param="proposal")
    if p.suffix.lower() == ".toml":
        return _read_toml(p)
    return Proposal(p, {}, _read_lines(p, crs=crs))


def _read_toml(p):
    from .spacing.drain_radius import drain_radius_table, effective_radius

    from ._textfile import read_toml_file

    raw = read_toml_file(p, what="proposal file", param="proposal")
    if set(raw) != {"proposal"} or not isinstance(raw.get("proposal"), dict):
        raise InputError(f"{p.name}: a proposal file holds one [proposal] section of "
                         f"numbers ({', '.join(PROPOSAL_KEYS)})", param="proposal")
    numbers = {}
    for key, value in raw["proposal"].items():
        kind = PROPOSAL_KEYS.get(key)
        name = f"proposal.{key}"
        if kind is None:
            raise InputError(f"{p.name}: unknown key {name}" + _suggest(key, PROPOSAL_KEYS),
                             param="proposal")
        try:
            if kind in ("text", "size"):
                if not isinstance(value, str):
                    raise InputError(f"{name} must be text in quotes, got {value!r}")
                numbers[key] = value
            elif kind == "path":
                if not isinstance(value, str):
                    raise InputError(f"{name} must be a file path in quotes")
                numbers[key] = str(p.parent / value) if not Path(value).is_absolute() else value
            elif kind == "radius":
                names = [r["name"] for r in drain_radius_table()]
                if isinstance(value, str) and value.strip() in names:
                    numbers["radius"] = effective_radius(value.strip())
                    numbers["envelope"] = value.strip()
                else:
                    try:
                        numbers["radius"] = parse_quantity(value, "length", name=name)
                    except InputError:
                        raise InputError(f"{name} must be an effective drain radius or a pipe "
                                         f"type ({', '.join(names)}); got {value!r}") from None
                    numbers["envelope"] = f"effective radius {numbers['radius']:g} m"
            else:
                numbers[key] = parse_quantity(value, kind, name=name)
        except InputError as exc:
            msg = str(exc)
            raise InputError(msg if msg.startswith(p.name) else f"{p.name}: {msg}",
                             param="proposal") from None
    sp = numbers.get("lateral_spacing")
    if sp is not None and not 1.0 <= sp <= 1000.0:
        raise InputError(f"{p.name}: proposal.lateral_spacing {sp:g} m is outside 1-1000 m",
                         param="proposal")
    z = numbers.get("depth")
    if z is not None and not 0 < z <= 10:
        raise InputError(f"{p.name}: proposal.depth {z:g} m must lie in (0, 10] m",
                         param="proposal")
    g = numbers.get("grade")
    if g is not None and not 0 < g < 0.5:
        raise InputError(f"{p.name}: proposal.grade {g:g} must lie between 0 and 50 %",
                         param="proposal")
    r = numbers.get("radius")
    if r is not None and not 0 < r < 1:
        raise InputError(f"{p.name}: proposal.envelope radius {r:g} m must lie in (0, 1) m",
                         param="proposal")
    lines = None
    if "lines" in numbers:
        lines = _read_lines(Path(numbers["lines"]), crs=numbers.get("crs"),
                            layer=numbers.get("layer"))
    elif sp is None:
        raise InputError(f"{p.name}: give proposal.lateral_spacing, or the drawn lines with "
                         "proposal.lines", param="proposal")
    return Proposal(p, numbers, lines)


_KIND_COLS = ("kind", "type", "role", "pipe_kind")
_SIZE_COLS = ("size", "pipe_size", "diameter", "nominal")
_DEPTH_COLS = ("depth", "depth_m", "drain_depth")
_ID_COLS = ("lateral_id", "line_id", "id", "name")
_MAIN_WORDS = ("main", "submain", "sub-main", "collector", "header")
_LATERAL_WORDS = ("lateral", "laterals", "drain", "tile", "")


def _pick(cols, names):
    low = {c.lower(): c for c in cols}
    return next((low[n] for n in names if n in low), None)


def _read_lines(p, *, crs=None, layer=None):
    import pandas as pd
    import shapely

    from .gisio import read_layer

    gdf, file_crs = read_layer(p, layer=layer, crs=crs, what="proposal", option="proposal",
                               keep_z=True)
    geoms = gdf.geometry.values
    ok = np.array([g is not None and not g.is_empty and g.geom_type in
                   ("LineString", "MultiLineString") for g in geoms], bool)
    if not ok.any():
        raise InputError(f"proposal {p} holds no lines (laterals and mains are drawn as "
                         "lines)", param="proposal")
    gdf = gdf[ok].explode(index_parts=False).reset_index(drop=True)
    cols = [c for c in gdf.columns if c != "geometry"]
    out = pd.DataFrame(index=gdf.index)
    kc = _pick(cols, _KIND_COLS)
    kinds = []
    for v in (gdf[kc] if kc else [None] * len(gdf)):
        t = "" if v is None or (isinstance(v, float) and math.isnan(v)) else str(v).strip().lower()
        if t in _MAIN_WORDS:
            kinds.append("main")
        elif t in _LATERAL_WORDS:
            kinds.append("lateral")
        else:
            raise InputError(f"proposal {p}: kind {v!r} is unknown; use lateral or main",
                             param="proposal")
    out["kind"] = kinds
    sc = _pick(cols, _SIZE_COLS)
    out["size"] = [None if v is None or (isinstance(v, float) and math.isnan(v))
                   else str(v) for v in (gdf[sc] if sc else [None] * len(gdf))]
    dc = _pick(cols, _DEPTH_COLS)
    depths = []
    for v in (gdf[dc] if dc else [None] * len(gdf)):
        if v is None or (isinstance(v, float) and math.isnan(v)):
            depths.append(np.nan)
            continue
        z = parse_quantity(v if isinstance(v, str) else float(v), "length",
                           name=f"proposal attribute {dc!r}")
        if not 0 < z <= 10:
            raise InputError(f"proposal {p}: depth {v!r} must lie in (0, 10] m",
                             param="proposal")
        depths.append(z)
    out["depth_m"] = depths
    ic = _pick(cols, _ID_COLS)
    out["line_id"] = [None if v is None else str(v) for v in (gdf[ic] if ic else
                                                                [None] * len(gdf))]
    import geopandas as gpd

    res = gpd.GeoDataFrame(out, geometry=gdf.geometry.values, crs=file_crs)
    res.attrs["has_z"] = bool(np.any(shapely.has_z(res.geometry.values)))
    return res


def parse_size(text, series_list, *, what="size"):
    """Index into one of ``series_list`` (PipeSeries) for a size text such as '6 in',
    '6"', '6in' or '160 mm'; InputError listing the sizes otherwise."""
    t = " ".join(str(text).strip().lower().replace('"', " in").replace("inch", "in").split())
    t = t.replace("in", " in").replace("mm", " mm")
    t = " ".join(t.split())
    for s in series_list:
        for i, nom in enumerate(s.nominal):
            if " ".join(nom.lower().split()) == t:
                return s, i
    names = [n for s in series_list for n in s.nominal]
    raise InputError(f"{what} {text!r} is not a {series_list[0].material} pipe size of the "
                     f"size table; sizes: {', '.join(names)}", param="proposal")


# --------------------------------------------------------------------------- result

@dataclass
class CheckResult:
    """Result of :func:`check_proposal`.

    ``summary`` is the JSON-ready dict (every number on the check sheet);
    ``laterals``, ``strips``, ``mains`` and ``fields`` are GeoDataFrames in the
    working CRS for the map and the GeoPackage; ``out_crs`` is the CRS of the
    project's field file.
    """

    summary: dict
    laterals: object
    strips: object
    mains: object
    fields: object
    work_crs: object
    out_crs: object


def _margin_at_most(value, limit):
    return 100.0 * (limit - value) / limit if limit and np.isfinite(limit) else None


def _margin_at_least(value, need):
    return 100.0 * (value - need) / need if need and np.isfinite(need) and need > 0 else None


def _r(v, nd=3):
    if v is None:
        return None
    v = float(v)
    return round(v, nd) if math.isfinite(v) else None


def _slug(name):
    """'steady at 80% confidence' -> 'steady_at_80pct_confidence'."""
    return "_".join(name.replace("%", "pct").split())


def _sig(v, digits=6):
    """Rounded to ``digits`` significant figures (None for NaN)."""
    v = float(v)
    return float(f"{v:.{digits}g}") if math.isfinite(v) else None


def verdict_text(name, meets, proposed_txt, required_txt, margin, *, at_most):
    """'spacing 21.3 m, allowed 24.6 m: meets with 13 % to spare' style sentences."""
    rel = "allowed" if at_most else "needs"
    if meets:
        tail = f"meets with {margin:.0f} % to spare" if margin is not None else "meets"
    else:
        tail = (f"fails ({abs(margin):.0f} % {'over' if at_most else 'short'})"
                if margin is not None else "fails")
    return f"{name} {proposed_txt}, {rel} {required_txt}: {tail}"


# --------------------------------------------------------------------------- pipeline

def _fields_metric(p):
    from .geometry.fields import check_fields
    from .gisio import read_layer, to_metric
    from .layout_plan import _field_ids

    fl = p.fields
    src, file_crs = read_layer(fl["file"], layer=fl.get("layer"), crs=fl.get("crs"),
                               what="fields", option="fields")
    ids = _field_ids(src, fl.get("id_attribute"))
    metric, work_crs = to_metric(src, file_crs, fl.get("work_crs"))
    geoms, _ = check_fields(metric.geometry.values, ids, repair=p.layout.get("repair", False))
    keep = [i for i, g in enumerate(geoms) if g is not None]
    fields = np.array([geoms[i] for i in keep], dtype=object)
    regions = fields
    zones = None
    if fl.get("exclusions"):
        import shapely

        ex, _ = read_layer(fl["exclusions"], layer=fl.get("exclusions_layer"),
                           crs=fl.get("crs"), what="exclusions", option="exclude")
        ex = ex.to_crs(work_crs)
        sb = np.full(len(ex), fl.get("exclusion_setback", 15.0))
        if "setback_m" in ex.columns:
            import pandas as pd

            v = pd.to_numeric(ex["setback_m"], errors="coerce").to_numpy(float)
            sb = np.where(np.isfinite(v) & (v >= 0), v, sb)
        zones = shapely.union_all(shapely.buffer(ex.geometry.values, sb))
        regions = shapely.difference(fields, zones)
        kinds = sorted({str(k) for k in ex["kind"]}) if "kind" in ex.columns else []
        zones = (zones, kinds)
    else:
        zones = None
    return fields, regions, zones, [ids[i] for i in keep], work_crs, file_crs


def _outlet_point(p, work_crs, file_crs):
    import geopandas as gpd
    import shapely

    from .gisio import read_layer

    out = p.fields.get("outlet")
    if out is None:
        return None
    if isinstance(out, str):
        pts, pcrs = read_layer(out, crs=p.fields.get("crs"), what="outlet", option="outlet")
        pt = [g for g in pts.geometry if g is not None and g.geom_type == "Point"]
        if not pt:
            return None
        s = gpd.GeoSeries(pt[:1], crs=pcrs).to_crs(work_crs)
    else:
        s = gpd.GeoSeries([shapely.Point(out)], crs=file_crs).to_crs(work_crs)
    return tuple(np.asarray(s.iloc[0].coords[0]))


def _surface(p, work_crs):
    pp = p.pipes
    if pp.get("survey"):
        from .gisio import read_survey
        from .terrain import PointSurface

        xy, z = read_survey(pp["survey"], crs=pp.get("survey_crs") or work_crs,
                            z_unit=pp.get("survey_z_unit", "m"), work_crs=work_crs)
        return PointSurface(xy, z)
    if pp.get("dem"):
        from .gisio import read_dem
        from .terrain import RasterSurface

        return RasterSurface(*read_dem(pp["dem"], work_crs))
    return None


def _layout_lines(p, prop, work_crs):
    """Numbers only: drainplan's own layout at the proposed spacing."""
    import geopandas as gpd

    from .design import layout_inputs
    from .layout_plan import plan_layout

    lp = plan_layout(layout_inputs(p, prop.numbers["lateral_spacing"], keep_metric_crs=True))
    import pandas as pd

    lat = lp.layers["laterals"].to_crs(work_crs)
    unc = lp.layers["unconnected"].to_crs(work_crs)
    if len(unc):
        # pieces the layout could not join to the main (beyond an exclusion) are still
        # laterals the proposal lays; they need a sub-main
        unc = unc.assign(lateral_id=[f"{f}-U{i + 1:02d}" for i, f in enumerate(unc["field_id"])])
        lat = gpd.GeoDataFrame(pd.concat([lat, unc[["field_id", "lateral_id", "geometry"]]],
                                         ignore_index=True), crs=work_crs)
    mains = lp.layers["mains"].to_crs(work_crs)
    rows = {"kind": ["lateral"] * len(lat) + ["main"] * len(mains),
            "size": [None] * (len(lat) + len(mains)),
            "depth_m": [np.nan] * (len(lat) + len(mains)),
            "line_id": list(lat["lateral_id"].astype(str)) + list(mains["main_id"].astype(str)),
            "field_hint": list(lat["field_id"].astype(str)) + list(mains["field_id"].astype(str))}
    geoms = list(lat.geometry.values) + list(mains.geometry.values)
    outs = lp.layers["outlets"].to_crs(work_crs)
    outlet_pts = [tuple(g.coords[0]) for g, k in zip(outs.geometry, outs["kind"])
                  if k == "main outlet"]
    res = gpd.GeoDataFrame(rows, geometry=geoms, crs=work_crs)
    res.attrs["sub_main_pieces"] = int(len(unc))
    return res, outlet_pts


def check_proposal(project, proposal, *, units=None, progress=None, k_cv=None,
                   confidence=None, extra_criteria=()):
    """Check ``proposal`` against every criterion of ``project``.

    Parameters
    ----------
    project : drainplan.project.Project
    proposal : Proposal
    units : {"metric", "us"}, optional
        Units of the sentences in the result (default: the project's).
    progress : callable, optional
    k_cv, confidence : float, optional
        Coefficient of variation of K [-] and a confidence level (default 0.8):
        adds each spacing criterion met with that confidence
        (:func:`confidence_criteria`).
    extra_criteria : sequence of SpacingCriterion
        Further spacing criteria (e.g. :func:`season_criterion`).

    Returns
    -------
    CheckResult
    """
    import geopandas as gpd
    import shapely

    from .geometry.proposal import join_network, measure_laterals

    say = progress or (lambda text: None)
    p = project
    u = units or p.report.get("units", "metric")
    pl = _pipe_lib()
    pp = p.pipes
    nums = dict(proposal.numbers)
    notes = list(proposal.notes)

    say("fields")
    fields, regions, zones, field_ids, work_crs, file_crs = _fields_metric(p)
    outlet = _outlet_point(p, work_crs, file_crs)

    # --- lines
    say("proposal lines")
    outlet_pts = [outlet] if outlet is not None else None
    if proposal.lines is None:
        lines, outlet_pts = _layout_lines(p, proposal, work_crs)
        outlet_pts = [outlet] if outlet is not None else (outlet_pts or None)
        source = "numbers"
        notes.append(f"numbers only: laterals laid out by drainplan at the proposed spacing "
                     f"{nums['lateral_spacing']:g} m with the project's layout options")
        k = lines.attrs.get("sub_main_pieces", 0)
        if k:
            notes.append(f"{k} lateral piece(s) beyond exclusions need a sub-main to the "
                         "field's main (their flow is counted in that main)")
    else:
        lines = proposal.lines.to_crs(work_crs)
        source = "drawn"
    has_z = bool(proposal.lines is not None and proposal.lines.attrs.get("has_z"))
    is_lat = (lines["kind"] == "lateral").to_numpy()
    lat_g = np.asarray(lines.geometry.values[is_lat], dtype=object)
    main_g = np.asarray(lines.geometry.values[~is_lat], dtype=object)
    lat_rows = lines[is_lat].reset_index(drop=True)
    main_rows = lines[~is_lat].reset_index(drop=True)
    if lat_g.size == 0:
        raise InputError(f"proposal {proposal.path.name} holds no laterals (only mains)",
                         param="proposal")

    # --- geometry
    say("local spacing and strips")
    geo = measure_laterals(shapely.force_2d(lat_g), fields, regions=regions)
    inside = geo.field >= 0
    if not inside.any():
        raise InputError(f"no lateral of proposal {proposal.path.name} lies in a field of the "
                         "project (wrong file or CRS?)", param="proposal")
    if not inside.all():
        notes.append(f"{int((~inside).sum())} lateral(s) outside every field were left out")
    surface = _surface(p, work_crs)
    elev = None
    if surface is not None:
        def elev(xy):
            return np.asarray(surface(np.asarray(xy, float)), float)
    net = join_network(shapely.force_2d(lat_g), shapely.force_2d(main_g),
                       tolerance=JOIN_TOLERANCE, outlet=outlet_pts, elevation_of=elev)
    free = np.flatnonzero(net.lateral_main < 0)
    if source == "numbers" and main_g.size:
        # layout pieces reach their main through connectors or sub-mains: join by field
        hint_main = {h: i for i, h in enumerate(main_rows["field_hint"])}
        for i, h in enumerate(lat_rows["field_hint"]):
            if net.lateral_main[i] < 0 and h in hint_main:
                net.lateral_main[i] = hint_main[h]
    if free.size and (has_z or elev is not None):
        # a lateral that reaches no main directly drains to its lower end (its Z values,
        # or the ground)
        za, zb = np.full(free.size, np.nan), np.full(free.size, np.nan)
        for k, i in enumerate(free):
            g = lat_g[i]
            if has_z and shapely.has_z(g):
                c = shapely.get_coordinates(g, include_z=True)
                first = np.hypot(*(c[0, :2] - net.lateral_junction[i])) < 1e-6
                za[k], zb[k] = (c[0, 2], c[-1, 2]) if first else (c[-1, 2], c[0, 2])
            elif elev is not None:
                za[k], zb[k] = elev(np.array([net.lateral_junction[i],
                                              net.lateral_upstream[i]]))
        swap = free[zb < za]
        net.lateral_junction[swap], net.lateral_upstream[swap] = (
            net.lateral_upstream[swap].copy(), net.lateral_junction[swap].copy())
    notes += net.notes

    # --- ids
    lat_ids = [v if v else f"L{i + 1:03d}" for i, v in enumerate(lat_rows["line_id"])]
    if len(set(lat_ids)) != len(lat_ids):
        lat_ids = [f"{v}#{i + 1}" for i, v in enumerate(lat_ids)]
    main_ids = [v if v else f"M{i + 1:02d}" for i, v in enumerate(main_rows["line_id"])]
    if len(set(main_ids)) != len(main_ids):
        main_ids = [f"{v}#{i + 1}" for i, v in enumerate(main_ids)]

    # --- depth and radius of each lateral
    design_depths = p.drains["depth"]
    depth = lat_rows["depth_m"].to_numpy(float).copy()
    if has_z and surface is not None:
        # surveyed inverts under surveyed ground: the depth as installed (mean along it)
        n_z = 0
        for i in np.flatnonzero(np.isnan(depth) & inside):
            if shapely.has_z(lat_g[i]):
                c = shapely.get_coordinates(lat_g[i], include_z=True)
                depth[i] = float(np.mean(elev(c[:, :2]) - c[:, 2]))
                n_z += 1
        if n_z:
            notes.append(f"{n_z} lateral depth(s) from the surveyed ground above the lines' "
                         "Z values (mean along each lateral)")
            bad = np.flatnonzero(inside & ~(depth > 0))
            if bad.size:
                raise InputError(f"lateral {lat_ids[bad[0]]}: its Z "
                                 "values lie above the surveyed ground (Z must be the pipe "
                                 "invert, in the survey's datum)", param="proposal")
    default_depth = nums.get("depth")
    if default_depth is None and len(design_depths) == 1:
        default_depth = design_depths[0]
        if np.isnan(depth).any():
            notes.append(f"laterals without a depth taken at the project's drain depth "
                         f"{default_depth:g} m")
    if np.isnan(depth[inside]).any():
        if default_depth is None:
            raise InputError("the proposal gives no drain depth and the project compares "
                             "several; give proposal.depth or a depth attribute",
                             param="proposal")
        depth = np.where(np.isnan(depth), default_depth, depth)
    radius = nums.get("radius", p.drains["radius"])
    if "radius" not in nums:
        notes.append(f"effective drain radius {radius:g} m from the project (the proposal "
                     "names no envelope)")

    # --- pipes: sizes, series
    material = pp.get("material", "corrugated")
    from .design import project_pipe_series

    series_pref = project_pipe_series(p)
    series_list = [pl.pipe_series(material, s, path=pp.get("sizes"))
                   for s in ([series_pref] + [x for x in ("metric", "inch") if x != series_pref])
                   if _has_series(pl, material, s, pp.get("sizes"))]
    coef = pp.get("coefficient", p.criteria.get("recharge"))
    if coef is None:
        raise InputError(f"{p.path.name}: pipes.coefficient is required when no steady "
                         "recharge is given", param="project")
    cap_factor = pp.get("capacity_factor", pl.DEFAULT_CAPACITY_FACTOR)
    cap_method = pp.get("capacity_method", "manning")

    def size_of(texts, default, what):
        out = []
        for t in texts:
            t = t if t else default
            if not t:
                out.append(None)
                continue
            s, i = parse_size(t, series_list, what=what)
            out.append((s.nominal[i], float(s.inner_diameter[i])))
        return out

    lat_size = size_of(lat_rows["size"], nums.get("lateral_size"), "lateral size")
    main_size = size_of(main_rows["size"], nums.get("main_size"), "main size")

    # --- grades and elevations
    min_grade = pp.get("min_grade", 0.001)
    max_grade = pp.get("max_grade", 0.05)
    min_cover = pp.get("min_cover", 0.6)
    vmin, vmax = pp.get("min_velocity", 0.15), pp.get("max_velocity", 1.5)
    lat_len = geo.length
    main_len = shapely.length(main_g) if main_g.size else np.zeros(0)

    def grades(geoms, up, down, depths):
        """(grade, cover-depth source) from Z (inverts), else ground - depth, else None."""
        g = np.full(len(geoms), np.nan)
        inv_up = np.full(len(geoms), np.nan)
        inv_dn = np.full(len(geoms), np.nan)
        for i, ln in enumerate(geoms):
            L = ln.length
            if L <= 0:
                continue
            if has_z and shapely.has_z(ln):
                c = shapely.get_coordinates(ln, include_z=True)
                zs = c[:, 2]
                da = np.hypot(*(c[0, :2] - up[i]))
                db = np.hypot(*(c[-1, :2] - up[i]))
                iu, idn = (zs[0], zs[-1]) if da <= db else (zs[-1], zs[0])
            elif surface is not None and not nums.get("grade"):
                gz = elev(np.array([up[i], down[i]]))
                iu, idn = gz[0] - depths[i], gz[1] - depths[i]
            else:
                continue
            inv_up[i], inv_dn[i] = iu, idn
            g[i] = (iu - idn) / L
        return g, inv_up, inv_dn

    lat_grade, _, _ = grades(lat_g, net.lateral_upstream, net.lateral_junction,
                                       depth)
    main_depth = pp.get("main_depth", float(np.nanmax(depth)) + 0.3)
    main_grade, _, _ = grades(main_g, net.main_upstream_point,
                                          net.main_outlet_point, np.full(main_g.size,
                                                                         main_depth))
    elevations = bool(np.isfinite(lat_grade).any())
    given_grade = nums.get("grade")
    if elevations:
        notes.append("grades from " + ("the lines' Z values (pipe inverts)" if has_z else
                                       "the surveyed ground at the proposed depth"))
    lat_grade_used = np.where(np.isfinite(lat_grade), lat_grade,
                              given_grade if given_grade else min_grade)
    main_grade_used = np.where(np.isfinite(main_grade), main_grade,
                               given_grade if given_grade else min_grade)
    if not elevations and not given_grade:
        notes.append(f"no elevations and no proposed grade: capacities at the minimum grade "
                     f"{min_grade:.2%}; grade and velocity not checked")

    def full_capacity(d, s, uniform):
        d, s = np.asarray(d, float), np.maximum(np.asarray(s, float), 1e-9)
        return np.asarray(pl.pipe_capacity(d, s, material, method=cap_method,
                                           uniform_inflow=uniform), float)

    def capacity(d, s, uniform):
        return full_capacity(d, s, uniform) * cap_factor

    def full_velocity(d, s):
        return pl.full_velocity(full_capacity(d, s, False), np.asarray(d, float))

    def outside(d):
        return pl.outside_diameter(d, material)

    # --- flows
    strip_area = np.where(inside, geo.strip_area, 0.0)
    lat_flow = coef * strip_area / 86400.0                     # m3/s, Q = DC x A
    nm = main_g.size
    main_area = np.zeros(nm)
    for i, m in enumerate(net.lateral_main):
        if m >= 0 and inside[i]:
            main_area[m] += strip_area[i]
    for m in net.order:
        if net.main_downstream[m] >= 0:
            main_area[net.main_downstream[m]] += main_area[m]
    main_flow = coef * main_area / 86400.0
    unjoined = int(((net.lateral_main < 0) & inside).sum()) if nm else 0
    if nm and unjoined:
        notes.append(f"{unjoined} lateral(s) end more than {JOIN_TOLERANCE:g} m from every "
                     "main: they drain nowhere and their flow is not counted in any main")
    if nm == 0:
        notes.append("the proposal draws no main: main sizes not checked")

    stated = nums.get("lateral_spacing")
    if stated is not None and source == "drawn" and inside.any():
        med = float(np.nanmedian(geo.local_spacing[inside]))
        notes.append(f"stated lateral spacing {show(stated, 'spacing', u, 1)}; measured on "
                     f"the drawn lines: median {show(med, 'spacing', u, 1)} (the drawn "
                     "lines are checked)")

    # --- spacing criteria per lateral and side
    say("spacing criteria")
    crit_list = [c for c in SPACING_CRITERIA if c.applies(p)]
    if k_cv is not None:
        crit_list += [c for c in confidence_criteria(k_cv, 0.8 if confidence is None
                                                     else confidence) if c.applies(p)]
    elif confidence is not None:
        raise InputError("a confidence level needs the spread of K: give --k-cv too",
                         param="confidence")
    crit_list += [c for c in extra_criteria if c.applies(p)]
    keys = np.round(depth, 4)
    allowed = {}
    for c in crit_list:
        vals = {}
        for z in np.unique(keys[inside]):
            vals[float(z)] = c.allowed(p, float(z), radius)
        allowed[c.key] = np.array([vals.get(float(z), np.nan) for z in keys])
    side = geo.side_spacing                                   # (n, 2)
    half_area = np.c_[shapely.area(geo.strip_left), shapely.area(geo.strip_right)]
    half_area = np.where(inside[:, None], half_area, 0.0)
    total_area = float(half_area.sum())
    side_ok_all = np.ones_like(side, bool)
    lat_fail = [[] for _ in range(lat_g.size)]
    criteria = []
    lateral_checks = {}
    tol = 1 + 1e-9
    for c in crit_list:
        a = allowed[c.key]
        ok_side = np.isfinite(a)[:, None] & (side <= a[:, None] * tol)
        side_ok_all &= ok_side
        ok_lat = ok_side.all(axis=1)
        margins = np.where(np.isfinite(a), 100.0 * (a - geo.local_spacing) / a, -np.inf)
        idx = np.flatnonzero(inside)
        w = idx[np.argmin(margins[idx])]
        for i in idx[~ok_lat[idx]]:
            lat_fail[i].append(c.key)
        lateral_checks[c.key] = (a, ok_lat)
        m = margins[w] if np.isfinite(margins[w]) else None
        meets = bool(ok_lat[idx].all())
        area_ok = float(half_area[ok_side].sum())
        criteria.append({
            "name": c.key, "kind": "spacing", "statement": c.describe(p, u),
            "required": _r(a[w]), "proposed": _r(geo.local_spacing[w]), "unit": "m",
            "margin_pct": _r(m, 1), "meets": meets, "where": lat_ids[w],
            "area_meeting_pct": _r(100.0 * area_ok / total_area if total_area else 0.0, 1),
            "text": verdict_text("spacing", meets if ok_lat[w] else False,
                                 show(geo.local_spacing[w], "spacing", u, 1),
                                 show(a[w], "spacing", u, 1) if np.isfinite(a[w])
                                 else "none (no spacing meets it)", m, at_most=True),
            "source": c.source})

    # --- pipe checks (per line)
    say("pipes")
    lat_cap = np.full(lat_g.size, np.nan)
    lat_vel = np.full(lat_g.size, np.nan)
    lat_cover = np.full(lat_g.size, np.nan)
    for i, s in enumerate(lat_size):
        if s is None:
            continue
        d = s[1]
        lat_cap[i] = capacity(d, lat_grade_used[i], True)
        lat_vel[i] = full_velocity(d, lat_grade_used[i])
        lat_cover[i] = depth[i] - outside(d)
    main_cap = np.full(nm, np.nan)
    main_vel = np.full(nm, np.nan)
    for i, s in enumerate(main_size):
        if s is None:
            continue
        main_cap[i] = capacity(s[1], main_grade_used[i], False)
        main_vel[i] = full_velocity(s[1], main_grade_used[i])
    if surface is not None and has_z:
        # cover from the ground above the surveyed inverts
        for i, ln in enumerate(lat_g):
            if lat_size[i] is None or not shapely.has_z(ln):
                continue
            c = shapely.get_coordinates(ln, include_z=True)
            lat_cover[i] = float(np.min(elev(c[:, :2]) - c[:, 2])) - outside(lat_size[i][1])
    main_fail = [[] for _ in range(nm)]
    pipe_entries = []

    def add_check(name, kind, values, need, ids, at_most, fail_lists, label_fn, source,
                  mask=None, unit=""):
        vals = np.asarray(values, float)
        need = np.broadcast_to(np.asarray(need, float), vals.shape)
        ok = np.isfinite(vals) & np.isfinite(need)
        if mask is not None:
            ok &= mask
        if not ok.any():
            return
        if at_most:
            marg = np.where(ok, 100.0 * (need - vals) / np.where(need != 0, need, 1), np.inf)
            passed = vals <= need * tol
        else:
            marg = np.where(ok, 100.0 * (vals - need) / np.where(need != 0, need, 1), np.inf)
            passed = vals * tol >= need
        idx = np.flatnonzero(ok)
        w = idx[np.argmin(marg[idx])]
        for i in idx[~passed[idx]]:
            fail_lists[i].append(name)
        meets = bool(passed[idx].all())
        pipe_entries.append({
            "name": name, "kind": kind, "statement": None, "required": _sig(need[w]),
            "proposed": _sig(vals[w]), "unit": unit, "margin_pct": _r(marg[w], 1),
            "meets": meets, "where": ids[w], "failing": int((~passed[idx]).sum()),
            "checked": int(idx.size), "text": label_fn(w, bool(passed[w]), marg[w]),
            "source": source})
        return passed, ok

    def q_txt(v):
        return show(v * 1000.0, "flow", u, 1 if u == "metric" else 2)

    man_src = ("Manning full flow, n by material and size (templates/manning_n.csv), "
               f"{cap_factor:.0%} of capacity usable; Q = DC x A" if cap_method == "manning"
               else "drain-pipe power laws (Cavelaars et al. 1994, ILRI Publ. 16 ch. 21), "
               f"{cap_factor:.0%} of capacity usable; Q = DC x A")
    add_check(
        "lateral capacity", "pipe", lat_cap * 1000, lat_flow * 1000, lat_ids, False, lat_fail,
        lambda w, ok, m: verdict_text(f"lateral {lat_size[w][0]} carries",
                                      ok, q_txt(lat_cap[w]), q_txt(lat_flow[w]), m,
                                      at_most=False),
        man_src, mask=inside, unit="L/s")
    add_check(
        "main capacity", "pipe", main_cap * 1000, main_flow * 1000, main_ids, False, main_fail,
        lambda w, ok, m: verdict_text(f"main {main_size[w][0]} carries",
                                      ok, q_txt(main_cap[w]), q_txt(main_flow[w]), m,
                                      at_most=False),
        man_src, mask=main_flow > 0, unit="L/s")
    lat_grade_checked = np.isfinite(lat_grade) if elevations else np.full(lat_g.size,
                                                                          bool(given_grade))
    main_grade_checked = np.isfinite(main_grade) if elevations else np.full(nm,
                                                                            bool(given_grade))
    pct = lambda v: f"{v:.2%}"  # noqa: E731
    add_check("lateral minimum grade", "grade", lat_grade_used, min_grade, lat_ids, False,
              lat_fail, lambda w, ok, m: verdict_text("lateral grade", ok,
                                                      pct(lat_grade_used[w]), pct(min_grade),
                                                      m, at_most=False),
              "project minimum grade (pipes.min_grade; common practice 0.1 %)",
              mask=inside & lat_grade_checked, unit="m/m")
    add_check("lateral maximum grade", "grade", lat_grade_used, max_grade, lat_ids, True,
              lat_fail, lambda w, ok, m: verdict_text("lateral grade", ok,
                                                      pct(lat_grade_used[w]), pct(max_grade),
                                                      m, at_most=True),
              "project maximum grade (pipes.max_grade)", mask=inside & lat_grade_checked,
              unit="m/m")
    if nm:
        add_check("main minimum grade", "grade", main_grade_used, min_grade, main_ids, False,
                  main_fail, lambda w, ok, m: verdict_text("main grade", ok,
                                                           pct(main_grade_used[w]),
                                                           pct(min_grade), m, at_most=False),
                  "project minimum grade (pipes.min_grade)", mask=main_grade_checked,
                  unit="m/m")
    add_check("lateral cover", "cover", lat_cover, min_cover, lat_ids, False, lat_fail,
              lambda w, ok, m: verdict_text("cover over the lateral", ok,
                                            show(lat_cover[w], "length", u, 2),
                                            show(min_cover, "length", u, 2), m, at_most=False),
              "project minimum cover (pipes.min_cover; about 0.6 m under field traffic, "
              "common practice); outside diameter 1.15 x inside for corrugated pipe",
              mask=inside, unit="m")
    add_check("lateral depth", "depth", depth, pp.get("max_depth", 2.0), lat_ids, True,
              lat_fail, lambda w, ok, m: verdict_text(
                  "lateral depth", ok, show(depth[w], "length", u, 2),
                  show(pp.get("max_depth", 2.0), "length", u, 2), m, at_most=True),
              "project maximum trench depth (pipes.max_depth); deeper trenches need the "
              "protective systems in the cautions", mask=inside, unit="m")
    add_check("lateral minimum velocity", "velocity", lat_vel, vmin, lat_ids, False, lat_fail,
              lambda w, ok, m: verdict_text("lateral full-flow velocity", ok,
                                            show(lat_vel[w], "velocity", u, 2),
                                            show(vmin, "velocity", u, 2), m, at_most=False),
              "self-cleaning minimum (pipes.min_velocity; 0.15 m/s, Schwab, Fangmeier & "
              "Elliot as cited in common practice)", mask=inside & lat_grade_checked,
              unit="m/s")
    add_check("lateral maximum velocity", "velocity", lat_vel, vmax, lat_ids, True, lat_fail,
              lambda w, ok, m: verdict_text("lateral full-flow velocity", ok,
                                            show(lat_vel[w], "velocity", u, 2),
                                            show(vmax, "velocity", u, 2), m, at_most=True),
              "project maximum velocity (pipes.max_velocity)", mask=inside & lat_grade_checked,
              unit="m/s")
    if nm:
        add_check("main maximum velocity", "velocity", main_vel, vmax, main_ids, True,
                  main_fail, lambda w, ok, m: verdict_text(
                      "main full-flow velocity", ok, show(main_vel[w], "velocity", u, 2),
                      show(vmax, "velocity", u, 2), m, at_most=True),
                  "project maximum velocity (pipes.max_velocity)", mask=main_grade_checked,
                  unit="m/s")
    if zones is not None:
        inside_zone = shapely.length(shapely.intersection(shapely.force_2d(lat_g), zones[0]))
        what = ", ".join(zones[1]) or "exclusion"
        add_check("clear of exclusion setbacks", "safety", inside_zone, 0.5, lat_ids, True,
                  lat_fail, lambda w, ok, m: (
                      f"perforated lateral runs {show(inside_zone[w], 'length', u, 1)} inside "
                      f"the setback zones ({what}): "
                      + ("meets" if ok else "fails (non-perforated pipe there, or route "
                                            "around; follow the local well and sanitation "
                                            "codes)")),
                  "project exclusions and their setbacks ([fields] exclusions, "
                  "exclusion_setback or the setback_m attribute); see the cautions",
                  mask=inside, unit="m")
        if pipe_entries and pipe_entries[-1]["name"] == "clear of exclusion setbacks":
            pipe_entries[-1]["margin_pct"] = None     # a length inside: no useful ratio
    if nm:
        gap = shapely.distance(shapely.points(net.lateral_junction),
                               shapely.union_all(shapely.force_2d(main_g)))
        gap = np.where(net.lateral_main >= 0, 0.0, gap)
        add_check("lateral joins a main", "network", gap, JOIN_TOLERANCE, lat_ids, True,
                  lat_fail, lambda w, ok, m: (
                      f"lateral end {show(gap[w], 'length', u, 1)} from the nearest main, "
                      f"allowed {show(JOIN_TOLERANCE, 'length', u, 1)}: "
                      + ("meets" if ok else "fails (drains nowhere: add a sub-main)")),
                  "drawn network: a lateral end within 3 m of a main joins it",
                  mask=inside, unit="m")
    criteria += pipe_entries
    not_checked = []
    if all(s is None for s in lat_size):
        not_checked.append({"name": "lateral capacity", "reason": "no lateral size given"})
    if nm and all(s is None for s in main_size):
        not_checked.append({"name": "main capacity", "reason": "no main size given"})
    if not elevations and not given_grade:
        not_checked.append({"name": "grade and velocity",
                            "reason": "no elevations (Z values or a survey) and no grade"})

    # --- main failures reach the laterals upstream
    bad_main = np.array([bool(f) for f in main_fail], bool)
    for m in net.order[::-1]:
        d = net.main_downstream[m]
        if d >= 0 and bad_main[d]:
            bad_main[m] = True
            main_fail[m].append("main downstream")
    for i, m in enumerate(net.lateral_main):
        if m >= 0 and bad_main[m]:
            lat_fail[i].append("main downstream")

    # --- verdicts and areas
    pipe_ok_lat = np.array([not [f for f in lat_fail[i] if f not in lateral_checks]
                            for i in range(lat_g.size)])
    ok_half = side_ok_all & pipe_ok_lat[:, None] & inside[:, None]
    area_meeting = 100.0 * float(half_area[ok_half].sum()) / total_area if total_area else 0.0
    lat_meets = np.array([not lat_fail[i] for i in range(lat_g.size)]) & inside
    verdict = "meets" if all(c["meets"] for c in criteria) and lat_meets[inside].all() \
        and not bad_main.any() else "fails"

    lat_field = [field_ids[f] if f >= 0 else None for f in geo.field]
    laterals_out = []
    for i in range(lat_g.size):
        if not inside[i]:
            continue
        laterals_out.append({
            "lateral_id": lat_ids[i], "field_id": lat_field[i],
            "local_spacing_m": _r(geo.local_spacing[i]),
            "spacing_left_m": _r(geo.spacing_left[i]),
            "spacing_right_m": _r(geo.spacing_right[i]),
            "edge": bool(geo.edge[i]),
            "edge_distance_m": _r(np.nanmin([geo.edge_left[i], geo.edge_right[i]])
                                  if np.isfinite([geo.edge_left[i],
                                                  geo.edge_right[i]]).any() else None),
            "depth_m": _r(depth[i]), "length_m": _r(lat_len[i], 1),
            "drained_area_ha": _r(strip_area[i] / 1e4, 4),
            "size": lat_size[i][0] if lat_size[i] else None,
            "flow_l_s": _r(lat_flow[i] * 1000, 3),
            "capacity_l_s": _r(lat_cap[i] * 1000, 3),
            "grade": _sig(lat_grade[i]) if np.isfinite(lat_grade[i]) else None,
            "main_id": main_ids[net.lateral_main[i]] if net.lateral_main[i] >= 0 else None,
            **{f"allowed_{_slug(k)}_m": _r(v[0][i]) for k, v in lateral_checks.items()},
            "meets": bool(lat_meets[i]), "fails": sorted(set(lat_fail[i])),
            "x": _r(lat_g[i].centroid.x, 2), "y": _r(lat_g[i].centroid.y, 2)})
    mains_out = []
    for i in range(nm):
        mains_out.append({
            "main_id": main_ids[i], "size": main_size[i][0] if main_size[i] else None,
            "length_m": _r(main_len[i], 1), "drained_area_ha": _r(main_area[i] / 1e4, 4),
            "flow_l_s": _r(main_flow[i] * 1000, 3), "capacity_l_s": _r(main_cap[i] * 1000, 3),
            "grade": _sig(main_grade[i]) if np.isfinite(main_grade[i]) else None,
            "discharges_to": main_ids[net.main_downstream[i]] if net.main_downstream[i] >= 0
            else "outlet",
            "meets": not bad_main[i], "fails": sorted(set(main_fail[i]))})

    summary = {
        "verdict": verdict,
        "area_meeting_pct": _r(area_meeting, 1),
        "drained_area_ha": _r(total_area / 1e4, 4),
        "criteria": criteria,
        "not_checked": not_checked,
        "laterals": laterals_out,
        "mains": mains_out,
        "lateral_count": int(inside.sum()),
        "failing_laterals": int((~lat_meets & inside).sum()),
        "proposal": {"file": proposal.path.name, "source": source,
                     **{k: (v if isinstance(v, str) else _r(v, 6)) for k, v in nums.items()
                        if k not in ("lines",)},
                     "radius_m": _r(radius, 4), "drainage_coefficient_m_per_d": _r(coef, 6)},
        "project": {"file": p.path.name, **p.site},
        "edge_treatment": EDGE_TREATMENT,
        "notes": notes,
        "work_crs": work_crs.to_string(),
    }

    # --- layers
    lat_gdf = gpd.GeoDataFrame({
        "lateral_id": lat_ids, "field_id": lat_field,
        "local_spacing_m": np.round(geo.local_spacing, 3), "depth_m": np.round(depth, 3),
        "size": [s[0] if s else None for s in lat_size],
        "flow_l_s": np.round(lat_flow * 1000, 3), "capacity_l_s": np.round(lat_cap * 1000, 3),
        "verdict": np.where(lat_meets, "meets", np.where(inside, "fails", "outside fields")),
        "fails": ["; ".join(sorted(set(f))) for f in lat_fail]},
        geometry=list(lat_g), crs=work_crs)
    strips, strip_attrs = [], {"lateral_id": [], "side": [], "spacing_m": [], "verdict": []}
    for i in np.flatnonzero(inside):
        for k, (g, name) in enumerate(((geo.strip_left[i], "left"),
                                       (geo.strip_right[i], "right"))):
            if g is None or g.is_empty:
                continue
            strips.append(g)
            strip_attrs["lateral_id"].append(lat_ids[i])
            strip_attrs["side"].append(name)
            strip_attrs["spacing_m"].append(round(float(side[i, k]), 3))
            strip_attrs["verdict"].append("meets" if ok_half[i, k] else "fails")
    strip_gdf = gpd.GeoDataFrame(strip_attrs, geometry=strips, crs=work_crs)
    main_gdf = gpd.GeoDataFrame({
        "main_id": main_ids, "size": [s[0] if s else None for s in main_size],
        "flow_l_s": np.round(main_flow * 1000, 3), "capacity_l_s": np.round(main_cap * 1000, 3),
        "verdict": np.where(bad_main, "fails", "meets"),
        "fails": ["; ".join(sorted(set(f))) for f in main_fail]},
        geometry=list(main_g), crs=work_crs)
    field_gdf = gpd.GeoDataFrame({"field_id": field_ids}, geometry=list(fields), crs=work_crs)
    return CheckResult(summary, lat_gdf, strip_gdf, main_gdf, field_gdf, work_crs, file_crs)


def _has_series(pl, material, series, path):
    try:
        pl.pipe_series(material, series, path=path)
        return True
    except InputError:
        return False
