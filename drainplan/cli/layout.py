"""``drainplan layout``: laterals and collector mains over field boundaries."""

from __future__ import annotations

import json
from pathlib import Path

import click

from ..errors import InputError
from ..units import display_unit, show, text_in_units, to_display
from .._validate import check_order, check_point, check_quantity
from .options import Number, checked, json_option, units_option


def _parse_direction(value):
    if value is None or str(value).strip().lower() == "auto":
        return "auto"
    try:
        b = float(str(value).replace("deg", "").strip())
    except ValueError:
        raise click.BadParameter("expected a bearing in degrees clockwise from north "
                                 "(e.g. 35) or 'auto'", param_hint="'--direction'") from None
    try:
        return check_quantity("direction", b)
    except InputError as exc:
        raise click.BadParameter(str(exc), param_hint="'--direction'") from None


def _parse_outlet(value):
    """'X,Y' in the fields file's coordinates, or the path of a file holding a point."""
    if value is None:
        return None
    parts = str(value).split(",")
    if len(parts) == 2:
        try:
            xy = (float(parts[0]), float(parts[1]))
        except ValueError:
            xy = None
        if xy is not None:
            try:
                return check_point(xy, name="X,Y")
            except InputError as exc:
                raise click.BadParameter(str(exc), param_hint="'--outlet'") from None
    if Path(value).exists():
        return str(value)
    raise click.BadParameter("expected X,Y in the fields file's coordinates or a file with "
                             "one point", param_hint="'--outlet'")


@click.command(short_help="Lay out laterals and mains over field boundaries.")
@click.argument("fields", type=click.Path(dir_okay=False))
@click.option("--spacing", type=checked("length",
              "spacing"), required=True, help="Lateral spacing, e.g. '18 m'.")
@click.option("--direction", default="auto", show_default=True,
              help="Bearing of the laterals in degrees clockwise from north, or 'auto' "
                   "(long axis of each field).")
@click.option("--setback", type=checked("length", "setback"), default="0", show_default=True,
              help="Headland setback of laterals from the field boundary.")
@click.option("-o", "--output", type=click.Path(dir_okay=False), required=True,
              help="GeoPackage to write (.gpkg).")
@click.option("--layer", help="Layer of the fields file (GeoPackage with several layers).")
@click.option("--id-field", help="Attribute holding each field's id (default: field_id, id "
                                 "or name if present).")
@click.option("--crs", help="CRS of input files that carry none, e.g. EPSG:4326.")
@click.option("--work-crs", help="Metric projected CRS for the layout (default: the file's "
                                 "own if metric, else the local UTM zone).")
@click.option("--keep-metric-crs", is_flag=True,
              help="Write outputs in the working metric CRS instead of the input CRS.")
@click.option("--exclude", "exclude_path", type=click.Path(dir_okay=False),
              help="Layer of exclusions (wells, ponds, buildings, hedges...).")
@click.option("--exclude-layer", help="Layer of the exclusions file.")
@click.option("--exclude-setback", type=checked("length", "exclusion_setback"),
              default="15 m", show_default=True,
              help="Setback around exclusions without a 'setback_m' attribute.")
@click.option("--min-length", type=checked("length",
              "min_length"), default="10 m", show_default=True,
              help="Drop lateral pieces shorter than this (they are counted).")
@click.option("--offset", type=checked("length", "offset"),
              help="Distance of the first lateral from the edge (default: balanced strips).")
@click.option("--main-side", default="auto", show_default=True,
              type=click.Choice(["auto", "N", "NE", "E", "SE", "S", "SW", "W", "NW"]),
              help="End of the laterals where the collector main runs.")
@click.option("--pattern", type=click.Choice(["parallel", "herringbone"]), default="parallel",
              show_default=True, help="Parallel laterals on an edge main, or a herringbone: "
                                      "a main through the field along --direction with "
                                      "laterals joining it from both sides.")
@click.option("--herringbone-angle", type=Number("herringbone_angle"),
              default=45.0, show_default=True,
              help="Angle between laterals and main in the herringbone, degrees (15-75).")
@click.option("--main", "main_path", type=click.Path(dir_okay=False),
              help="A line layer drawn by the user to use as the main.")
@click.option("--outlet", help="Outlet point: X,Y in the fields file's coordinates, or a "
                               "point file.")
@click.option("--cross-setbacks/--no-cross-setbacks", default=True, show_default=True,
              help="Allow non-perforated connectors through exclusion setback zones.")
@click.option("--repair", is_flag=True, help="Repair invalid field boundaries instead of "
                                             "refusing them.")
@click.option("--survey", "survey_path", type=click.Path(dir_okay=False),
              help="Survey points (CSV x, y, z): with --direction auto, laterals run across "
                   "the fall of a plane fitted to each field.")
@click.option("--survey-crs", help="CRS of the survey x, y (default: the working CRS).")
@click.option("--dem", "dem_path", type=click.Path(dir_okay=False),
              help="GeoTIFF DEM instead of survey points (needs drainplan[dem]): the "
                   "terrain then decides the main's side and the outlet as with a survey.")
@click.option("--plot", "plot_path", type=click.Path(dir_okay=False),
              help="Also write a PNG plan.")
@click.option("--geojson-dir", type=click.Path(file_okay=False),
              help="Also write each layer as GeoJSON (lon/lat) into this folder.")
@click.option("--overwrite", is_flag=True, help="Replace existing output files.")
@units_option
@json_option
def layout(fields, spacing, direction, setback, output, layer, id_field, crs, work_crs,
           keep_metric_crs, exclude_path, exclude_layer, exclude_setback, min_length, offset,
           main_side, pattern, herringbone_angle, main_path, outlet, cross_setbacks, repair,
           survey_path, survey_crs, dem_path,
           plot_path, geojson_dir, overwrite, units, as_json):
    """Lay out parallel laterals and a collector main over the field boundaries in
    FIELDS (GeoJSON, GeoPackage, Shapefile or zipped Shapefile, FlatGeobuf).

    Example:

        drainplan layout demo_fields/fields.geojson --spacing "18 m"
        --direction auto --setback "6 m" --exclude demo_fields/exclusions.geojson
        -o layout.gpkg
    """
    from ..geometry.layout import LayoutOptions
    from ..layout_plan import LayoutInputs, plan_layout

    out = Path(output)
    if out.suffix.lower() != ".gpkg":
        raise InputError("output must be a GeoPackage file ending in .gpkg", param="output")
    from ..gisio import check_input_file

    for f, what, opt in ((fields, "fields", "fields"), (exclude_path, "exclusions", "exclude"),
                         (main_path, "main", "main"), (survey_path, "survey", "survey"),
                         (dem_path, "DEM", "dem")):
        if f:
            check_input_file(f, what=what, param=opt)                 # before any work
    check_layout_targets(out, plot_path=plot_path, geojson_dir=geojson_dir,
                         overwrite=overwrite)                 # every target, before any work
    check_order("offset", offset, "spacing", spacing, low_name="--offset",
                high_name="--spacing")
    outlet_value = _parse_outlet(outlet)
    opts = LayoutOptions(spacing=spacing, direction=_parse_direction(direction),
                         setback=setback, min_length=min_length, offset=offset,
                         main_side=main_side, cross_setbacks=cross_setbacks, pattern=pattern,
                         herringbone_angle=herringbone_angle)
    plan = plan_layout(LayoutInputs(
        fields_path=fields, options=opts, layer=layer, id_field=id_field, crs=crs,
        work_crs=work_crs, keep_metric_crs=keep_metric_crs, exclude_path=exclude_path,
        exclude_layer=exclude_layer, exclude_setback=exclude_setback, outlet=outlet_value,
        main_path=main_path, repair=repair, survey_path=survey_path, survey_crs=survey_crs,
        dem_path=dem_path))
    write_layout(plan, out, plot_path=plot_path, geojson_dir=geojson_dir, overwrite=overwrite)
    for line in plan.reports:
        click.echo(f"drainplan: note: {text_in_units(line, units)}", err=True)
    if as_json:
        click.echo(json.dumps(layout_summary(plan, out), indent=2))
    else:
        click.echo(_text(plan, out, plot_path, units))


def _layout_jobs(plan, out, plot_path=None, geojson_dir=None):
    """(path, writer, option) of every output of a layout; ``plan`` None gives the
    targets only (for checking them before any work)."""
    from .. import gisio
    from ..layout_plan import LAYER_NAMES

    jobs = [(out, plan and gisio.layers_writer(plan.layers), "output")]
    if plot_path:
        jobs.append((Path(plot_path), plan and _plan_png_writer(plan), "plot"))
    if geojson_dir:
        names = list(plan.layers) if plan is not None else list(LAYER_NAMES)
        for name in names:
            jobs.append((Path(geojson_dir) / f"{name}.geojson",
                         plan and gisio.geojson_writer(plan.layers[name], name), "geojson-dir"))
    return jobs


def check_layout_targets(out, *, plot_path=None, geojson_dir=None, overwrite=False):
    """Refuse, before any work, an output target that cannot be written."""
    from ..gisio import check_output_target

    if geojson_dir and Path(geojson_dir).exists() and not Path(geojson_dir).is_dir():
        raise InputError(f"{geojson_dir} exists and is not a folder", param="geojson_dir")
    for path, _, opt in _layout_jobs(None, out, plot_path, geojson_dir):
        if opt == "geojson-dir" and not path.parent.exists():
            continue                                  # the folder is made when writing
        check_output_target(path, overwrite=overwrite, param=opt.replace("-", "_"))


def _plan_png_writer(plan):
    def writer(tmp):
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt

        from ..plots import plan_map, save_figure

        metric = {k: v.to_crs(plan.work_crs) for k, v in plan.layers.items()}
        fig, ax = plt.subplots(figsize=(8, 8))
        try:
            plan_map(metric, ax=ax, title="Drainage layout")
            save_figure(fig, tmp)
        finally:
            plt.close(fig)

    return writer


def write_layout(plan, out, *, plot_path=None, geojson_dir=None, overwrite=False):
    """Write the layers (GeoPackage), and optionally a PNG plan and GeoJSON files:
    every target is checked first and the files are committed together (all or
    none)."""
    from ..gisio import write_outputs

    made = None
    if geojson_dir and not Path(geojson_dir).exists():
        made = Path(geojson_dir)
        made.mkdir(parents=True)
    try:
        jobs = [(p, w, o.replace("-", "_")) for p, w, o in
                _layout_jobs(plan, Path(out), plot_path, geojson_dir)]
        return write_outputs(jobs, overwrite=overwrite)
    except BaseException:
        if made is not None:
            import shutil

            shutil.rmtree(made, ignore_errors=True)
        raise


def layout_summary(plan, out=None):
    """JSON-ready summary of a layout plan."""
    return {
        "output": str(out) if out else None,
        "work_crs": plan.work_crs.to_string(),
        "output_crs": plan.out_crs.to_string(),
        "spacing_m": plan.layout.spacing,
        "fields": plan.per_field,
        "totals": plan.totals,
        "notes": plan.notes,
        "reports": plan.reports,
    }


def _text(plan, out, plot_path, units="metric"):
    unit = {role: display_unit(role, units) for role in ("area", "length", "density")}
    head = (f"{'field':<10} {unit['area']:>7} {'bearing':>8} {'laterals':>8} "
            f"{'lateral ' + unit['length']:>10} {'main ' + unit['length']:>8} "
            f"{unit['density']:>8} {'dropped':>7} {'no route':>8}")
    lines = [f"Layout at {show(plan.layout.spacing, 'length', units, 1)} spacing", head]
    rows = plan.per_field + [dict(plan.totals, field_id="total", bearing_deg=None)]
    for r in rows:
        bearing = "" if r["bearing_deg"] is None else f"{r['bearing_deg']:.1f}"
        lines.append(f"{r['field_id']:<10} {to_display(r['field_area_ha'], 'area', units):>7.2f} "
                     f"{bearing:>8} {r['laterals']:>8d} "
                     f"{to_display(r['lateral_length_m'], 'length', units):>10.0f} "
                     f"{to_display(r['main_length_m'], 'length', units):>8.0f} "
                     f"{to_display(r['drain_density_m_per_ha'], 'density', units):>8.0f} "
                     f"{r['dropped_pieces']:>7d} {r['unconnected_pieces']:>8d}")
    t = plan.totals
    lines.append(f"connectors (non-perforated): {show(t['connector_length_m'], 'length', units, 0)}")
    lines.append(f"written: {out}" + (f", {plot_path}" if plot_path else ""))
    lines += ["Notes"] + [f"  - {text_in_units(n, units)}" for n in plan.notes]
    lines.append("  - Locate buried utilities before trenching and check setbacks (wells, "
                  "septic systems, wetlands) against local codes.")
    return "\n".join(lines)
