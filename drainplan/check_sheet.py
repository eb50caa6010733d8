"""The check sheet: a short PDF of a proposal check, and the files beside it.

Arranges a :class:`drainplan.check.CheckResult`; computes nothing. Page 1: the
verdict, the compliance map (laterals and their strips coloured meets /
fails) and the table of criteria with their margins; then the failing
laterals with their place, the notes and the cautions shared with the design
sheet (``templates/cautions.txt``). Output is deterministic (reportlab's
invariant mode, PNG without a date, GeoPackage with a fixed timestamp).
"""

from __future__ import annotations

import io
import json

__all__ = ["compliance_map", "build_check_sheet", "write_check_outputs", "CHECK_FILES"]

CHECK_FILES = ("check_sheet.pdf", "check.gpkg", "check.json", "check_map.png")

#: Colours of the compliance map (colour-blind safe blue / orange pair).
MEETS, FAILS = "#2c7fb8", "#e6550d"


def compliance_map(result, *, ax=None, title=None):
    """Draw fields, strips and laterals coloured by verdict; returns the axes."""
    import matplotlib.pyplot as plt
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    if ax is None:
        _, ax = plt.subplots(figsize=(8, 6))
    result.fields.boundary.plot(ax=ax, color="#333333", linewidth=1.0)
    st = result.strips
    for verdict, colour in (("meets", MEETS), ("fails", FAILS)):
        sel = st[st["verdict"] == verdict]
        if len(sel):
            sel.plot(ax=ax, color=colour, alpha=0.25, linewidth=0)
        lat = result.laterals[result.laterals["verdict"] == verdict]
        if len(lat):
            lat.plot(ax=ax, color=colour, linewidth=1.1)
    if len(result.mains):
        ok = result.mains[result.mains["verdict"] == "meets"]
        bad = result.mains[result.mains["verdict"] != "meets"]
        if len(ok):
            ok.plot(ax=ax, color="#222222", linewidth=2.2)
        if len(bad):
            bad.plot(ax=ax, color=FAILS, linewidth=2.6, linestyle="--")
    handles = [Patch(color=MEETS, alpha=0.45, label="strip meets"),
               Patch(color=FAILS, alpha=0.45, label="strip fails"),
               Line2D([], [], color=MEETS, label="lateral meets"),
               Line2D([], [], color=FAILS, label="lateral fails"),
               Line2D([], [], color="#222222", linewidth=2.2, label="main meets"),
               Line2D([], [], color=FAILS, linewidth=2.6, linestyle="--", label="main fails")]
    ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=8,
              frameon=False)
    ax.set_aspect("equal")
    ax.set_xlabel("Easting [m]")
    ax.set_ylabel("Northing [m]")
    ax.ticklabel_format(useOffset=False, style="plain")
    ax.tick_params(labelsize=7)
    if title:
        ax.set_title(title, fontsize=10)
    return ax


def _map_png(result, dpi=110):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from .plots import save_figure

    fig, ax = plt.subplots(figsize=(8, 5.6))
    s = result.summary
    compliance_map(result, ax=ax, title=f"Compliance: {s['area_meeting_pct']:.1f} % of the "
                                        "drained area meets every criterion")
    fig.tight_layout()
    buf = io.BytesIO()
    save_figure(fig, buf)
    plt.close(fig)
    return buf.getvalue()


def build_check_sheet(summary, map_png, path, *, units="metric", paper="A4", cautions=None):
    """Write the check sheet PDF at ``path`` (the caller renames it into place)."""
    from reportlab.lib.pagesizes import A4, LETTER
    from reportlab.lib.units import mm
    from reportlab.platypus import PageBreak, Paragraph, Spacer

    from .sheet import _build_pdf, _esc, _fonts, _image, _styles, _table, read_cautions
    from .units import show

    _fonts()
    st = _styles()
    s = summary
    page = LETTER if paper == "Letter" else A4
    width = page[0] - 36 * mm

    def P(text, style="body"):
        return Paragraph(text, st[style])

    proj, prop = s["project"], s["proposal"]
    story = [P(f"Proposal check — {_esc(proj.get('name', ''))}", "title")]
    verdict = "MEETS the project's criteria" if s["verdict"] == "meets" else \
        "FAILS the project's criteria"
    story.append(_table([
        ["Proposal", _esc(prop["file"]) + (f" ({_esc(prop['name'])})" if prop.get("name")
                                            else "")
         + (" — drawn lines" if prop["source"] == "drawn" else " — numbers, laid out by "
            "drainplan")],
        ["Project", _esc(proj["file"])],
        ["Verdict", verdict],
        ["Drained area meeting every criterion",
         f"{s['area_meeting_pct']:.1f} % of {show(s['drained_area_ha'], 'area', units, 2)}"],
        ["Laterals failing", f"{s['failing_laterals']} of {s['lateral_count']}"]],
        widths=[62 * mm, width - 62 * mm], header=False))
    story.append(Spacer(1, 4))
    story.append(_image(map_png, width))
    story.append(P("Criteria, required and proposed values, margins", "h"))
    rows = [["Criterion", "Check (worst case)", "Where", "Area meeting"]]
    for c in s["criteria"]:
        rows.append([P(_esc(c["name"]) + ("" if c["meets"] else " — <b>fails</b>"), "cell"),
                     P(_esc(c["text"]) + (f"<br/>{_esc(c['statement'])}" if c.get("statement")
                                         else ""), "cell"),
                     P(_esc(c["where"]), "cell"),
                     f"{c['area_meeting_pct']:.0f} %" if c.get("area_meeting_pct")
                     is not None else "–"])
    for n in s["not_checked"]:
        rows.append([P(_esc(n["name"]), "cell"), P("not checked: " + _esc(n["reason"]), "cell"),
                     "–", "–"])
    story.append(_table(rows, widths=[32 * mm, width - 84 * mm, 28 * mm, 24 * mm]))
    story.append(P("Sources: " + "; ".join(sorted({_esc(c["source"]) for c in s["criteria"]})),
                   "small"))
    bad = [x for x in s["laterals"] if not x["meets"]]
    if bad:
        story.append(P(f"Failing laterals: {len(bad)} of {s['lateral_count']} (grouped by "
                       f"field and reason; place in {_esc(s['work_crs'])}; each lateral in "
                       "check.json and check.gpkg)", "h"))
        groups = {}
        for x in bad:
            groups.setdefault((x["field_id"] or "–", tuple(x["fails"])), []).append(x)
        rows = [["Field", "Laterals", "Count", "Local spacing", "Fails", "First near (x, y)"]]
        for (fid, fails), xs in groups.items():
            sp = [x["local_spacing_m"] for x in xs if x["local_spacing_m"] is not None]
            spacing = (show(min(sp), "spacing", units, 1) if sp and min(sp) == max(sp) else
                       f"{show(min(sp), 'spacing', units, 1)} – "
                       f"{show(max(sp), 'spacing', units, 1)}" if sp else "–")
            ids = xs[0]["lateral_id"] + (f" … {xs[-1]['lateral_id']}" if len(xs) > 1 else "")
            rows.append([fid, P(_esc(ids), "cell"), str(len(xs)), spacing,
                         P(_esc(", ".join(fails)), "cell"),
                         f"{xs[0]['x']:.0f}, {xs[0]['y']:.0f}"])
        story.append(_table(rows, widths=[16 * mm, 40 * mm, 14 * mm, 30 * mm,
                                          width - 136 * mm, 36 * mm], font_size=7))
    bad_m = [m for m in s["mains"] if not m["meets"]]
    if bad_m:
        story.append(P("Mains", "h"))
        rows = [["Main", "Size", "Flow", "Capacity", "Fails"]]
        for m in s["mains"]:
            rows.append([m["main_id"], m["size"] or "–",
                         show(m["flow_l_s"], "flow", units, 1),
                         show(m["capacity_l_s"], "flow", units, 1)
                         if m["capacity_l_s"] is not None else "–",
                         ", ".join(m["fails"]) or "–"])
        story.append(_table(rows))
    story.append(P("How the proposal was measured", "h"))
    story.append(P(_esc(s["edge_treatment"]), "small"))
    for n in s["notes"]:
        story.append(P("• " + _esc(n), "small"))
    story.append(PageBreak())
    story.append(P("Cautions", "h"))
    for title, text in (cautions or read_cautions()):
        story.append(P(f"<b>{_esc(title)}</b>"))
        story.append(P(_esc(text)))
        story.append(Spacer(1, 4))

    _build_pdf(story, path, page, footer=f"drainplan check sheet — {proj.get('name', '')}",
               title=f"Proposal check — {proj.get('name', '')}")


def write_check_outputs(result, outdir, *, overwrite=False, units="metric", paper="A4"):
    """Write check_sheet.pdf, check.gpkg (proposal lines with verdicts, strips, fields),
    check.json and the map PNG into ``outdir``, all or nothing. Returns the paths."""
    from .gisio import write_layers
    from .outputs import _clean, write_output_folder

    def write_files(tmp):
        png = _map_png(result)
        build_check_sheet(result.summary, png, str(tmp / "check_sheet.pdf"), units=units,
                          paper=paper)
        layers = {"proposal_laterals": result.laterals, "proposal_mains": result.mains,
                  "drained_strips": result.strips, "field": result.fields}
        if result.out_crs != result.work_crs:
            layers = {k: v.to_crs(result.out_crs) for k, v in layers.items()}
        write_layers(tmp / "check.gpkg", layers)
        (tmp / "check.json").write_text(
            json.dumps(_clean(result.summary), indent=2, sort_keys=True) + "\n",
            encoding="utf-8")
        (tmp / "check_map.png").write_bytes(png)

    # the same folder rules as a design: only drainplan's own files are replaced
    return write_output_folder(outdir, write_files, names=CHECK_FILES, overwrite=overwrite)
