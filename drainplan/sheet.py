"""The design sheet: a PDF laid out with reportlab from a DesignResult and its figures.

This module arranges; it computes nothing. Numbers come from the result's
summary (the same numbers written to summary.json), figures arrive as PNG
bytes from :mod:`drainplan.plots`, and the cautions text from
``templates/cautions.txt``. Output is deterministic: fixed document ids and
dates (reportlab's invariant mode).
"""

from __future__ import annotations

import io
import os

from ._templates import template_text

__all__ = ["build_sheet", "read_cautions"]

_FONT, _BOLD = "DejaVuSans", "DejaVuSans-Bold"

EQUATIONS = {
    "hooghoudt": ("Hooghoudt (steady state)", "q L² = 8 K₂ d h + 4 K₁ h²"),
    "equivalent": ("Equivalent depth (van der Molen & Wesseling)",
                   "d = (π L / 8) / [ ln(L / (π r₀)) + F(x) ],   x = 2π D / L"),
    "ernst": ("Ernst (layered soil)",
              "h = q Dᵥ / Kᵥ + q L² / (8 Σ KD) + (q L / (π Kᵣ)) ln(a Dᵣ / u)"),
    "kirkham": ("Kirkham (steady rain)", "h = q L F_K / K"),
    "glover-dumm": ("Glover–Dumm (falling water table)",
                    "L = π √[ K D t / (μ ln(c h₀ / hₜ)) ],   c = 1.16 (parabolic) or 4/π (flat)"),
    "manning": ("Pipe capacity (Manning, full flow)",
                "Q = (1/n) A R^(2/3) s^(1/2),   design flow Q = DC × A"),
}
SYMBOLS = ("q recharge or drainage coefficient; L spacing; K hydraulic conductivity (K₁ above, "
           "K₂ below drain level); h midway water-table height above the drains; D depth of the "
           "barrier below drain level; d equivalent depth; r₀ effective drain radius; μ drainable "
           "porosity; t time; n Manning roughness; s grade; A drained area or pipe section.")


def _fonts():
    from reportlab.pdfbase import pdfmetrics
    from reportlab.pdfbase.ttfonts import TTFont

    if _FONT in pdfmetrics.getRegisteredFontNames():
        return
    import matplotlib

    ttf = os.path.join(matplotlib.get_data_path(), "fonts", "ttf")
    pdfmetrics.registerFont(TTFont(_FONT, os.path.join(ttf, "DejaVuSans.ttf")))
    pdfmetrics.registerFont(TTFont(_BOLD, os.path.join(ttf, "DejaVuSans-Bold.ttf")))


def read_cautions(path=None):
    """Cautions as (title, text) pairs from templates/cautions.txt (or ``path``)."""
    if path is None:
        text = template_text("cautions.txt")
    else:
        with open(path, encoding="utf-8") as fh:
            text = fh.read()
    items, title, body = [], None, []
    for line in text.splitlines():
        if line.startswith("## "):
            if title:
                items.append((title, " ".join(body).strip()))
            title, body = line[3:].strip(), []
        elif line.startswith("#"):
            continue
        elif title:
            body.append(line.strip())
    if title:
        items.append((title, " ".join(body).strip()))
    return items


def _styles():
    from reportlab.lib.styles import ParagraphStyle

    base = ParagraphStyle("base", fontName=_FONT, fontSize=9, leading=12)
    return {
        "title": ParagraphStyle("title", parent=base, fontName=_BOLD, fontSize=16, leading=20,
                                spaceAfter=6),
        "h": ParagraphStyle("h", parent=base, fontName=_BOLD, fontSize=11.5, leading=15,
                            spaceBefore=8, spaceAfter=4),
        "body": base,
        "small": ParagraphStyle("small", parent=base, fontSize=7.5, leading=9.5),
        "eq": ParagraphStyle("eq", parent=base, fontSize=10.5, leading=15, leftIndent=14),
        "cell": ParagraphStyle("cell", parent=base, fontSize=7.5, leading=9),
    }


def _table(rows, widths=None, header=True, font_size=8):
    from reportlab.lib import colors
    from reportlab.platypus import Table, TableStyle

    t = Table(rows, colWidths=widths, repeatRows=1 if header else 0, hAlign="LEFT")
    style = [("FONT", (0, 0), (-1, -1), _FONT, font_size),
             ("VALIGN", (0, 0), (-1, -1), "TOP"),
             ("LINEBELOW", (0, 0), (-1, 0), 0.6, colors.HexColor("#555555")),
             ("BOTTOMPADDING", (0, 0), (-1, -1), 2), ("TOPPADDING", (0, 0), (-1, -1), 2)]
    if header:
        style.append(("FONT", (0, 0), (-1, 0), _BOLD, font_size))
        style.append(("ROWBACKGROUNDS", (0, 1), (-1, -1),
                      [colors.white, colors.HexColor("#f3f3f0")]))
    t.setStyle(TableStyle(style))
    return t


def _image(png, width):
    from reportlab.lib.utils import ImageReader
    from reportlab.platypus import Image

    iw, ih = ImageReader(io.BytesIO(png)).getSize()
    return Image(io.BytesIO(png), width=width, height=width * ih / iw)


def build_sheet(summary, figures_png, path, *, units="metric", paper="A4", logo=None,
                cautions=None):
    """Write the design sheet PDF.

    Parameters
    ----------
    summary : dict
        ``DesignResult.summary``.
    figures_png : dict of str -> bytes
        PNG images: ``plan``, ``section``, ``falling`` (optional), ``profiles``
        (optional).
    path : str
        PDF file to write (the caller handles atomic renaming).
    units : {"metric", "us"}
    paper : {"A4", "Letter"}
    logo : str, optional
        Image file shown at the top of the first page.
    cautions : list of (title, text), optional
        Default: :func:`read_cautions`.
    """
    from reportlab import rl_config
    from reportlab.lib.pagesizes import A4, LETTER
    from reportlab.lib.units import mm
    from reportlab.platypus import (CondPageBreak, Image, PageBreak, Paragraph,
                                    SimpleDocTemplate, Spacer)

    from .units import display_unit, show, to_display

    _fonts()
    st = _styles()
    us = units == "us"
    L_u = display_unit("length", units)

    def length(v, nd=2):
        return show(v, "length", units, nd)

    def area(v_ha):
        return show(v_ha, "area", units, 2)

    def rate(v):
        return show(v, "recharge", units, 3 if us else 1)

    def cond(v):
        return show(v, "conductivity", units, 3)

    s = summary
    d = s["design"]
    proj = s["project"]
    q = s["quantities"]
    page = LETTER if paper == "Letter" else A4
    width = page[0] - 36 * mm
    story = []

    def P(text, style="body"):
        return Paragraph(text, st[style])

    # ---- page 1: summary
    if logo:
        story.append(Image(logo, width=30 * mm, height=15 * mm, kind="proportional",
                           hAlign="LEFT"))
    story.append(P(f"Subsurface drainage design — {_esc(proj.get('name', ''))}", "title"))
    meta = [["Client", _esc(proj.get("client", "") or "–")],
            ["Location", _esc(proj.get("location", "") or "–")],
            ["Designer", _esc(proj.get("designer", "") or "–")],
            ["Date", _esc(proj.get("date", "") or "–")],
            ["Project file", _esc(proj.get("file", ""))]]
    story.append(_table(meta, widths=[35 * mm, width - 35 * mm], header=False))
    story.append(P("Design", "h"))
    crit = s["inputs"]["criteria"]
    rows = [["Method", d["method"]],
            ["Governing criterion", d["governing_criterion"]],
            ["Drain depth", length(d["drain_depth_m"])],
            ["Drain spacing", f"{length(d['spacing_m'], 1)} (computed "
                              f"{length(d['spacing_before_rounding_m'], 2)}, rounded down)"],
            ["Equivalent depth", length(d["equivalent_depth_m"])]]
    if d.get("flow_depth_m") is not None:
        rows.append(["Flow depth (falling water table)", length(d["flow_depth_m"])])
    if crit.get("recharge") is not None:
        rows.append(["Steady criterion", f"{rate(crit['recharge'])} with the water table "
                                         f"{length(crit['water_table_depth'])} below the surface "
                                         "midway"])
    if crit.get("days") is not None:
        rows.append(["Falling criterion", f"midway water table from "
                                          f"{length(crit['initial_depth'])} to "
                                          f"{length(crit['final_depth'])} in "
                                          f"{crit['days']:g} d"])
    rows.append(["Drainage coefficient (pipes)",
                 rate(s["inputs"]["drainage_coefficient_m_per_d"])])
    story.append(_table(rows, widths=[55 * mm, width - 55 * mm], header=False))
    story.append(P("Key quantities", "h"))
    qrows = [["Fields", "Area", "Laterals", "Lateral length", "Main length", "Drained area",
              "Outlet flow"],
             [str(len(s["fields"])), area(q["field_area_ha"]), str(q["laterals"]),
              length(q["lateral_length_m"], 0), length(q["main_length_m"], 0),
              area(q["drained_area_ha"]), show(q["outlet_flow_l_s"], "flow", units, 2 if us else 1)]]
    story.append(_table(qrows))
    sizes = ", ".join(f"{k}: {length(v, 0)}" for k, v in q["lateral_length_by_size_m"].items())
    msizes = ", ".join(f"{k}: {length(v, 0)}" for k, v in q["main_length_by_size_m"].items())
    story.append(Spacer(1, 3))
    story.append(P(f"Laterals by size — {sizes}. Mains by size — {msizes}.", "small"))
    if s["outlets"]:
        story.append(P("Outlets (main downstream ends): " + "; ".join(
            f"{o['field_id']} at {o['x']}, {o['y']}" for o in s["outlets"]), "small"))
    story.append(Spacer(1, 4))
    story.append(_image(figures_png["plan"], width * 0.92))

    # ---- page 2: cross-section and water table
    story.append(PageBreak())
    story.append(P("Cross-section and water table", "h"))
    story.append(_image(figures_png["section"], width))
    if "falling" in figures_png:
        story.append(_image(figures_png["falling"], width))
    story.append(P("Drain depth against spacing", "h"))
    trows = [["Drain depth", "Steady spacing", "Falling-water-table spacing",
              "Governing spacing", "Laterals per area"]]
    for r in s["depth_table"]:
        per_area = r["lateral_m_per_ha"]
        trows.append([length(r["drain_depth_m"]), length(r.get("steady_spacing_m"), 1),
                      length(r.get("falling_spacing_m"), 1),
                      length(r["governing_spacing_m"], 1),
                      show(per_area, "density", units, 0)])
    story.append(_table(trows))

    # ---- page 3: method, inputs, references, sensitivity
    story.append(PageBreak())
    story.append(P("Method and equations", "h"))
    keys = ["hooghoudt", "equivalent"]
    if d["method"] not in keys:
        keys.append(d["method"])
    for m in s["methods"]:
        if m["method"] not in keys:
            keys.append(m["method"])
    keys.append("manning")
    for k in keys:
        name, eq = EQUATIONS[k]
        story.append(P(f"<b>{name}</b>"))
        story.append(P(eq, "eq"))
    story.append(P(SYMBOLS, "small"))
    for n in d["notes"]:
        story.append(P("• " + _esc(n), "small"))
    story.append(P("Inputs", "h"))
    soil = s["inputs"]["soil"]
    irows = [["Input", "Value", "Source"]]
    src_soil = _esc(soil.get("source", "project file"))
    src_crit = _esc(crit.get("source", "project file"))
    top = 0.0
    for i, ly in enumerate(soil.get("layers") or [], start=1):
        mu = ly.get("drainable_porosity")
        irows.append([f"Layer {i}{' ' + _esc(ly['name']) if ly.get('name') else ''} "
                      f"({length(top)} – {length(top + ly['thickness'])})",
                      cond(ly["k"]) + (f", μ {mu:.3f}" if mu is not None else ""),
                      P(src_soil, "cell")])
        top += ly["thickness"]
    at_drain = s["inputs"].get("soil_at_drain_depth", {})
    for key, label in (("k", "Hydraulic conductivity K"), ("k_above", "K above drain level"),
                       ("k_below", "K below drain level"),
                       ("k_vertical", "Vertical K (top layer)")):
        value = soil.get(key, at_drain.get(key) if soil.get("layers") else None)
        if value is not None:
            src = src_soil if key in soil else "layers, thickness-weighted at drain level"
            irows.append([label, cond(value), P(src, "cell")])
    if soil.get("interface_depth") is not None:
        irows.append(["Layer interface depth", length(soil["interface_depth"]),
                      P(src_soil, "cell")])
    irows.append(["Barrier depth", length(soil["barrier_depth"]), P(src_soil, "cell")])
    mu = soil.get("drainable_porosity", at_drain.get("drainable_porosity"))
    if mu is not None:
        irows.append(["Drainable porosity", f"{mu:.3f}", P(src_soil, "cell")])
    for key, label, fmt in (("recharge", "Design recharge", rate),
                            ("water_table_depth", "Water-table depth midway", length),
                            ("initial_depth", "Initial water-table depth", length),
                            ("final_depth", "Final water-table depth", length)):
        if crit.get(key) is not None:
            irows.append([label, fmt(crit[key]), P(src_crit, "cell")])
    if crit.get("days") is not None:
        irows.append(["Time allowed", f"{crit['days']:g} d", P(src_crit, "cell")])
    dr = s["inputs"]["drains"]
    irows.append(["Effective drain radius", length(dr["radius_m"], 3),
                  P("templates/drain_radius.csv or project file", "cell")])
    irows.append(["Drain depths compared", ", ".join(length(z) for z in dr["depths_m"]),
                  P("project file", "cell")])
    irows.append(["Drainage coefficient (pipes)",
                  rate(s["inputs"]["drainage_coefficient_m_per_d"]), P("project file", "cell")])
    story.append(_table(irows, widths=[55 * mm, 40 * mm, width - 95 * mm]))
    story.append(P("Sensitivity and other methods", "h"))
    srows = [["Case", "Spacing"]]
    for r in s["sensitivity"]:
        srows.append([f"{d['method']}, K × {r['k_factor']:g}", length(r["spacing_m"], 1)])
    for m in s["methods"]:
        srows.append([f"{m['method']} (same depth)",
                      length(m["spacing_m"], 1) if m["spacing_m"] else _esc(m["note"] or "–")])
    story.append(_table(srows, widths=[70 * mm, 60 * mm]))
    story.append(P("References", "h"))
    for ref in s["references"]:
        story.append(P(_esc(ref), "small"))

    story += _uncertainty_section(s, figures_png, P, units, width)

    # ---- page 4: pipes (starts on the same page when a useful part of it is left)
    story.append(CondPageBreak(90 * mm))
    story.append(P("Pipe schedule", "h"))
    qf, qu = to_display(1.0, "flow", units), display_unit("flow", units)
    vf, vu = to_display(1.0, "velocity", units), display_unit("velocity", units)
    zf = to_display(1.0, "length", units)
    prow = [["Reach", "Length", "Area", f"Flow {qu}", "Grade", "Size", f"Cap. {qu}",
             f"V {vu}", "Used", f"Inverts up/down ({L_u})", "Cover"]]
    for r in s["reaches"]:
        prow.append([r["reach_id"], length(r["length_m"], 0), area(r["drained_area_ha"]),
                     f"{r['flow_l_s'] * qf:.3f}", f"{r['grade']:.2%}", r["size"] or "–",
                     f"{r['capacity_l_s'] * qf:.3f}" if r.get("capacity_l_s") else "–",
                     f"{r['velocity_m_s'] * vf:.2f}" if r.get("velocity_m_s") else "–",
                     f"{r['capacity_used_pct']:.0f} %" if r.get("capacity_used_pct") else "–",
                     (f"{r['invert_up_m'] * zf:.2f} / {r['invert_down_m'] * zf:.2f}"
                      if r.get("invert_up_m") is not None else "–"),
                     length(r.get("cover_min_m")) if r.get("cover_min_m") is not None else "–"])
    story.append(_table(prow, font_size=6.5))
    story.append(P("Quantity take-off", "h"))
    trows = [["Item", "Material", "Size", "Quantity"]]
    for t in s["takeoff"]:
        qty = length(t["length_m"], 1) if t["length_m"] else f"{t['count']} pcs"
        trows.append([t["kind"], t["material"] or "–", t["size"], qty])
    story.append(_table(trows))
    if "profiles" in figures_png:
        story.append(P("Profiles", "h"))
        story.append(_image(figures_png["profiles"], width * 0.9))
    story.append(P("Grade, capacity and layout warnings", "h"))
    problems = s["pipe_problems"]
    if not problems:
        story.append(P("No grade, cover, junction, velocity or outlet problem found."))
    for v in problems:
        story.append(P(f"• {_esc(v['reach_id'])}: {_esc(v['problem'])} — {_esc(v['fix'])}",
                       "small"))
    for n in s["layout_notes"] + s["pipe_notes"]:
        story.append(P("• " + _esc(n), "small"))

    # ---- page 5: cautions
    story.append(PageBreak())
    story.append(P("Cautions", "h"))
    for title, text in (cautions or read_cautions()):
        story.append(P(f"<b>{_esc(title)}</b>"))
        story.append(P(_esc(text)))
        story.append(Spacer(1, 4))

    def footer(canvas, doc):
        canvas.saveState()
        canvas.setFont(_FONT, 7)
        canvas.drawString(18 * mm, 10 * mm, f"drainplan design sheet — {proj.get('name', '')}")
        canvas.drawRightString(page[0] - 18 * mm, 10 * mm, f"page {doc.page}")
        canvas.drawCentredString(page[0] / 2, 6 * mm, "A design aid: check against local codes "
                                 "and have it reviewed by a qualified professional.")
        canvas.restoreState()

    old = rl_config.invariant
    rl_config.invariant = 1
    try:
        doc = SimpleDocTemplate(path, pagesize=page, leftMargin=18 * mm, rightMargin=18 * mm,
                                topMargin=16 * mm, bottomMargin=18 * mm,
                                title=f"Drainage design — {proj.get('name', '')}",
                                author="drainplan", invariant=1)
        doc.build(story, onFirstPage=footer, onLaterPages=footer)
    finally:
        rl_config.invariant = old


def _uncertainty_section(s, figures_png, P, units, width):
    """Field tests (each test's K, design K and spread) and the spacing under uncertainty
    (probability curve, inputs varied, spacing at the chosen confidence)."""
    from reportlab.lib.units import mm
    from reportlab.platypus import CondPageBreak

    from .units import show

    ft, u = s.get("field_tests"), s.get("uncertainty")
    if ft is None and u is None:
        return []

    def cond(v):
        return show(v, "conductivity", units, 3)

    def sp(v):
        return show(v, "spacing", units, 1)

    out = [CondPageBreak(70 * mm), P("Field tests and how sure the spacing is", "h")]
    if ft is not None:
        rows = [["Place", "Test", "K", "Readings used"]]
        for t in ft["tests"]:
            rows.append([P(_esc(t["place"]), "cell"), t["kind"], cond(t["k"]), t["readings"]])
        out.append(_table(rows, widths=[70 * mm, 35 * mm, 30 * mm, 30 * mm]))
        how = ("the geometric mean" if ft["percentile"] is None
               else f"the {ft['percentile']:g} % point of the fitted lognormal; geometric "
                    f"mean {cond(ft['geometric_mean_m_per_d'])}")
        out.append(P(f"Design K from {ft['n']} test(s): <b>{cond(ft['design_k_m_per_d'])}</b> "
                     f"({how}). Spread: "
                     f"{cond(ft['min_m_per_d'])} to {cond(ft['max_m_per_d'])} "
                     f"(factor {ft['spread_factor']:.1f}), standard deviation of ln K "
                     f"{ft['log_sd']:.2f} (cv {ft['cv']:.2f}). Used for "
                     f"{_esc(ft['used_for'])}. Auger-hole tests reduced by Ernst's formula, "
                     "readings used while the rise stayed under a quarter of the first "
                     "drawdown; inverse auger-hole tests by Porchet's formula.", "small"))
        for t in ft["tests"]:
            if t.get("note"):
                out.append(P(f"• {_esc(t['place'])}: {_esc(t['note'])}", "small"))
    if u is not None:
        if "probability" in figures_png:
            out.append(_image(figures_png["probability"], width))
        c = u["confidence"]
        pc = f"{c * 100:.0f} %"
        rows = [(f"Inputs varied ({u['n_samples']:,} samples, seed {u['seed']})",
                 "; ".join(f"{v['input']}: {v['distribution']}" for v in u["varied"])),
                (f"Spacing met with {pc} probability", sp(u["spacing_at_confidence_m"])
                 + (f" (from the K percentile: {sp(u['exact_spacing_at_confidence_m'])})"
                    if u.get("exact_spacing_at_confidence_m") is not None else "")),
                ("Spacing met with 50 % probability", sp(u["median_spacing_m"])),
                ("Probability that the design spacing meets the criteria",
                 f"{u['probability_design_spacing_meets'] * 100:.0f} %"),
                ("Design spacing", f"the spacing met with {pc} probability"
                 if u["design_spacing_at_confidence"] else
                 "from the central values (criteria.confidence would design for a chosen "
                 "probability)")]
        rows = [[P(_esc(a), "cell"), P(_esc(b), "cell")] for a, b in rows]
        out.append(_table(rows, widths=[70 * mm, width - 70 * mm], header=False))
        out.append(P("K is taken as lognormal about the K in use (its median). With K alone "
                     "varying, the spacing met with a given probability is the spacing at "
                     "the matching K percentile; when several inputs vary together no single "
                     "percentile gives it, so the joint samples are counted. Samples without "
                     "a workable spacing count as failing.", "small"))
        for n in u.get("notes", []):
            out.append(P("• " + _esc(n), "small"))
    return out


def _esc(text):
    return (str(text).replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;"))
