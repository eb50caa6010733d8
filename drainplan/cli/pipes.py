"""``drainplan pipes``: pipe sizes and grades for a layout."""

from __future__ import annotations

import json
from pathlib import Path

import click

from ..errors import InputError
from ..units import show, text_in_units
from .._validate import check_order
from .options import Number, checked, json_option, units_option


@click.command(short_help="Size and grade the pipes of a layout.")
@click.argument("layout_path", metavar="LAYOUT.gpkg", type=click.Path(dir_okay=False))
@click.option("--coefficient", type=checked("rate", "coefficient"), required=True,
              help="Drainage coefficient for pipe capacity, e.g. '10 mm/d' or '3/8 in/d'. "
                   "It often equals the steady design recharge, but practice may set it "
                   "separately (e.g. higher where surface inlets feed the system).")
@click.option("--survey", "survey_path", type=click.Path(dir_okay=False),
              help="CSV of survey points: x, y, z (or lon, lat, z).")
@click.option("--survey-crs", help="CRS of the survey x, y (default: the layout's metric "
                                   "CRS; lon/lat columns need EPSG:4326).")
@click.option("--survey-z-unit", type=click.Choice(["m", "ft", "cm"]), default="m",
              show_default=True, help="Unit of the survey z values.")
@click.option("--dem", "dem_path", type=click.Path(dir_okay=False),
              help="GeoTIFF DEM instead of survey points (needs drainplan[dem]).")
@click.option("--material", type=click.Choice(["corrugated", "smooth", "clay"]),
              default="corrugated", show_default=True, help="Pipe material.")
@click.option("--series", type=click.Choice(["metric", "inch"]), default=None,
              help="Standard size series [default: inch with --units us, else metric].")
@click.option("--sizes", "sizes_path", type=click.Path(dir_okay=False),
              help="An edited copy of templates/pipe_sizes.csv.")
@click.option("--capacity-method", type=click.Choice(["manning", "power-law"]),
              default="manning", show_default=True,
              help="Manning full flow, or the drain-pipe power laws of metric practice.")
@click.option("--capacity-factor", type=Number("capacity_factor"), default=0.75, show_default=True,
              help="Share of full capacity used (sediment allowance).")
@click.option("--drain-depth", type=checked("length",
              "drain_depth"), default="1.0 m", show_default=True,
              help="Design depth of the laterals.")
@click.option("--main-depth", type=checked("length",
              "main_depth"), help="Design depth of the main (default: drain "
                                                "depth + 0.3 m).")
@click.option("--min-grade", type=checked("fraction", "min_grade", "percent"),
              default="0.1 %", show_default=True,
              help="Minimum grade: '0.1 %' or a bare number in percent.")
@click.option("--max-grade", type=checked("fraction", "max_grade", "percent"),
              default="5 %", show_default=True,
              help="Maximum grade: '5 %' or a bare number in percent.")
@click.option("--min-cover", type=checked("length",
              "min_cover"), default="0.6 m", show_default=True,
              help="Minimum cover over the pipe.")
@click.option("--max-depth", type=checked("length",
              "max_depth"), default="2.0 m", show_default=True,
              help="Maximum trench depth.")
@click.option("--min-velocity", type=Number("min_velocity"), default=0.15, show_default=True,
              help="Minimum full-flow velocity, m/s (0.43 where fine sand or silt can "
                   "enter).")
@click.option("--max-velocity", type=Number("max_velocity"), default=1.5, show_default=True,
              help="Maximum full-flow velocity, m/s (1.07 sand ... 2.13 clay).")
@click.option("--ditch-water-level", type=checked("length", "ditch_water_level"),
              help="Normal water level in the receiving ditch (elevation, same datum).")
@click.option("--outfall-margin", type=checked("length",
              "outfall_margin"), default="0.10 m", show_default=True,
              help="Free outfall: outlet invert above the ditch water level.")
@click.option("--assumed-grade", type=checked("fraction", "assumed_grade", "percent"),
              default="0.1 %", show_default=True,
              help="Grade used without elevations: '0.1 %' or a bare number in percent.")
@click.option("--envelope", type=click.Choice(["none", "sock", "gravel"]), default="none",
              show_default=True, help="Envelope around the laterals, for the take-off.")
@click.option("-o", "--output", type=click.Path(dir_okay=False), required=True,
              help="Pipe schedule CSV to write.")
@click.option("--gpkg", "gpkg_path", type=click.Path(dir_okay=False),
              help="Also write the pipes with their attributes to a GeoPackage.")
@click.option("--plot", "plot_path", type=click.Path(dir_okay=False),
              help="Also write a PNG of the main's profile and the flattest lateral's.")
@click.option("--overwrite", is_flag=True, help="Replace existing output files.")
@units_option
@json_option
def pipes(layout_path, coefficient, survey_path, survey_crs, survey_z_unit, dem_path,
          material, series, sizes_path, capacity_method, capacity_factor, drain_depth,
          main_depth, min_grade, max_grade, min_cover, max_depth, min_velocity, max_velocity,
          ditch_water_level, outfall_margin, assumed_grade, envelope, output, gpkg_path,
          plot_path, overwrite, units, as_json):
    """Size every lateral and main reach of the layout in LAYOUT.gpkg (written by
    `drainplan layout`) and check grades, cover and the outlet on real elevations.

    Example:

        drainplan pipes layout.gpkg --coefficient "10 mm/d" --survey
        demo_fields/survey.csv --survey-crs EPSG:4326 -o schedule.csv
    """
    from ..network.design import PipeOptions
    from ..network.plan import PipesInputs, plan_pipes

    if not Path(layout_path).exists():
        raise InputError(f"layout file not found: {layout_path}", param="layout")
    from ..gisio import check_input_file, check_output_target

    if survey_path and dem_path:
        raise InputError("give either a survey or a DEM, not both", param="survey")
    for f, what, opt in ((layout_path, "layout", "layout"), (survey_path, "survey", "survey"),
                         (dem_path, "DEM", "dem"), (sizes_path, "pipe sizes", "sizes")):
        if f:
            check_input_file(f, what=what, param=opt)                 # before any work
    for t, opt in ((output, "output"), (gpkg_path, "gpkg"), (plot_path, "plot")):
        if t:
            check_output_target(t, overwrite=overwrite, param=opt)   # before any work
    if plot_path and not (survey_path or dem_path):
        raise InputError("profiles need elevations (--survey or --dem)", param="plot")
    check_order("min_grade", min_grade, "max_grade", max_grade, low_name="--min-grade",
                high_name="--max-grade")
    check_order("min_velocity", min_velocity, "max_velocity", max_velocity,
                low_name="--min-velocity", high_name="--max-velocity")
    if series is None:
        series = "inch" if units == "us" else "metric"
    opts = PipeOptions(coefficient=coefficient, material=material, series=series,
                       method=capacity_method, capacity_factor=capacity_factor,
                       drain_depth=drain_depth, main_depth=main_depth,
                       min_grade=min_grade, max_grade=max_grade,
                       min_cover=min_cover, max_depth=max_depth, min_velocity=min_velocity,
                       max_velocity=max_velocity, ditch_water_level=ditch_water_level,
                       outfall_margin=outfall_margin, assumed_grade=assumed_grade,
                       sizes_path=sizes_path, envelope=None if envelope == "none" else envelope)
    plan = plan_pipes(PipesInputs(layout_path=layout_path, options=opts,
                                  survey_path=survey_path, survey_crs=survey_crs,
                                  survey_z_unit=survey_z_unit, dem_path=dem_path))
    write_pipes(plan, output, gpkg_path=gpkg_path, plot_path=plot_path, overwrite=overwrite)
    d = plan.design
    if as_json:
        click.echo(json.dumps(pipes_summary(plan), indent=2, default=float))
    else:
        click.echo(_text(d, output, units))


def write_pipes(plan, output, *, gpkg_path=None, plot_path=None, overwrite=False):
    """Write the schedule CSV and optionally the GeoPackage and the profile PNG,
    committed together (all or none)."""
    from ..gisio import layers_writer, write_outputs
    from ..network.plan import schedule_csv

    text = schedule_csv(plan.design)
    jobs = [(output, lambda tmp: Path(tmp).write_text(text, encoding="utf-8"), "output")]
    if gpkg_path:
        jobs.append((gpkg_path, layers_writer(plan.layers), "gpkg"))
    if plot_path:
        jobs.append((plot_path, _profile_writer(plan.design), "plot"))
    return write_outputs(jobs, overwrite=overwrite)


def _profile_writer(design):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from ..plots import key_profiles, save_figure

    fig, axes = plt.subplots(2, 1, figsize=(8, 6))
    if key_profiles(design, axes=axes) is None:
        plt.close(fig)
        raise InputError("profiles need elevations (--survey or --dem)", param="plot")
    fig.tight_layout()

    def writer(tmp):
        try:
            save_figure(fig, tmp)
        finally:
            plt.close(fig)

    return writer


def write_profile_png(design, path, *, overwrite=False):
    from ..gisio import write_atomic

    return write_atomic(path, _profile_writer(design), overwrite=overwrite, param="plot")


def pipes_summary(plan):
    d = plan.design
    return {"reaches": d.reaches, "takeoff": d.takeoff, "violations": d.violations,
            "totals": d.totals, "notes": d.notes, "outlets": d.outlets,
            "problems": d.problem_summary}


def _text(d, output, units="metric"):
    lines = ["Quantity take-off (whole job; per field in --json)"]
    for r in d.takeoff:
        if r["field_id"] != "all":
            continue
        qty = (f"{show(r['length_m'], 'length', units, 1):>12}" if r["length_m"]
               else f"{r['count']:>8d} pcs")
        kind = r["kind"] + (" (perforated)" if r["perforated"] else "")
        lines.append(f"  {kind:<22} {r['material']:<22} {r['size']:<30} {qty}")
    t = d.totals
    flow = show(t["outlet_flow_l_s"], "flow", units, 1 if units == "metric" else 2)
    where = "at the outlet" if t.get("outlets", 1) == 1 else \
        f"at {t['outlets']} separate outlets together"
    lines.append(f"drained area {show(t['drained_area_ha'], 'area', units, 2)}, flow {where} "
                 f"{flow}; schedule written to {output} (SI units)")
    if d.violations:
        lines.append(f"{len(d.violations)} problem(s), by kind (each place is in the "
                     "schedule's warnings column and the GeoPackage):")
        lines += [f"  - {text_in_units(g, units)}" for g in d.problem_summary]
    for n in d.notes:
        lines.append(f"note: {text_in_units(n, units)}")
    return "\n".join(lines)
