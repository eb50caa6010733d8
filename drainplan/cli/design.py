"""``drainplan init`` and ``drainplan design``: project files and the whole job."""

from __future__ import annotations

import contextlib
import json
import time
from pathlib import Path

import click

from ..errors import InputError
from ..units import show
from .options import json_option


@click.command(short_help="Write a commented starter project file.")
@click.argument("directory", type=click.Path(file_okay=False))
@click.option("--template", default="humid-field-crops", show_default=True,
              type=click.Choice(["humid-field-crops", "vegetables", "irrigated-arid"]),
              help="Starting criteria: humid field crops, high-value vegetables, or irrigated "
                   "arid land with salinity control.")
@click.option("--overwrite", is_flag=True, help="Replace an existing project.toml.")
def init(directory, template, overwrite):
    """Write DIRECTORY/project.toml from a template, ready to edit.

    Example:

        drainplan init myfarm --template vegetables
    """
    from .._templates import template_text
    from ..gisio import write_atomic
    from ..project import TEMPLATES

    d = Path(directory)
    if d.exists() and not d.is_dir():
        raise InputError(f"DIRECTORY {d} exists and is not a folder", param="directory")
    made = not d.exists()
    try:
        d.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"DIRECTORY {d} cannot be created: {exc.strerror}",
                         param="directory") from None
    target = d / "project.toml"
    text = template_text(TEMPLATES[template])
    try:
        write_atomic(target, lambda tmp: Path(tmp).write_text(text, encoding="utf-8"),
                     overwrite=overwrite, param="directory")
    except BaseException:
        if made:
            with contextlib.suppress(OSError):
                d.rmdir()
        raise
    click.echo(f"wrote {target}: put the field boundaries beside it (fields.geojson), edit "
               f"the soil data and criteria, then run: drainplan design {target} -o "
               f"{d / 'design'}")


_METHOD_WORDS = {"hooghoudt": "Hooghoudt", "ernst": "Ernst", "kirkham": "Kirkham",
                 "glover-dumm": "Glover–Dumm"}


@click.command(short_help="Run the whole design from a project file.")
@click.argument("project_path", metavar="PROJECT.toml", type=click.Path(dir_okay=False))
@click.option("-o", "--output", required=True, type=click.Path(file_okay=False),
              help="Folder for the design sheet, GeoPackage, schedule and summary.")
@click.option("--overwrite", is_flag=True,
              help="Replace drainplan's own outputs in a non-empty folder (a folder holding "
                   "other files or the project's inputs is refused).")
@json_option
@click.pass_context
def design(ctx, project_path, output, overwrite, as_json):
    """Spacing, depth, layout and pipes for the project in PROJECT.toml, written to a
    folder: design_sheet.pdf, design.gpkg, pipe_schedule.csv and summary.json (every
    number on the sheet).

    Example:

        drainplan design demo_fields/project.toml -o demo_design
    """
    from ..design import design as run_design
    from ..outputs import check_output_folder, load_report_libraries, write_design_outputs
    from ..project import load_project

    quiet = bool(ctx.obj and ctx.obj.get("quiet"))
    project = load_project(project_path)       # checks every value and referenced file
    out = check_output_folder(output, overwrite=overwrite,        # before the work, not after
                              inputs=project.input_files())
    t0 = time.perf_counter()

    def progress(step):
        if not quiet:
            click.echo(f"[{time.perf_counter() - t0:5.1f} s] {step}", err=True)

    result = run_design(project, progress=progress, idle=load_report_libraries)
    paths = write_design_outputs(result, out, overwrite=overwrite, progress=progress)
    s = result.summary
    if as_json:
        click.echo(json.dumps({"output": str(out), "files": [str(p) for p in paths],
                               "design": s["design"], "quantities": s["quantities"]},
                              indent=2))
        return
    d, q = s["design"], s["quantities"]
    u = project.report.get("units", "metric")
    click.echo(f"Design: drains {show(d['drain_depth_m'], 'length', u, 2)} deep, "
               f"{show(d['spacing_m'], 'length', u, 1)} apart "
               f"({_METHOD_WORDS.get(d['method'], d['method'])}, "
               f"{d['governing_criterion']} criterion governs)")
    click.echo(f"Laterals {q['laterals']} ({show(q['lateral_length_m'], 'length', u, 0)}), mains "
               f"{show(q['main_length_m'], 'length', u, 0)}, drained area "
               f"{show(q['drained_area_ha'], 'area', u, 2)}, outlet flow "
               f"{show(q['outlet_flow_l_s'], 'flow', u, 1 if u == 'metric' else 2)}")
    if not quiet:
        for w in d.get("warnings") or []:
            click.echo(f"warning: {w}", err=True)
    if s["pipe_problems"]:
        click.echo(f"{len(s['pipe_problems'])} pipe problem(s): see the design sheet")
    click.echo(f"Design sheet: {out / 'design_sheet.pdf'}")
