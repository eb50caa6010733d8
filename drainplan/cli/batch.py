"""``drainplan batch``: spacing, layout and pipe quantities for many fields at once."""

from __future__ import annotations

import json
import sys
import time

import click

from ..errors import DrainplanError
from .options import FRACTION


@click.command(short_help="Design many fields at once, each with its own soil.")
@click.argument("fields", type=click.Path(dir_okay=False))
@click.option("-o", "--output", type=click.Path(dir_okay=False), required=True,
              help="GeoPackage to write (.gpkg); layer 'fields' holds one row per field.")
@click.option("--project", "project_path", type=click.Path(dir_okay=False), required=True,
              help="Project file with [criteria], [drains], [layout] and [pipes] ([fields] "
                   "and [soil] may be left out).")
@click.option("--layer", help="Layer of the fields file (GeoPackage with several layers).")
@click.option("--id-attribute", help="Attribute holding each field's id (default: field_id, "
                                     "id or name if present).")
@click.option("--crs", help="CRS of input files that carry none, e.g. EPSG:4326.")
@click.option("--work-crs", help="Metric projected CRS for the work (default: the fields "
                                 "file's own if metric, else the local UTM zone).")
@click.option("--soil", "soil_path", type=click.Path(dir_okay=False),
              help="Soil-map polygon layer; each field gets the area-weighted values of "
                   "the polygons it overlaps (geometric mean for K).")
@click.option("--soil-layer", help="Layer of the soil-map file.")
@click.option("--soil-k-column", help="Column holding K: in the soil map (default 'k'), or "
                                      "without --soil in the fields file itself.")
@click.option("--soil-barrier-column", help="Column holding the barrier depth below the "
                                            "surface (soil-map default 'barrier_depth').")
@click.option("--soil-porosity-column", help="Column holding the drainable porosity "
                                             "(soil-map default 'drainable_porosity').")
@click.option("--soil-units", help="Units of the soil columns, e.g. 'k=in/h,barrier=ft,"
                                   "porosity=%' (default m/d, m and fraction, unless the "
                                   "column name ends in a unit: k_in_h, barrier_cm).")
@click.option("--min-soil-cover", type=FRACTION, default="0.5", show_default=True,
              help="Fields whose area the soil map covers less than this share of are "
                   "reported and not designed.")
@click.option("--with-lines", is_flag=True,
              help="Also write the laterals and mains layers (large for a region).")
@click.option("--workers", type=int, help="Worker processes on this machine (default: the "
                                          "number of cores; 1 runs in this process).")
@click.option("--scheduler", metavar="ADDRESS",
              help="Run on a Dask distributed cluster, e.g. tcp://10.0.0.5:8786 (needs "
                   "pip install 'drainplan[dask]').")
@click.option("--partition-size", type=int,
              help="Fields per partition (default: about 64 partitions of 50-2000 fields).")
@click.option("--resume", is_flag=True,
              help="Continue an interrupted run, keeping the partitions it finished.")
@click.option("--repair", is_flag=True, help="Repair invalid field boundaries instead of "
                                             "reporting them.")
@click.option("--summary", "summary_path", type=click.Path(dir_okay=False),
              help="Summary CSV (default: OUT_summary.csv beside the GeoPackage).")
@click.option("--plot", type=click.Path(dir_okay=False),
              help="PNG map of the spacing by field.")
@click.option("--overwrite", is_flag=True, help="Replace existing output files.")
@click.option("--json", "as_json", is_flag=True,
              help="Print the summary as one JSON object (SI units) on stdout.")
@click.pass_context
def batch(ctx, fields, output, project_path, layer, id_attribute, crs, work_crs, soil_path,
          soil_layer, soil_k_column, soil_barrier_column, soil_porosity_column, soil_units,
          min_soil_cover, with_lines, workers, scheduler, partition_size, resume, repair,
          summary_path, plot, overwrite, as_json):
    """Soil, drain spacing, layout and pipe quantities of every field in FIELDS.

    Criteria, drains, layout and pipe options come from the project file; each
    field's soil comes from a soil map (--soil), from the fields' own attributes
    (--soil-k-column ...) or from the project's [soil]. Fields the soil map
    does not cover are reported, not guessed. Progress goes to stderr (-q
    silences it); an interrupted run continues with --resume.

    Example:

        drainplan batch district/fields.gpkg --soil district/soil.gpkg
        --project district/project.toml -o district_design.gpkg
    """
    from ..batch import (BatchInputs, describe_progress, load_batch_settings, run_batch,
                         summary_table)
    from ..soilmap import parse_soil_units

    quiet = bool(ctx.obj and ctx.obj.get("quiet"))
    if plot:                     # refused now rather than after a long run
        from ..gisio import check_output_target

        check_output_target(plot, overwrite=overwrite, param="plot")
    settings = load_batch_settings(project_path)
    columns = {k: v for k, v in (("k", soil_k_column), ("barrier_depth", soil_barrier_column),
                                 ("drainable_porosity", soil_porosity_column)) if v}
    inp = BatchInputs(fields_path=fields, output=output, settings=settings, layer=layer,
                      id_attribute=id_attribute, crs=crs, work_crs=work_crs,
                      soil_path=soil_path, soil_layer=soil_layer, soil_columns=columns,
                      soil_units=parse_soil_units(soil_units), min_soil_cover=min_soil_cover,
                      with_lines=with_lines, workers=workers, scheduler=scheduler,
                      partition_size=partition_size, resume=resume, overwrite=overwrite,
                      repair=repair, summary_path=summary_path)
    t0 = time.perf_counter()
    last = [0.0]

    def progress(done, total, resumed):
        now = time.perf_counter()
        if quiet or (done < total and now - last[0] < 1.0 and done != resumed):
            return
        last[0] = now
        text = describe_progress(done - resumed, total - resumed, now - t0)
        if resumed:
            text += f" (+{resumed:,} from the interrupted run)"
        click.echo(text, err=True)

    try:
        result = run_batch(inp, progress=progress)
    except KeyboardInterrupt:
        raise DrainplanError("interrupted; the partitions finished so far are kept: run the "
                             "same command with --resume to continue") from None
    if plot:
        from ..batch_map import write_spacing_map

        write_spacing_map(result.fields, plot, overwrite=overwrite,
                          title=settings.name or None)
    if as_json:
        click.echo(json.dumps({"output": str(result.output),
                               "summary_file": str(result.summary_path),
                               "engine": result.engine, "partitions": result.partitions,
                               "resumed_partitions": result.resumed,
                               "summary": [{"item": i, "value": v, "unit": u}
                                           for i, v, u in result.summary]}, indent=2))
        return
    click.echo(summary_table(result.summary))
    click.echo(f"Fields layer: {result.output} (layer 'fields'); summary: "
               f"{result.summary_path}")
    if not quiet:
        click.echo(f"{result.partitions} partition(s) on {result.engine}"
                   + (f", {result.resumed} taken from the interrupted run"
                      if result.resumed else "")
                   + f", {time.perf_counter() - t0:.1f} s", err=True)
    sys.stdout.flush()
