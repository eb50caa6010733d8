"""The whole job: project file -> spacing and depth -> layout -> pipes -> one result.

:func:`design` returns a :class:`DesignResult` whose ``summary`` holds every
number that the design sheet shows (and that ``summary.json`` records), plus
the layout and pipe objects and the arrays the figures are drawn from.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np

from . import _background as background
from .errors import ConvergenceWarning, DrainplanError, InputError
from .project import Project
from .spacing import (METHODS, drain_spacing, glover_dumm_head, glover_dumm_profile,
                      hooghoudt_water_table)

__all__ = ["DesignResult", "design", "REFERENCES", "check_sheet_text", "soil_at_depth",
           "project_spacing", "layout_inputs", "reduce_project_layers"]

#: Full citations printed on the design sheet, by method.
REFERENCES = {
    "hooghoudt": [
        "Hooghoudt, S.B. (1940). Algemeene beschouwing van het probleem van de "
        "detailontwatering en de infiltratie door middel van parallel loopende drains, "
        "greppels, slooten en kanalen. Bijdragen tot de kennis van eenige natuurkundige "
        "grootheden van den grond 7. Rijksuitgeverij, 's-Gravenhage.",
        "van der Molen, W.H. and Wesseling, J. (1991). A solution in closed form and a "
        "series solution to replace the tables for the thickness of the equivalent layer "
        "in Hooghoudt's drain spacing formula. Agricultural Water Management 19: 1-16.",
        "Moody, W.T. (1966). Nonlinear differential equation of drain spacing. Journal of "
        "the Irrigation and Drainage Division, ASCE 92(IR2): 1-9.",
        "Ritzema, H.P. (1994). Subsurface flow to drains. In: Ritzema, H.P. (ed.), Drainage "
        "Principles and Applications, ILRI Publication 16, 2nd ed., ch. 8. ILRI, "
        "Wageningen.",
    ],
    "ernst": [
        "Ernst, L.F. (1956). Calculation of the steady flow of groundwater in vertical "
        "cross-sections. Netherlands Journal of Agricultural Science 4: 126-131.",
    ],
    "kirkham": [
        "Kirkham, D. (1958). Seepage of steady rainfall through soil into drains. "
        "Transactions, American Geophysical Union 39(5): 892-908.",
    ],
    "glover-dumm": [
        "Dumm, L.D. (1954). Drain spacing formula. Agricultural Engineering 35: 726-730.",
        "Dumm, L.D. (1964). Transient-flow concept in subsurface drainage: its validity and "
        "use. Transactions of the ASAE 7(2): 142-146.",
    ],
    "field tests": [
        "van Beers, W.F.J. (1983). The auger-hole method: a field measurement of the "
        "hydraulic conductivity of soil below the water table. ILRI Bulletin 1, Wageningen.",
        "Oosterbaan, R.J. and Nijland, H.J. (1994). Determining the saturated hydraulic "
        "conductivity. In: Drainage Principles and Applications, ILRI Publication 16, 2nd "
        "ed., ch. 12.",
    ],
    "pipes": [
        "USDA-NRCS (2001). National Engineering Handbook, part 650, Engineering Field "
        "Handbook, ch. 14: Water management (drainage). Washington, DC.",
        "Cavelaars, J.C., Vlotman, W.F. and Spoor, G. (1994). Subsurface drainage systems. "
        "In: Drainage Principles and Applications, ILRI Publication 16, 2nd ed., ch. 21.",
    ],
}


@dataclass
class DesignResult:
    """Everything one design produced."""

    project: Project
    summary: dict
    layout_plan: object
    pipes_plan: object
    figures: dict = field(default_factory=dict)


def layout_inputs(p, spacing, **extra):
    """The :class:`drainplan.layout_plan.LayoutInputs` for the project's [fields] and
    [layout] with laterals ``spacing`` [m] apart; ``extra`` adds further fields."""
    from .geometry.layout import LayoutOptions
    from .layout_plan import LayoutInputs

    lo, fl = p.layout, p.fields
    opts = LayoutOptions(spacing=spacing, direction=lo.get("direction", "auto"),
                         setback=lo.get("setback", 0.0), min_length=lo.get("min_length", 10.0),
                         offset=lo.get("offset"), main_side=lo.get("main_side", "auto"),
                         cross_setbacks=lo.get("cross_setbacks", True),
                         pattern=lo.get("pattern", "parallel"),
                         herringbone_angle=lo.get("herringbone_angle", 45.0))
    return LayoutInputs(
        fields_path=fl["file"], options=opts, layer=fl.get("layer"),
        id_field=fl.get("id_attribute"), crs=fl.get("crs"), work_crs=fl.get("work_crs"),
        exclude_path=fl.get("exclusions"), exclude_layer=fl.get("exclusions_layer"),
        exclude_setback=fl.get("exclusion_setback", 15.0), outlet=fl.get("outlet"),
        repair=lo.get("repair", False), **extra)


def reduce_project_layers(soil, criteria, depth):
    """:func:`drainplan.soil.reduce_layers` for a project's ``[[soil.layers]]`` with
    drains at ``depth`` [m]; drainable porosity is averaged over the falling
    criterion's zone where [criteria] gives one."""
    from .soil import reduce_layers

    ly = soil["layers"]
    zone = (criteria["initial_depth"], criteria["final_depth"]) \
        if "initial_depth" in criteria else None
    mus = [x.get("drainable_porosity") for x in ly]
    return reduce_layers([x["thickness"] for x in ly], [x["k"] for x in ly], depth,
                         drainable_porosity=None if None in mus else mus,
                         barrier_depth=soil.get("barrier_depth"), porosity_zone=zone)


def soil_at_depth(p, depth):
    """The soil as the methods see it with drains at ``depth``: one K, or K above and
    below drain level (a layered profile is reduced there), barrier depth, porosity."""
    s = dict(p.soil)
    if "layers" in s:
        r = reduce_project_layers(s, p.criteria, depth)
        del s["layers"]
        s["k_above"], s["k_below"] = r["k_above"], r["k_below"]
        s["barrier_depth"] = r["barrier_depth"]
        if r["drainable_porosity"] is not None and "drainable_porosity" not in p.soil:
            s["drainable_porosity"] = r["drainable_porosity"]
    return s


def _soil_args(s):
    out = {"barrier_depth": s["barrier_depth"]}
    if "k" in s:
        out["k"] = s["k"]
    else:
        out["k_above"], out["k_below"] = s["k_above"], s["k_below"]
    return out


def project_spacing(p, method, depth, k_scale=1.0, quiet=True, over=None):
    """drain_spacing for the project at one depth; None where the method does not apply.

    ``over`` replaces inputs for a sensitivity case: ``drainable_porosity``,
    ``barrier_depth`` or ``radius`` (SI)."""
    args = _spacing_args(p, method, depth, k_scale, over)
    if args is None:
        return None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        try:
            return drain_spacing(**args)
        except InputError as exc:
            if quiet:
                return exc
            raise


def _spacing_args(p, method, depth, k_scale=1.0, over=None):
    """Keyword arguments of drain_spacing for the project at one depth (None: n/a)."""
    c, d = p.criteria, p.drains
    over = over or {}
    s = soil_at_depth(p, depth)
    for key in ("drainable_porosity", "barrier_depth"):
        if key in over:
            s[key] = over[key]
    args = dict(method=method, drain_depth=depth, drain_radius=over.get("radius", d["radius"]),
                equivalent_depth_method=d.get("equivalent_depth", "series"), **_soil_args(s))
    for key in ("k", "k_above", "k_below"):
        if key in args:
            args[key] = args[key] * k_scale
    if method == "glover-dumm":
        if "initial_depth" not in c:
            return None
        args.update(initial_depth=c["initial_depth"], final_depth=c["final_depth"],
                    days=c["days"], drainable_porosity=s["drainable_porosity"],
                    shape=c.get("initial_shape", "parabolic"),
                    flow_depth=c.get("flow_depth", "equivalent"))
        if "k" not in args:       # falling water table: K of the flow region below drains
            args["k"] = args.pop("k_below")
            args.pop("k_above")
    else:
        if "recharge" not in c:
            return None
        args.update(recharge=c["recharge"], water_table_depth=c["water_table_depth"])
        if method == "ernst":
            if "interface_depth" in s:
                args["interface_depth"] = s["interface_depth"]
            if "k_vertical" in s:
                args["k_vertical"] = s["k_vertical"] * k_scale
        if method == "kirkham" and "k" not in args:
            return None
    return args


def _f(v, nd=3):
    if v is None:
        return None
    v = float(v)
    return round(v, nd) if math.isfinite(v) else None


def project_pipe_series(project):
    """The pipe size series of a project: as given, else inch sizes on a US-units
    report and metric sizes otherwise."""
    return project.pipes.get("series") or (
        "inch" if project.report.get("units", "metric") == "us" else "metric")


def design(project, *, progress=None, idle=None):
    """Run the whole design for a loaded project.

    Parameters
    ----------
    project : Project
    progress : callable, optional
        Called with a short text as each step starts.
    idle : callable, optional
        Called (once, without arguments) when the layout and the pipes are done but
        the season simulation, running beside them in a second process, is not: time
        for the caller to prepare what comes next (load the report's libraries).

    Returns
    -------
    DesignResult
    """
    say = progress or (lambda text: None)
    p = project
    text_warnings = check_sheet_text(p)
    c, d = p.criteria, p.drains
    steady_method = c.get("method", "hooghoudt")
    if steady_method == "glover-dumm":
        steady_method = None
    has_steady = "recharge" in c
    has_falling = "initial_depth" in c
    if has_steady and steady_method is None:
        raise InputError(f"{p.path.name}: criteria.method glover-dumm needs no steady "
                         "recharge; choose hooghoudt, ernst or kirkham for the steady "
                         "criterion", param="project")

    say("drain spacing")
    depths = sorted(d["depth"])
    table = []
    for z in depths:
        row = {"drain_depth_m": z}
        gov = []
        if has_steady:
            r = project_spacing(p, steady_method, z, quiet=False) if len(depths) == 1 else \
                project_spacing(p, steady_method, z)
            row["steady_spacing_m"] = _f(r.spacing) if not isinstance(r, Exception) else None
            row["steady_note"] = str(r) if isinstance(r, Exception) else None
            if row["steady_spacing_m"]:
                gov.append(row["steady_spacing_m"])
        if has_falling:
            r = project_spacing(p, "glover-dumm", z, quiet=len(depths) > 1)
            row["falling_spacing_m"] = _f(r.spacing) if not isinstance(r, Exception) else None
            row["falling_note"] = str(r) if isinstance(r, Exception) else None
            if row["falling_spacing_m"]:
                gov.append(row["falling_spacing_m"])
        row["governing_spacing_m"] = min(gov) if gov else None
        row["lateral_m_per_ha"] = _f(1e4 / row["governing_spacing_m"], 1) if gov else None
        table.append(row)
    usable = [r for r in table if r["governing_spacing_m"]]
    if not usable:
        notes = "; ".join(n for r in table for n in (r.get("steady_note"), r.get("falling_note"))
                          if n)
        raise DrainplanError("no drain depth gives a workable spacing" +
                             (f" ({notes})" if notes else ""))
    pick = usable[-1] if d.get("choose_depth", "deepest") == "deepest" else usable[0]
    depth = pick["drain_depth_m"]
    us = p.report.get("units", "metric") == "us"
    inc = d.get("spacing_increment", US_SPACING_INCREMENT if us else 1.0)
    raw_spacing = pick["governing_spacing_m"]
    spacing = max(inc, math.floor(raw_spacing / inc + 1e-9) * inc)
    governing = ("steady" if has_steady and pick.get("steady_spacing_m") == raw_spacing
                 else "falling")
    chosen_method = steady_method if governing == "steady" else "glover-dumm"
    # spacing under uncertainty (spread of the field tests, soil.k_cv, ranges);
    # criteria.confidence makes the design spacing the one met with that probability
    deterministic_spacing = raw_spacing
    unc = _uncertainty(p, depth, steady_method if has_steady else None, has_falling)
    if unc is not None and "confidence" in c:
        if not math.isfinite(unc.spacing_at_confidence):
            raise DrainplanError(f"no spacing meets the criteria with {c['confidence']:.0%} "
                                 "confidence at this drain depth")
        raw_spacing = unc.spacing_at_confidence
        spacing = max(inc, math.floor(raw_spacing / inc + 1e-9) * inc)

    # methods side by side and sensitivity at the chosen depth
    comparison = []
    main_result = None
    for m in METHODS:
        r = project_spacing(p, m, depth)
        if r is None:
            continue
        entry = {"method": m, "spacing_m": None, "equivalent_depth_m": None, "note": None,
                 "warnings": []}
        if isinstance(r, Exception):
            entry["note"] = str(r)
        else:
            entry["spacing_m"] = _f(r.spacing)
            entry["equivalent_depth_m"] = _f(r.equivalent_depth)
            entry["flow_depth_m"] = _f(r.flow_depth) if r.flow_depth is not None else None
            entry["head_m"] = _f(r.head, 4)
            entry["depth_to_barrier_m"] = _f(r.depth_to_barrier, 4)
            entry["details"] = {k: _f(v, 6) for k, v in r.extra.items()}
            entry["warnings"] = list(r.warnings)
            if m == chosen_method:
                main_result = r
        comparison.append(entry)
    sensitivity = _sensitivity(p, depth, steady_method if has_steady else None, has_falling)

    # the season simulation needs only the spacing and the depth: it runs beside the
    # layout and the pipes (in a second process where there is a core to spare)
    coef = p.pipes.get("coefficient", c.get("recharge"))
    sim_task = None
    if "weather" in p.simulation:
        sim_task = background.start(_season_simulation, p, depth, spacing, raw_spacing, coef,
                                    None)
    try:
        # layout
        say("layout")
        from .layout_plan import plan_layout

        lp = plan_layout(layout_inputs(
            p, spacing, survey_path=p.pipes.get("survey"), survey_crs=p.pipes.get("survey_crs"),
            survey_z_unit=p.pipes.get("survey_z_unit", "m"), dem_path=p.pipes.get("dem")))

        if len(lp.layers["laterals"]) == 0:      # nothing to pipe: say which field and why
            from .units import show, text_in_units

            u = p.report.get("units", "metric")
            why = "; ".join(text_in_units(r, u) for r in lp.reports if "got no laterals" in r)
            raise InputError(f"{p.path.name}: no field got laterals at "
                             f"{show(spacing, 'spacing', u, 1)} spacing"
                             + (f" ({why})" if why else ""), param="project")

        # pipes
        say("pipes")
        from .network.design import PipeOptions
        from .network.plan import PipesInputs, pipes_from_layers

        pp = p.pipes
        if coef is None:
            raise InputError(f"{p.path.name}: pipes.coefficient is required when no steady "
                             "recharge is given", param="project")
        popts = PipeOptions(
            coefficient=coef, material=pp.get("material", "corrugated"),
            series=project_pipe_series(p), method=pp.get("capacity_method", "manning"),
            capacity_factor=pp.get("capacity_factor", 0.75), drain_depth=depth,
            main_depth=pp.get("main_depth"), min_grade=pp.get("min_grade", 0.001),
            max_grade=pp.get("max_grade", 0.05), min_cover=pp.get("min_cover", 0.6),
            max_depth=pp.get("max_depth", 2.0), min_velocity=pp.get("min_velocity", 0.15),
            max_velocity=pp.get("max_velocity", 1.5),
            ditch_water_level=pp.get("ditch_water_level"),
            outfall_margin=pp.get("outfall_margin", 0.10), sizes_path=pp.get("sizes"),
            envelope=None if pp.get("envelope", "none") == "none" else pp.get("envelope"))
        pipes_plan = pipes_from_layers(
            lp.layers, lp.work_crs, lp.out_crs,
            PipesInputs(layout_path=None, options=popts, survey_path=pp.get("survey"),
                        survey_crs=pp.get("survey_crs"),
                        survey_z_unit=pp.get("survey_z_unit", "m"), dem_path=pp.get("dem")))

        say("water-table curves")
        figures = _figure_data(p, depth, spacing, main_result, chosen_method)
        figures["units"] = p.report.get("units", "metric")
        falling = _falling_discharge(p, figures, coef) if has_falling else None
        summary = _summary(p, table, depth, spacing, raw_spacing, governing, chosen_method,
                           comparison, sensitivity, lp, pipes_plan, main_result, coef)
        summary["design"]["falling_discharge"] = falling
        summary["design"]["warnings"], extra_notes = _design_warnings(p, comparison, chosen_method,
                                                                      falling)
        summary["design"]["notes"] += extra_notes
        summary["design"]["warnings"] = text_warnings + summary["design"]["warnings"]
        _add_uncertainty(summary, figures, p, unc, spacing, deterministic_spacing)
        if sim_task is not None:
            say("season simulation")
            if idle is not None and sim_task.running():
                idle()
            try:
                sim = sim_task.result()
            except _NeedsFieldLatitude:       # PET from temperatures at the fields' latitude
                sim = _season_simulation(p, depth, spacing, raw_spacing, coef, lp)
            summary["simulation"], figures["simulation"] = sim
            summary["references"] += SIMULATION_REFERENCES
        return DesignResult(p, summary, lp, pipes_plan, figures)
    finally:
        if sim_task is not None:
            sim_task.cancel()       # stopped on an error (nothing to do once collected)


#: Citations added to the sheet when the project has a [simulation] section.
SIMULATION_REFERENCES = [
    "Boussinesq, J. (1904). Recherches théoriques sur l'écoulement des nappes d'eau "
    "infiltrées dans le sol et sur le débit des sources. Journal de Mathématiques Pures et "
    "Appliquées 10: 5-78.",
    "de Zeeuw, J.W. and Hellinga, F. (1958). Neerslag en afvoer. Landbouwkundig Tijdschrift "
    "70: 405-422.",
    "Sieben, W.H. (1964). Het verband tussen ontwatering en opbrengst bij de jonge "
    "zavelgronden in de Noordoostpolder. Van Zee tot Land 40. Tjeenk Willink, Zwolle.",
    "Allen, R.G., Pereira, L.S., Raes, D. and Smith, M. (1998). Crop evapotranspiration. "
    "FAO Irrigation and Drainage Paper 56, FAO, Rome (Hargreaves-Samani, Eq. 52).",
]


class _NeedsFieldLatitude(Exception):
    """The weather record gives temperatures and the project no latitude: the season
    simulation waits for the layout (the fields' latitude)."""


def _season_simulation(p, depth, spacing, raw_spacing, coef, lp):
    """[simulation]: the water table over the project's weather record at the design depth.

    ``lp`` (the layout) gives the fields' latitude for PET from temperatures when the
    project gives none; with ``lp=None`` such a record raises
    :class:`_NeedsFieldLatitude`."""
    from .simulation_plan import SimulationSite, design_simulation
    from .weather import parse_season, read_weather

    sim = p.simulation
    s = soil_at_depth(p, depth)
    profile = None
    if "layers" in p.soil and "drainable_porosity" not in p.soil and all(
            "drainable_porosity" in ly for ly in p.soil["layers"]):
        bottoms = np.cumsum([ly["thickness"] for ly in p.soil["layers"]])
        profile = tuple((float(b), float(ly["drainable_porosity"]))
                        for b, ly in zip(bottoms, p.soil["layers"]))
    mu = None if profile else s.get("drainable_porosity")
    if mu is None and profile is None:
        raise InputError(f"{p.path.name}: [simulation] needs soil.drainable_porosity (or one "
                         "for every soil layer)", param="project")
    site = SimulationSite(drain_depth=depth, barrier_depth=s["barrier_depth"],
                          drain_radius=p.drains["radius"],
                          k_below=s.get("k", s.get("k_below")),
                          k_above=s.get("k", s.get("k_above")), drainable_porosity=mu,
                          porosity_profile=profile,
                          root_zone_depth=sim.get("root_zone_depth", 0.5),
                          equivalent_depth_method=p.drains.get("equivalent_depth", "series"))
    latitude = sim.get("latitude")
    if latitude is None and lp is not None:   # the fields' latitude, for Hargreaves-Samani
        try:
            c = lp.layers["field"].to_crs("EPSG:4326").geometry.union_all().centroid
            latitude = float(c.y)
        except Exception:                     # a layer without a usable CRS: ask for it
            latitude = None
    try:
        weather = read_weather(sim["weather"], latitude=latitude)
    except InputError as exc:
        if lp is None and latitude is None and exc.param == "latitude":
            raise _NeedsFieldLatitude() from None
        raise InputError(f"{p.path.name}: simulation.weather: {exc}", param="project") from None
    season = parse_season(sim.get("season"))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        return design_simulation(site, weather, spacing=spacing, analytic_spacing=raw_spacing,
                                 coefficient=coef, season=season,
                                 target=sim.get("target_sew30"),
                                 basis=sim.get("target_basis", "mean"),
                                 model=sim.get("model", "boussinesq"),
                                 season_text=sim.get("season", "all"))


#: Spacing rounding for a project shown in US units when the project gives none: 5 ft
#: (spacings are laid out in whole feet, usually in 5 ft steps) [PRACTICE].
US_SPACING_INCREMENT = 5 * 0.3048


def check_sheet_text(p):
    """Project text that goes on the sheet: control characters stripped (warned), and
    right-to-left text or characters the sheet font lacks refused before any work."""
    from ._text import check_text

    warnings = []
    for section, keys in (("site", ("name", "client", "location", "designer", "date",
                                    "notes")),
                          ("soil", ("source",)), ("criteria", ("source",))):
        values = getattr(p, section)
        for key in keys:
            if isinstance(values.get(key), str):
                values[key], w = check_text(values[key], f"{section}.{key}")
                warnings += w
    for i, ly in enumerate(p.soil.get("layers") or [], start=1):
        if isinstance(ly.get("name"), str):
            ly["name"], w = check_text(ly["name"], f"soil.layers[{i}].name")
            warnings += w
    return warnings


#: Sensitivity cases: input, label, how the low and high values are made.
SENSITIVITY_FACTORS = {"k": (0.5, 2.0), "drainable_porosity": (0.5, 1.5),
                       "barrier_depth": (0.5, 2.0)}


def _governing_spacing(p, depth, steady_method, has_falling, **kw):
    """Narrowest spacing of the project's criteria at one depth, and which criterion."""
    out = []
    if steady_method:
        r = project_spacing(p, steady_method, depth, **kw)
        if r is not None and not isinstance(r, Exception) and np.isfinite(r.spacing):
            out.append((float(r.spacing), "steady"))
    if has_falling:
        r = project_spacing(p, "glover-dumm", depth, **kw)
        if r is not None and not isinstance(r, Exception) and np.isfinite(r.spacing):
            out.append((float(r.spacing), "falling"))
    return min(out) if out else (None, None)


def _radius_steps(r0):
    """Neighbouring effective radii in the pipe table below and above ``r0`` (half and
    double where the table has none): the sensitivity to the drain and its envelope."""
    from .spacing.drain_radius import drain_radius_table

    rows = sorted(drain_radius_table(), key=lambda r: r["radius_m"])
    below = [r for r in rows if r["radius_m"] < r0 * (1 - 1e-9)]
    above = [r for r in rows if r["radius_m"] > r0 * (1 + 1e-9)]
    lo = (below[-1]["radius_m"], below[-1]["name"]) if below else (r0 / 2.0, None)
    hi = (above[0]["radius_m"], above[0]["name"]) if above else (r0 * 2.0, None)
    return lo, hi


def _sensitivity(p, depth, steady_method, has_falling):
    """Design spacing (narrowest of the criteria, before rounding) at a low, the base and
    a high value of each uncertain input, the others held at their base values."""
    s = soil_at_depth(p, depth)
    base_L, base_c = _governing_spacing(p, depth, steady_method, has_falling)
    rows = []

    def case(over=None, k_scale=1.0):
        L, crit = _governing_spacing(p, depth, steady_method, has_falling, over=over,
                                     k_scale=k_scale)
        return {"spacing_m": _f(L), "criterion": crit}

    two_k = "k" not in s
    lo, hi = SENSITIVITY_FACTORS["k"]
    rows.append({"input": "k", "label": ("K above and below drain level, scaled together"
                                         if two_k else "hydraulic conductivity K"),
                 "role": "conductivity", "factors": [lo, 1.0, hi],
                 "values": None if two_k else [_f(s["k"] * f, 6) for f in (lo, 1.0, hi)],
                 "cases": [case(k_scale=lo), {"spacing_m": _f(base_L), "criterion": base_c},
                           case(k_scale=hi)]})
    if has_falling and s.get("drainable_porosity") is not None:
        mu = s["drainable_porosity"]
        lo, hi = SENSITIVITY_FACTORS["drainable_porosity"]
        vals = [mu * lo, mu, min(mu * hi, 0.5)]
        rows.append({"input": "drainable_porosity", "label": "drainable porosity μ",
                     "role": None, "factors": [lo, 1.0, hi], "values": [_f(v, 4) for v in vals],
                     "cases": [case(over={"drainable_porosity": vals[0]}),
                               {"spacing_m": _f(base_L), "criterion": base_c},
                               case(over={"drainable_porosity": vals[2]})]})
    D = s["barrier_depth"] - depth
    if D > 0:
        lo, hi = SENSITIVITY_FACTORS["barrier_depth"]
        vals = [depth + D * lo, s["barrier_depth"], depth + D * hi]
        rows.append({"input": "barrier_depth", "label": "barrier depth (depth below the "
                     "drains halved and doubled)", "role": "length", "factors": [lo, 1.0, hi],
                     "values": [_f(v, 4) for v in vals],
                     "cases": [case(over={"barrier_depth": vals[0]}),
                               {"spacing_m": _f(base_L), "criterion": base_c},
                               case(over={"barrier_depth": vals[2]})]})
    r0 = p.drains["radius"]
    (rlo, nlo), (rhi, nhi) = _radius_steps(r0)
    rows.append({"input": "radius", "label": "effective drain radius (pipe and envelope)",
                 "role": "radius", "factors": [rlo / r0, 1.0, rhi / r0],
                 "values": [_f(rlo, 5), _f(r0, 5), _f(rhi, 5)], "names": [nlo, None, nhi],
                 "cases": [case(over={"radius": rlo}),
                           {"spacing_m": _f(base_L), "criterion": base_c},
                           case(over={"radius": rhi})]})
    return rows


def _falling_discharge(p, fd, coef):
    """Drain discharge per unit area that the falling criterion implies at the design
    spacing, against the pipe drainage coefficient.

    The peak is the Glover-Dumm first term at the start of the drawdown,
    q0 = 2 pi K D_f c h0 / L^2 = mu alpha (2/pi) c h0 (the fall of the mean height of
    the first sine mode times mu); the mean is the volume the series drains in the
    time allowed, mu (mean h(0) - mean h(t)) / t, both per unit area.
    """
    from .spacing import glover_dumm_profile
    from .spacing.glover_dumm import INITIAL_SHAPES

    if "reaction_factor" not in fd:
        return None
    c, s = p.criteria, soil_at_depth(p, fd["drain_depth"])
    mu, a = s["drainable_porosity"], fd["reaction_factor"]
    L, t = fd["spacing"], c["days"]
    y0 = fd["drain_depth"] - c["initial_depth"]
    shape = c.get("initial_shape", "parabolic")
    cc = INITIAL_SHAPES[shape]
    peak = mu * a * (2.0 / np.pi) * cc * y0
    x = np.linspace(0.0, L, 2001)
    h0, ht = (glover_dumm_profile(x, spacing=L, time=tt, initial_head=y0, reaction_factor=a,
                                  shape=shape) for tt in (0.0, t))
    if shape == "flat":
        mean0 = y0
    else:
        mean0 = float(np.trapezoid(h0, x) / L) if hasattr(np, "trapezoid") else \
            float(np.trapz(h0, x) / L)
    meant = float(np.trapezoid(ht, x) / L) if hasattr(np, "trapezoid") else \
        float(np.trapz(ht, x) / L)
    mean = mu * (mean0 - meant) / t
    ok = bool(p.pipes.get("accept_coefficient_below_peak", False))
    # the first term underestimates the very start of the drawdown; where the mean over
    # the time allowed is higher, that is the rate the pipes must at least carry
    need = max(peak, mean)
    return {"peak_m_per_d": _f(peak, 6), "mean_m_per_d": _f(mean, 6),
            "coefficient_m_per_d": _f(coef, 6), "spacing_m": _f(L, 3),
            "flow_depth_m": _f(fd["flow_depth"], 4), "k_m_per_d": _f(fd["k_flow"], 6),
            "initial_head_m": _f(y0, 4), "drainable_porosity": _f(mu, 6),
            "coefficient_below_peak": bool(coef < need * (1 - 1e-6)),
            "accepted": ok, "initial_shape_coefficient": cc}


def _design_warnings(p, comparison, method, falling):
    """Cautions for the sheet, the summary and the command line; and notes for cautions
    the user has accepted knowingly."""
    out, notes = [], []
    for m in comparison:
        for w in m.get("warnings") or []:
            out.append(w if m["method"] == method else
                       f"{w} (method compared at the design depth, not the one designed with)")
    if falling and falling["coefficient_below_peak"]:
        from .units import show

        u = p.report.get("units", "metric")
        dg = 3 if u == "us" else 1
        text = (f"The pipe drainage coefficient {show(falling['coefficient_m_per_d'], 'recharge', u, dg)}"
                f" is below the peak drain discharge the falling criterion implies at this "
                f"spacing ({show(falling['peak_m_per_d'], 'recharge', u, dg)} at the start of the "
                f"drawdown; {show(falling['mean_m_per_d'], 'recharge', u, dg)} on average over "
                f"the time allowed): the pipes will run surcharged and the water table will "
                f"fall more slowly than designed.")
        if falling["accepted"]:
            notes.append(text + " Kept knowingly (pipes.accept_coefficient_below_peak = true).")
        else:
            out.append(text + " Raise pipes.coefficient, or keep it knowingly with "
                       "pipes.accept_coefficient_below_peak = true.")
    return out, notes


def _figure_data(p, depth, spacing, r, method):
    """Arrays for the cross-section and the falling water-table figures."""
    s, c = soil_at_depth(p, depth), p.criteria
    D = s["barrier_depth"] - depth
    k_below = s.get("k", s.get("k_below"))
    k_above = s.get("k", s.get("k_above"))
    x = np.linspace(0.0, spacing, 121)
    out = {"x": x, "spacing": spacing, "drain_depth": depth,
           "barrier_depth": s["barrier_depth"], "interface_depth": s.get("interface_depth"),
           "radius": p.drains["radius"],
           "layer_bottoms": (list(np.cumsum([ly["thickness"] for ly in p.soil["layers"]]))
                             if "layers" in p.soil else None)}
    if "recharge" in c:
        h = hooghoudt_water_table(x, spacing=spacing, recharge=c["recharge"], k_below=k_below,
                                  k_above=k_above, depth_to_barrier=D,
                                  drain_radius=p.drains["radius"],
                                  equivalent_depth_method=p.drains.get("equivalent_depth",
                                                                       "series"))
        out["steady_depth"] = depth - h
        out["steady_target"] = c["water_table_depth"]
    if "initial_depth" in c:
        rr = project_spacing(p, "glover-dumm", depth)
        if rr is not None and not isinstance(rr, Exception):
            from .spacing import glover_dumm_flow_depth, reaction_factor

            y0 = depth - c["initial_depth"]
            fd = glover_dumm_flow_depth(spacing=spacing, initial_head=y0, depth_to_barrier=D,
                                        drain_radius=p.drains["radius"],
                                        flow_depth=c.get("flow_depth", "equivalent"),
                                        equivalent_depth_method=p.drains.get(
                                            "equivalent_depth", "series"))
            a = reaction_factor(k=k_below, flow_depth=fd,
                                drainable_porosity=s["drainable_porosity"], spacing=spacing)
            shape = c.get("initial_shape", "parabolic")
            t = np.linspace(0.0, 2.0 * c["days"], 81)
            out["falling_t"] = t
            out["falling_mid_depth"] = depth - glover_dumm_head(time=t, initial_head=y0,
                                                                reaction_factor=a, shape=shape)
            out["falling_days"] = c["days"]
            out["falling_target"] = c["final_depth"]
            out["falling_profiles"] = {
                float(tt): depth - glover_dumm_profile(x, spacing=spacing, time=tt,
                                                       initial_head=y0, reaction_factor=a,
                                                       shape=shape)
                for tt in (0.0, c["days"] / 2.0, c["days"])}
            out["reaction_factor"] = float(a)
            out["flow_depth"] = float(fd)
            out["k_flow"] = float(k_below)
    return out


def _soil_notes(p, depth, method):
    from .units import show

    u = p.report.get("units", "metric")
    kd = 3 if u == "us" else 2
    s = soil_at_depth(p, depth)
    notes = []
    if "layers" in p.soil:
        notes.append(f"{len(p.soil['layers'])}-layer profile reduced at the drain depth "
                     f"{show(depth, 'length', u, 2)} by thickness-weighted means: K above "
                     f"{show(s['k_above'], 'conductivity', u, kd)}, K below "
                     f"{show(s['k_below'], 'conductivity', u, kd)}"
                     + (f", drainable porosity {s['drainable_porosity']:.3g}"
                        if s.get("drainable_porosity") is not None else ""))
    if method == "glover-dumm" and "k_below" in s:
        notes.append(f"falling water table computed with K below drain level "
                     f"({show(s['k_below'], 'conductivity', u, kd)})")
    return notes


def _outlets(lp):
    """Outlets of the network (the outlet point a trunk drains to, and the own end of any
    field's main that reaches none): coordinates in the output CRS rounded to about 0.1 m
    (6 decimals of a degree for longitude/latitude), and easting/northing in the
    projected work CRS."""
    ol = lp.layers["outlets"]
    kind = np.asarray(ol["kind"]).astype(str)
    keep = (kind == "main outlet") | (np.char.find(kind, "outlet (") >= 0) & \
        (np.char.find(kind, "unused") < 0)
    if not keep.any():
        return []
    ol = ol[keep]
    crs = ol.crs
    geographic = bool(crs is not None and crs.is_geographic)
    nd = 6 if geographic else 1
    work = ol.to_crs(lp.work_crs) if crs is not None else ol
    return [{"field_id": str(fid), "x": _f(g.x, nd), "y": _f(g.y, nd),
             "easting": _f(w.x, 1), "northing": _f(w.y, 1), "geographic": geographic,
             "crs": crs.to_string() if crs is not None else None}
            for fid, g, w in zip(ol["field_id"], ol.geometry, work.geometry)]


def _summary(p, table, depth, spacing, raw_spacing, governing, method, comparison,
             sensitivity, lp, pipes_plan, r, coef):
    pd = pipes_plan.design
    lat_by_size, main_by_size = {}, {}
    for row in pd.reaches:
        target = lat_by_size if row["kind"] == "lateral" else main_by_size
        target[row["size"]] = target.get(row["size"], 0.0) + row["length_m"]
    outlets = _outlets(lp)
    inputs = {
        "soil": {k: _plain(v) for k, v in p.soil.items()},
        "soil_at_drain_depth": {k: _plain(v) for k, v in soil_at_depth(p, depth).items()},
        "criteria": {k: (v if isinstance(v, str) else _f(v, 6)) for k, v in p.criteria.items()},
        "drains": {"depths_m": [_f(z, 4) for z in p.drains["depth"]],
                   "radius_m": _f(p.drains["radius"], 4),
                   "spacing_increment_m": _f(p.drains.get("spacing_increment", 1.0), 4),
                   "equivalent_depth": p.drains.get("equivalent_depth", "series")},
        "drainage_coefficient_m_per_d": _f(coef, 6),
        "pipes": {"capacity_method": p.pipes.get("capacity_method", "manning"),
                  "material": p.pipes.get("material", "corrugated"),
                  "capacity_factor": _f(p.pipes.get("capacity_factor", 0.75), 4),
                  "series": project_pipe_series(p)},
    }
    outlet_flow = {}          # per field, as the total: the flow of its laterals
    for row in pd.reaches:
        if row["kind"] == "lateral":
            fid = str(row.get("field_id"))
            outlet_flow[fid] = outlet_flow.get(fid, 0.0) + float(row.get("flow_l_s") or 0.0)
    fields = [{**f, "spacing_m": _f(spacing, 3),
               "outlet_flow_l_s": _f(outlet_flow.get(str(f["field_id"])), 3)}
              for f in lp.per_field]
    return {
        "project": {"file": p.path.name, **p.site},
        "design": {
            "method": method,
            "governing_criterion": governing,
            "drain_depth_m": _f(depth, 3),
            "spacing_m": _f(spacing, 3),
            "spacing_before_rounding_m": _f(raw_spacing, 3),
            "equivalent_depth_m": _f(r.equivalent_depth) if r is not None else None,
            "flow_depth_m": _f(r.flow_depth) if r is not None and r.flow_depth is not None
            else None,
            "notes": (list(r.notes) if r is not None else []) + _soil_notes(p, depth, method),
        },
        "depth_table": table,
        "methods": comparison,
        "sensitivity": sensitivity,
        "inputs": inputs,
        "fields": fields,
        "quantities": {
            **{k: _f(v, 3) if isinstance(v, float) else v for k, v in lp.totals.items()},
            "lateral_length_by_size_m": {k: _f(v, 1) for k, v in lat_by_size.items()},
            "main_length_by_size_m": {k: _f(v, 1) for k, v in main_by_size.items()},
            "outlet_flow_l_s": _f(pd.totals["outlet_flow_l_s"], 3),
            "drained_area_pipes_ha": _f(pd.totals["drained_area_ha"], 4),
        },
        "outlets": outlets,
        "reaches": pd.reaches,
        "takeoff": [t for t in pd.takeoff if t["field_id"] == "all"],
        "takeoff_by_field": [t for t in pd.takeoff if t["field_id"] != "all"],
        "network_outlets": pd.outlets,
        "outlet_check": next((n for n in pd.notes if n.startswith("outlet not checked")),
                             "outlet checked against the receiving water level"),
        "pipe_problems": pd.violations,
        "pipe_problem_summary": pd.problem_summary,
        "layout_notes": lp.notes + lp.reports,
        "pipe_notes": pd.notes,
        "references": [ref for key in ([method] + (["hooghoudt"] if method != "hooghoudt"
                                                  else []) + ["pipes"])
                       for ref in REFERENCES.get(key, [])],
        "work_crs": lp.work_crs.to_string(),
    }


def _plain(v):
    """A soil input as JSON-ready values (numbers rounded to 6 digits)."""
    if v is None or isinstance(v, (str, bool, int)):
        return v
    if isinstance(v, dict):
        return {k: _plain(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_plain(x) for x in v]
    return _f(v, 6)


#: Samples and seed of the design's uncertainty (fixed: same project, same sheet).
UNCERTAINTY_SAMPLES, UNCERTAINTY_SEED = 20000, 0


def _uncertainty(p, depth, steady_method, has_falling):
    """Spacing under uncertainty at the chosen depth; None when nothing varies."""
    from .uncertainty import Triangular, Uniform, spacing_uncertainty

    s, c = p.soil, p.criteria
    sigma = s.get("k_log_sd") or 0.0
    por, bar = s.get("drainable_porosity_range"), s.get("barrier_depth_range")
    if not sigma and por is None and bar is None:
        return None
    if por is not None and not has_falling:
        raise InputError(f"{p.path.name}: soil.drainable_porosity_range needs a falling "
                         "water-table criterion (it does not enter a steady one)",
                         param="project")
    sites = [a for a in ((_spacing_args(p, steady_method, depth) if steady_method else None),
                         (_spacing_args(p, "glover-dumm", depth) if has_falling else None))
             if a is not None]
    if not sites:
        return None

    def dist(v):
        return None if v is None else Uniform(*v) if len(v) == 2 else Triangular(*v)

    try:
        return spacing_uncertainty(sites, k_log_sd=sigma, drainable_porosity=dist(por),
                                   barrier_depth=dist(bar), n_samples=UNCERTAINTY_SAMPLES,
                                   seed=UNCERTAINTY_SEED,
                                   confidence=c.get("confidence", 0.8))
    except InputError as exc:
        raise InputError(f"{p.path.name}: uncertainty: {exc}", param="project") from None


def _add_uncertainty(summary, figures, p, unc, spacing, deterministic_spacing):
    """Field tests and spacing-under-uncertainty entries of the summary and figures."""
    ts = p.soil.get("tests_summary")
    if ts is not None:
        summary["references"] += REFERENCES["field tests"]
        summary["field_tests"] = _plain({
            "tests": p.soil["tests"], "design_k_m_per_d": ts["design_k"],
            "geometric_mean_m_per_d": ts["geometric_mean"], "log_sd": ts["log_sd"],
            "cv": ts["cv"], "n": ts["n"], "min_m_per_d": ts["min"], "max_m_per_d": ts["max"],
            "spread_factor": ts["spread_factor"], "percentile": ts["percentile"],
            "used_for": ts["used_for"]})
    if unc is None:
        return
    c = p.criteria
    at_conf = "confidence" in c
    summary["uncertainty"] = _plain({
        "confidence": unc.confidence,
        "design_spacing_at_confidence": at_conf,
        "spacing_at_confidence_m": unc.spacing_at_confidence,
        "median_spacing_m": unc.median_spacing,
        "exact_spacing_at_confidence_m": unc.exact_spacing_at_confidence,
        "deterministic_spacing_m": deterministic_spacing,
        "probability_design_spacing_meets": float(unc.probability_at(spacing)),
        "varied": [{"input": a, "distribution": b} for a, b in unc.varied],
        "n_samples": unc.n_samples, "seed": unc.seed,
        "probability_curve": [{"spacing_m": float(L), "probability": float(q)}
                              for L, q in zip(unc.spacings, unc.probability)],
        "notes": list(unc.notes),
    })
    if at_conf:
        summary["design"]["notes"].append(
            f"design spacing is the spacing met with {unc.confidence:.0%} probability "
            f"({', '.join(a for a, _ in unc.varied)} varied, {unc.n_samples:,} samples); "
            f"with the inputs at their central values it would be "
            f"{deterministic_spacing:.1f} m")
    figures["probability"] = {"spacings": unc.spacings, "probability": unc.probability,
                              "confidence": unc.confidence,
                              "spacing_at_confidence": unc.spacing_at_confidence,
                              "design_spacing": spacing,
                              "varied": [a for a, _ in unc.varied]}
