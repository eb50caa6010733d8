"""``drainplan check``: does a contractor's proposal meet the project's criteria?"""

from __future__ import annotations

import json

import click

from .options import json_option


@click.command(short_help="Check a contractor's proposal against the project's criteria.")
@click.argument("project_path", metavar="PROJECT.toml", type=click.Path(dir_okay=False))
@click.option("--proposal", "proposal_path", required=True, type=click.Path(dir_okay=False),
              help="A TOML file with a [proposal] section of numbers, or a line layer of "
                   "the proposed or installed laterals and mains (GeoJSON, GeoPackage, "
                   "Shapefile, FlatGeobuf).")
@click.option("--crs", help="CRS of a proposal layer that has none (e.g. EPSG:4326).")
@click.option("-o", "--output", type=click.Path(file_okay=False),
              help="Folder for the check sheet (PDF), the proposal's lines with their "
                   "verdicts (GeoPackage) and check.json.")
@click.option("--overwrite", is_flag=True, help="Replace the contents of a non-empty folder.")
@click.option("--k-cv", type=float,
              help="Coefficient of variation of K (e.g. 0.5): also check each spacing "
                   "criterion met with --confidence when K is lognormal.")
@click.option("--confidence", type=float,
              help="Confidence level for --k-cv, 0.5-0.99 (default 0.8).")
@click.option("--weather", "weather_path", type=click.Path(dir_okay=False),
              help="Daily weather CSV (as for 'drainplan simulate'): with --target-sew30, "
                   "also check the simulated season criterion.")
@click.option("--target-sew30", type=float,
              help="SEW30 limit per season in cm·d, checked by simulation over --weather.")
@click.option("--season", default="all", show_default=True,
              help="Growing season MM-DD:MM-DD for --target-sew30, or 'all'.")
@click.option("--target-basis", type=click.Choice(["mean", "worst-year"]), default="mean",
              show_default=True, help="Read the SEW30 target against the mean season or the "
                                      "worst one.")
@click.option("--units", type=click.Choice(["metric", "us"]), default=None,
              help="Units of the printed results (default: the project's).")
@json_option
@click.pass_context
def check(ctx, project_path, proposal_path, crs, output, overwrite, k_cv, confidence,
          weather_path, target_sew30, season, target_basis, units, as_json):
    """Check the proposal in --proposal against every criterion of PROJECT.toml.

    Each lateral is checked at its own local spacing (measured on a drawn
    proposal) and depth against the steady and falling criteria; the proposed
    pipe sizes against the flows they carry; grade, cover and velocity where
    elevations or a grade are given. Prints the required and proposed value
    and the margin of each check, a verdict per lateral and for the whole
    proposal, and the share of the drained area that meets. Exit code 0
    whether the proposal meets or fails; 2 for bad input.

    Example:

        drainplan check demo_fields/project.toml --proposal demo_fields/proposal.geojson
    """
    from ..check import check_proposal, read_proposal
    from ..errors import InputError
    from ..outputs import check_output_folder
    from ..project import load_project

    out = check_output_folder(output, overwrite=overwrite) if output else None
    project = load_project(project_path)
    proposal = read_proposal(proposal_path, crs=crs)
    u = units or project.report.get("units", "metric")
    extra = []
    if (weather_path is None) != (target_sew30 is None):
        raise InputError("the season criterion needs both --weather and --target-sew30",
                         param="target_sew30" if target_sew30 is None else "weather")
    if weather_path is not None:
        from ..check import season_criterion
        from ..weather import parse_season, read_weather

        season_t = parse_season(season)
        weather = read_weather(weather_path)
        extra.append(season_criterion(weather, target_sew30, season=season_t,
                                      basis=target_basis, season_text=season))
    result = check_proposal(project, proposal, units=u, k_cv=k_cv, confidence=confidence,
                            extra_criteria=extra)
    paths = []
    if out is not None:
        from ..check_sheet import write_check_outputs

        paths = write_check_outputs(result, out, overwrite=overwrite, units=u,
                                    paper=project.report.get("paper", "A4"))
    s = result.summary
    if as_json:
        from ..outputs import _clean

        doc = dict(s)
        if paths:
            doc["files"] = [str(x) for x in paths]
        click.echo(json.dumps(_clean(doc), indent=2, sort_keys=True))
        return
    click.echo(text_report(s, u))
    if paths:
        click.echo(f"Check sheet: {paths[0]}")


def text_report(s, units):
    from ..units import show

    lines = [f"Proposal {s['proposal']['file']} against {s['project']['file']}: "
             f"{'MEETS' if s['verdict'] == 'meets' else 'FAILS'} "
             f"({s['area_meeting_pct']:.1f} % of the drained area "
             f"{show(s['drained_area_ha'], 'area', units, 2)} meets every criterion; "
             f"{s['failing_laterals']} of {s['lateral_count']} laterals fail)"]
    lines.append("Criteria")
    for c in s["criteria"]:
        mark = "meets" if c["meets"] else "FAILS"
        area = (f"; {c['area_meeting_pct']:.0f} % of the area meets"
                if c.get("area_meeting_pct") is not None else "")
        lines.append(f"  [{mark:>5}] {c['name']}: {c['text']} (at {c['where']}{area})")
        if c.get("statement"):
            lines.append(f"          {c['statement']}")
    for n in s["not_checked"]:
        lines.append(f"  [ --- ] {n['name']}: not checked ({n['reason']})")
    bad = [x for x in s["laterals"] if not x["meets"]]
    if bad:
        lines.append(f"Failing laterals (first 15 of {len(bad)}; places in {s['work_crs']})")
        for x in bad[:15]:
            lines.append(f"  {x['lateral_id']:<14} field {x['field_id']}, local spacing "
                         f"{show(x['local_spacing_m'], 'spacing', units, 1)}, fails: "
                         f"{', '.join(x['fails'])} (near {x['x']:.0f}, {x['y']:.0f})")
    bad_m = [m for m in s["mains"] if not m["meets"]]
    for m in bad_m:
        lines.append(f"  main {m['main_id']}: fails {', '.join(m['fails'])}")
    lines.append("Notes")
    lines += [f"  - {n}" for n in s["notes"]]
    lines.append(f"  - {s['edge_treatment']}")
    lines.append("  - A check is a design aid: follow local codes and have the proposal "
                 "reviewed by a qualified professional before construction.")
    return "\n".join(lines)
