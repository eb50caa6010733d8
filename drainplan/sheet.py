"""The design sheet: a PDF laid out with reportlab from a DesignResult and its figures.

This module arranges; it computes nothing. Numbers come from the result's
summary (the same numbers written to summary.json), figures arrive as PNG
bytes from :mod:`drainplan.plots`, and the cautions text from
``templates/cautions.txt``. Output is deterministic: fixed document ids and
dates (reportlab's invariant mode).
"""

from __future__ import annotations

import io

from ._templates import template_text

__all__ = ["build_sheet", "read_cautions"]

_FONT, _BOLD = "DejaVuSans", "DejaVuSans-Bold"

#: Method names as words.
METHOD_NAMES = {"hooghoudt": "Hooghoudt", "ernst": "Ernst", "kirkham": "Kirkham",
                "glover-dumm": "Glover–Dumm"}
CRITERION_NAMES = {"steady": "steady state (design recharge)",
                   "falling": "falling water table (drawdown in the time allowed)"}
#: Rows of the pipe schedule printed on the sheet; a longer schedule prints the mains
#: and refers to pipe_schedule.csv for the laterals (the CSV always has every reach).
MAX_SCHEDULE_ROWS = 400
#: Rows per reportlab table: page-sized tables keep long schedules fast to lay out.
TABLE_CHUNK = 45

def _fonts():
    from reportlab.pdfbase import pdfmetrics
    from reportlab.pdfbase.ttfonts import TTFont

    from ._text import font_path

    if _FONT in pdfmetrics.getRegisteredFontNames():
        return
    pdfmetrics.registerFont(TTFont(_FONT, font_path()))
    pdfmetrics.registerFont(TTFont(_BOLD, font_path(bold=True)))


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
                            spaceBefore=8, spaceAfter=4, keepWithNext=1),
        # a heading followed by a long, splitting table: a CondPageBreak before it keeps it
        # off the foot of a page instead of pushing the whole table to the next page
        "hl": ParagraphStyle("hl", parent=base, fontName=_BOLD, fontSize=11.5, leading=15,
                             spaceBefore=8, spaceAfter=4),
        "h2": ParagraphStyle("h2", parent=base, fontName=_BOLD, keepWithNext=1,
                             spaceBefore=4),
        "warn": ParagraphStyle("warn", parent=base, fontSize=8.5, leading=11,
                               textColor="#8a1c0f", leftIndent=8),
        "body": base,
        "small": ParagraphStyle("small", parent=base, fontSize=7.5, leading=9.5),
        "eq": ParagraphStyle("eq", parent=base, fontSize=10, leading=16, leftIndent=14,
                             keepWithNext=1),
        "sym": ParagraphStyle("sym", parent=base, fontSize=7.5, leading=10.5, leftIndent=14),
        "cell": ParagraphStyle("cell", parent=base, fontSize=8, leading=10),
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


def _image(png, width, fit=False):
    """A PNG at ``width``; with ``fit``, shrunk (down to 60 %) to the space left on the
    page rather than pushed to the next one."""
    from reportlab.lib.utils import ImageReader
    from reportlab.platypus import Image

    iw, ih = ImageReader(io.BytesIO(png)).getSize()
    img = Image(io.BytesIO(png), width=width, height=width * ih / iw)
    if not fit:
        return img
    from reportlab.platypus import Flowable

    class _Fit(Flowable):
        def wrap(self, aw, ah):
            scale = min(1.0, aw / width, max(ah - 2, 0) / (width * ih / iw))
            if scale < 0.7:
                scale = min(1.0, aw / width)
            self.w, self.h = width * scale, width * ih / iw * scale
            img.drawWidth, img.drawHeight = self.w, self.h
            return self.w, self.h

        def draw(self):
            img.drawOn(self.canv, 0, 0)

    return _Fit()


def _long_tables(rows, widths=None, font_size=8, chunk=TABLE_CHUNK):
    """A long table as page-sized tables, each repeating the header row."""
    head, body = rows[0], rows[1:]
    if not body:
        return [_table(rows, widths=widths, font_size=font_size)]
    return [_table([head] + body[i:i + chunk], widths=widths, font_size=font_size)
            for i in range(0, len(body), chunk)]


class _Fmt:
    """Display formatting in the sheet's unit system (all through drainplan.units)."""

    def __init__(self, units):
        from .units import display_unit, show, to_display

        self.units, self.us = units, units == "us"
        self._show, self._to, self._unit = show, to_display, display_unit

    def length(self, v, nd=2):
        return self._show(v, "length", self.units, nd)

    def spacing(self, v, nd=None):
        if nd is None:
            nd = 0 if self.us else 1
        return self._show(v, "spacing", self.units, nd)

    def area(self, v):
        return self._show(v, "area", self.units, 2)

    def rate(self, v):
        return self._show(v, "recharge", self.units, 3 if self.us else 1)

    def cond(self, v):
        return self._show(v, "conductivity", self.units, 3 if self.us else 2)

    def radius(self, v):
        return self._show(v, "radius", self.units, 2 if self.us else 1)

    def flow(self, v):
        return self._show(v, "flow", self.units, 2 if self.us else 1)

    def per_day(self, v, nd=4):
        """A rate as length per day in the sheet's length unit (consistent units for the
        equations: m/d or ft/d)."""
        if v is None:
            return "–"
        return f"{float(self._to(v, 'length', self.units)):.{nd}g} {self._unit('length', self.units)}/d"

    def unit(self, role):
        return self._unit(role, self.units)

    def to(self, v, role):
        return self._to(v, role, self.units)


def _build_pdf(story, path, page, *, footer, title):
    """Lay ``story`` out on ``page``-sized pages in ``path`` with the drainplan footer
    (``footer`` at the left, the page number at the right, the design-aid caution
    centred) and PDF title ``title``; the same input gives the same file bytes."""
    from reportlab import rl_config
    from reportlab.lib.units import mm
    from reportlab.platypus import SimpleDocTemplate

    def draw_footer(canvas, doc):
        canvas.saveState()
        canvas.setFont(_FONT, 7)
        canvas.drawString(18 * mm, 10 * mm, footer)
        canvas.drawRightString(page[0] - 18 * mm, 10 * mm, f"page {doc.page}")
        canvas.drawCentredString(page[0] / 2, 6 * mm, "A design aid: check against local codes "
                                 "and have it reviewed by a qualified professional.")
        canvas.restoreState()

    # binary streams (no ASCII85 text encoding: a third smaller, and reportlab's
    # pure-Python encoder cost 0.4 s on the demo sheet's images)
    old = rl_config.invariant, rl_config.useA85
    rl_config.invariant, rl_config.useA85 = 1, 0
    try:
        doc = SimpleDocTemplate(path, pagesize=page, leftMargin=18 * mm, rightMargin=18 * mm,
                                topMargin=16 * mm, bottomMargin=18 * mm, title=title,
                                author="drainplan", invariant=1)
        doc.build(story, onFirstPage=draw_footer, onLaterPages=draw_footer)
    finally:
        rl_config.invariant, rl_config.useA85 = old


def _equations(s, f):
    """The equations the design used, as computed, each with its symbols and numbers:
    list of (title, [equation lines], symbols, numbers or None)."""
    d = s["design"]
    crit = s["inputs"]["criteria"]
    soil = s["inputs"].get("soil_at_drain_depth") or s["inputs"]["soil"]
    dr = s["inputs"]["drains"]
    methods = {m["method"]: m for m in s["methods"]}
    zd = d["drain_depth_m"]
    moody = dr.get("equivalent_depth") == "moody"
    blocks = []
    k1 = soil.get("k", soil.get("k_above"))
    k2 = soil.get("k", soil.get("k_below"))
    q = crit.get("recharge")
    if moody:
        d_eq = ["d = D / [1 + (D/L) ((8/π) ln(D / r₀) − α)],   α = 3.55 − 1.6 D/L + 2 (D/L)²"
                "   (D/L ≤ 0.3)", "d = π L / [8 (ln(L / r₀) − 1.15)]   (D/L > 0.3)"]
        d_name = "Moody's (1966) approximation"
    else:
        d_eq = ["d = (π L / 8) / [ln(L / (π r₀)) + F(x)],   x = 2π D / L,   "
                "F(x) = Σ<sub>n = 1, 3, 5, …</sub> 4 e<super>−2nx</super> / "
                "[n (1 − e<super>−2nx</super>)]"]
        d_name = "van der Molen & Wesseling (1991) series"
    for key in [m["method"] for m in s["methods"]]:
        m = methods[key]
        if m.get("spacing_m") is None:
            continue
        L = m["spacing_m"]
        D = m.get("depth_to_barrier_m")
        h = m.get("head_m")
        r0 = dr["radius_m"]
        if key == "hooghoudt":
            blocks.append((
                "Hooghoudt (steady state), equivalent depth by " + d_name,
                ["q L² = 8 K₂ d h + 4 K₁ h²"] + d_eq,
                "q design recharge (drain discharge per unit area); L drain spacing; K₁ and K₂ "
                "hydraulic conductivity above and below drain level; h midway water-table "
                "height above drain level (drain depth − required water-table depth); d "
                "equivalent depth, which replaces D to account for radial flow near the "
                "drains; D depth of the barrier below drain level; r₀ effective drain radius.",
                f"q = {f.per_day(q)}, K₁ = {f.per_day(k1)}, K₂ = {f.per_day(k2)}, "
                f"h = {f.length(h)}, D = {f.length(D)}, r₀ = {f.radius(r0)} → "
                f"d = {f.length(m['equivalent_depth_m'])}, L = {f.spacing(L, 1)}"))
        elif key == "kirkham":
            blocks.append((
                "Kirkham (steady rain, one homogeneous layer)",
                ["h = q L F<sub>K</sub> / K",
                 "F<sub>K</sub> = (1/π) [ln(L / (π r₀)) + Σ<sub>m ≥ 1</sub> (1/m) "
                 "(cos(2πm r₀ / L) − cos mπ) (coth(2πm D / L) − 1)]"],
                "h midway water-table height above drain level; q design recharge; L drain "
                "spacing; K hydraulic conductivity; r₀ effective drain radius; D depth of the "
                "barrier below drain level. The equivalent depth shown is L / (8 F<sub>K</sub>).",
                f"q = {f.per_day(q)}, K = {f.per_day(k2)}, h = {f.length(h)}, "
                f"D = {f.length(D)}, r₀ = {f.radius(r0)} → L = {f.spacing(L, 1)}"))
        elif key == "ernst":
            x = m.get("details") or {}
            nums = None
            if x.get("head_loss_radial_m") is not None:
                nums = (f"q = {f.per_day(q)}; a = {x['geometry_factor']:.2f}, "
                        f"ΣKD = {f.to(x['transmissivity_m2_per_d'], 'length') * f.to(1.0, 'length'):.3g} "
                        f"{f.unit('length')}²/d, Dᵣ = {f.length(x['radial_thickness_m'])}, "
                        f"u = π r₀; head losses: vertical {f.length(x['head_loss_vertical_m'], 3)}"
                        f" + horizontal {f.length(x['head_loss_horizontal_m'], 3)} + radial "
                        f"{f.length(x['head_loss_radial_m'], 3)} = h = {f.length(h, 3)} → "
                        f"L = {f.spacing(L, 1)}")
            blocks.append((
                "Ernst (vertical, horizontal and radial flow)",
                ["h = q Dᵥ / Kᵥ + q L² / (8 ΣKD) + (q L / (π Kᵣ)) ln(a Dᵣ / u),   u = π r₀"],
                "h midway water-table height above drain level; q design recharge; Dᵥ "
                "thickness of the vertical-flow zone (midway water table to drain level) and "
                "Kᵥ its vertical conductivity; ΣKD transmissivity of the layers carrying "
                "horizontal flow (from h/2 above the drains down to the barrier, at most L/4 "
                "below the drains); Kᵣ conductivity of the layer with radial flow around the "
                "drains and Dᵣ its thickness below the drains (at most L/4); a geometry factor "
                "for radial flow (1 in a homogeneous zone); u wet perimeter of the drain; r₀ "
                "effective drain radius.", nums))
        elif key == "glover-dumm":
            plus = crit.get("flow_depth") == "equivalent-plus-half-head"
            flat = crit.get("initial_shape") == "flat"
            fd_eq = "D<sub>f</sub> = d + h₀/2" if plus else "D<sub>f</sub> = d"
            c_txt = ("c = 4/π (flat initial water table, Glover)" if flat else
                     "c = 1.16 (fourth-degree parabola, Dumm)")
            y_t = zd - crit["final_depth"]
            fl = d.get("falling_discharge") or {}
            blocks.append((
                "Glover–Dumm (falling water table), flow depth "
                + ("d + h₀/2" if plus else "d, the equivalent depth"),
                [f"L = π [K D<sub>f</sub> t / (μ ln(c h₀ / hₜ))]<super>1/2</super>,   "
                 f"{fd_eq},   {c_txt}",
                 "q₀ = 2π K D<sub>f</sub> c h₀ / L²   (drain discharge per unit area at the "
                 "start of the drawdown, first term of the series)"],
                "L drain spacing; K hydraulic conductivity below drain level; D<sub>f</sub> "
                "depth of the flow region: " + ("the equivalent depth d at spacing L plus half "
                "the initial height (not conservative against the non-linear solution)" if plus
                else "the equivalent depth d at spacing L (conservative against the non-linear"
                " solution)") + "; t time allowed; μ drainable porosity; h₀ initial and hₜ "
                "required midway water-table height above drain level; c initial-shape "
                "coefficient; q₀ peak drain discharge.",
                f"K = {f.per_day(k2 if 'k' not in soil else soil['k'])}, "
                f"D<sub>f</sub> = {f.length(m.get('flow_depth_m'))}, t = {crit['days']:g} d, "
                f"μ = {soil.get('drainable_porosity', 0):.3f}, c = "
                f"{(4 / 3.141592653589793) if flat else 1.16:.3f}, h₀ = {f.length(h)}, "
                f"hₜ = {f.length(y_t)} → L = {f.spacing(L, 1)}"
                + (f"; at the design spacing {f.spacing(fl['spacing_m'])} "
                   f"(D<sub>f</sub> = {f.length(fl['flow_depth_m'])}): q₀ = "
                   f"{f.rate(fl['peak_m_per_d'])}, mean over the time allowed "
                   f"{f.rate(fl['mean_m_per_d'])}" if fl.get("peak_m_per_d") else "")))
    pp = s["inputs"].get("pipes") or {}
    share = pp.get("capacity_factor", 0.75)
    if pp.get("capacity_method", "manning") == "manning":
        blocks.append((
            "Pipe capacity (Manning, pipe flowing full)",
            ["Q<sub>full</sub> = (1/n) A R<super>2/3</super> s<super>1/2</super>,   "
             "A = π D<sub>p</sub>² / 4,   R = D<sub>p</sub> / 4",
             f"design flow Q = DC × A<sub>d</sub>   ≤   {share:.0%} of Q<sub>full</sub>"],
            "n Manning roughness (by material and size, templates/manning_n.csv); A flow "
            "section; R hydraulic radius; D<sub>p</sub> inside diameter; s pipe grade; DC "
            "drainage coefficient of the pipes; A<sub>d</sub> area drained through the reach.",
            None))
    else:
        blocks.append((
            "Pipe capacity (power laws for drain pipes, full flow)",
            ["Q<sub>full</sub> = C D<sub>p</sub><super>p</super> s<super>e</super>   "
             "(smooth: C = 50, p = 2.714, e = 0.572; corrugated: C = 22, p = 2.667, e = 0.5; "
             "laterals with inflow along them: C = 89 and 38)",
             f"design flow Q = DC × A<sub>d</sub>   ≤   {share:.0%} of Q<sub>full</sub>"],
            "Q<sub>full</sub> in m³/s with D<sub>p</sub> inside diameter in metres; s pipe "
            "grade; DC drainage coefficient of the pipes; A<sub>d</sub> area drained through "
            "the reach.", None))
    return blocks


def _sensitivity_rows(s, f, P):
    rows = [["Input varied (others at base)", "Low", "Base", "High"]]
    for r in s["sensitivity"]:
        cells = []
        for i, case in enumerate(r["cases"]):
            val = r["values"][i] if r.get("values") else None
            if r["input"] == "k" and val is None:
                vtxt = f"K × {r['factors'][i]:g}"
            elif r["role"] is None:
                vtxt = f"{val:.3f}" if val is not None else "–"
            elif r["role"] == "radius":
                vtxt = f.radius(val)
                name = (r.get("names") or [None] * 3)[i]
                if name:
                    vtxt += f" ({_type_label(name, f.units)})"
            elif r["role"] == "conductivity":
                vtxt = f.cond(val)
            else:
                vtxt = f.length(val)
            sp = f.spacing(case["spacing_m"], 1) if case["spacing_m"] else "no solution"
            crit = case.get("criterion")
            base_crit = r["cases"][1].get("criterion")
            tag = f" ({crit})" if crit and crit != base_crit else ""
            cells.append(P(f"{_esc(vtxt)}: <b>{sp}</b>{tag}", "cell"))
        rows.append([P(_esc(r["label"]), "cell")] + cells)
    return rows


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
        Every quantity on the sheet is shown in this system (feet, inches,
        acres, in/d... for "us").
    paper : {"A4", "Letter"}
    logo : str, optional
        Image file shown at the top of the first page.
    cautions : list of (title, text), optional
        Default: :func:`read_cautions`.

    Returns
    -------
    list of str
        Warnings about text the sheet could not show as given.
    """
    from reportlab.lib.pagesizes import A4, LETTER
    from reportlab.lib.units import mm
    from reportlab.platypus import CondPageBreak, Image, PageBreak, Paragraph, Spacer

    from ._text import sheet_text

    _fonts()
    st = _styles()
    f = _Fmt(units)
    L_u = f.unit("length")
    text_warnings = []

    def N(text):
        """A note written by a lower layer (SI text), in the sheet's units."""
        return _text_in_units(text, units)

    def T(text, name="text"):
        """User text, made safe for the sheet font and for reportlab markup."""
        return _esc(sheet_text(text, name, text_warnings))

    s = summary
    d = s["design"]
    proj = s["project"]
    q = s["quantities"]
    page = LETTER if paper == "Letter" else A4
    width = page[0] - 36 * mm
    story = []

    def P(text, style="body"):
        return Paragraph(text, st[style])

    method_name = METHOD_NAMES.get(d["method"], d["method"])
    # ---- page 1: summary
    if logo:
        story.append(Image(logo, width=30 * mm, height=15 * mm, kind="proportional",
                           hAlign="LEFT"))
    story.append(P(f"Subsurface drainage design — {T(proj.get('name', ''), 'site name')}",
                   "title"))
    meta = [["Client", T(proj.get("client", "") or "–")],
            ["Location", T(proj.get("location", "") or "–")],
            ["Designer", T(proj.get("designer", "") or "–")],
            ["Date", T(proj.get("date", "") or "–")],
            ["Project file", T(proj.get("file", ""))]]
    story.append(_table(meta, widths=[35 * mm, width - 35 * mm], header=False))
    story.append(P("Design", "h"))
    crit = s["inputs"]["criteria"]
    rows = [["Method", method_name],
            ["Governing criterion", CRITERION_NAMES.get(d["governing_criterion"],
                                                        d["governing_criterion"])],
            ["Drain depth", f.length(d["drain_depth_m"])],
            ["Drain spacing", f"{f.spacing(d['spacing_m'])} (computed "
                              f"{f.spacing(d['spacing_before_rounding_m'], 1)}, rounded down)"],
            ["Equivalent depth", f.length(d["equivalent_depth_m"])]]
    if d.get("flow_depth_m") is not None:
        rows.append(["Flow depth (falling water table)", f.length(d["flow_depth_m"])])
    if crit.get("recharge") is not None:
        rows.append(["Steady criterion", f"{f.rate(crit['recharge'])} with the water table "
                                         f"{f.length(crit['water_table_depth'])} below the "
                                         "surface midway"])
    if crit.get("days") is not None:
        rows.append(["Falling criterion", f"midway water table from "
                                          f"{f.length(crit['initial_depth'])} to "
                                          f"{f.length(crit['final_depth'])} below the surface "
                                          f"in {crit['days']:g} d"])
    rows.append(["Drainage coefficient (pipes)",
                 f.rate(s["inputs"]["drainage_coefficient_m_per_d"])])
    fl = d.get("falling_discharge")
    if fl and fl.get("peak_m_per_d") is not None:
        rows.append(["Peak drain discharge (falling criterion)",
                     f"{f.rate(fl['peak_m_per_d'])} at the start of the drawdown, "
                     f"{f.rate(fl['mean_m_per_d'])} on average over the time allowed"])
    story.append(_table([[a, P(b, "cell")] for a, b in rows], widths=[62 * mm, width - 62 * mm],
                        header=False))
    # names read from the GIS files that the sheet font cannot show: said up front
    name_warnings = []
    for fr in s["fields"]:
        sheet_text(fr["field_id"], "field id", name_warnings)
    warnings = list(d.get("warnings") or []) + list(dict.fromkeys(name_warnings))
    if warnings:
        story.append(P("Warnings", "h"))
        for w in warnings:
            story.append(P("⚠ " + _esc(w), "warn"))
    story.append(P("Key quantities", "h"))
    # pipe quantities straight from the take-off, so page 1 and the take-off agree
    piped = [t for t in s["takeoff"] if t.get("length_m")]
    perforated = [t for t in piped if t.get("perforated", t["kind"] == "lateral")]
    solid = [t for t in piped if t not in perforated]
    lat_total = sum(t["length_m"] for t in perforated)
    solid_total = sum(t["length_m"] for t in solid)
    qrows = [["Fields", "Area", "Laterals", "Perforated pipe", "Solid pipe", "Drained area",
              "Outlet flow"],
             [str(len(s["fields"])), f.area(q["field_area_ha"]), str(q["laterals"]),
              f.length(lat_total, 0), f.length(solid_total, 0),
              f.area(q["drained_area_ha"]), f.flow(q["outlet_flow_l_s"])]]
    story.append(_table(qrows))

    def by_size(rows):
        out = {}
        for t in rows:
            out[t["size"]] = out.get(t["size"], 0.0) + t["length_m"]
        return ", ".join(f"{k}: {f.length(v, 0)}" for k, v in out.items())

    kinds = []
    for t in solid:
        if t["kind"] not in kinds:
            kinds.append(t["kind"])
    story.append(Spacer(1, 3))
    story.append(P(f"Perforated pipe (laterals) by size — {by_size(perforated)}. Solid pipe "
                   f"({', '.join(kinds)}) by size — {by_size(solid)}. As in the take-off.",
                   "small"))
    if s["outlets"]:
        def where(o):
            if o.get("geographic"):
                lat, lon = o["y"], o["x"]
                return (f"{abs(lat):.6f}° {'N' if lat >= 0 else 'S'}, "
                        f"{abs(lon):.6f}° {'E' if lon >= 0 else 'W'}")
            return f"E {o['x']:.1f}, N {o['y']:.1f} ({_esc(o.get('crs') or 'file CRS')})"
        story.append(P("Outlets of the network: " + "; ".join(
            f"{T(o['field_id'], 'field id')} at {where(o)}" for o in s["outlets"]), "small"))
    story.append(Spacer(1, 4))
    story.append(_image(figures_png["plan"], width * 0.92, fit=True))

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
        trows.append([f.length(r["drain_depth_m"]), f.spacing(r.get("steady_spacing_m"), 1),
                      f.spacing(r.get("falling_spacing_m"), 1),
                      f.spacing(r["governing_spacing_m"], 1),
                      _show_density(r["lateral_m_per_ha"], units)])
    story.append(_table(trows))
    story.append(P("Spacings before rounding; the design spacing is the governing spacing at "
                   "the chosen depth, rounded down.", "small"))

    # ---- page 3: method, inputs, sensitivity, references
    story.append(PageBreak())
    story.append(P("Method and equations (as computed)", "h"))
    for title, eqs, symbols, numbers in _equations(s, f):
        story.append(P(_esc_keep(title), "h2"))
        for e in eqs:
            story.append(P(e, "eq"))
        story.append(P("where " + symbols, "sym"))
        if numbers:
            story.append(P("Here: " + numbers, "sym"))
    for n in d["notes"]:
        story.append(P("• " + _esc(N(n)), "small"))
    story.append(P("Inputs", "h"))
    soil = s["inputs"]["soil"]
    irows = [["Input", "Value", "Source"]]
    src_soil = T(soil.get("source", "project file"), "soil.source")
    src_crit = T(crit.get("source", "project file"), "criteria.source")
    top = 0.0
    for i, ly in enumerate(soil.get("layers") or [], start=1):
        mu = ly.get("drainable_porosity")
        irows.append([P(f"Layer {i}{' ' + T(ly['name']) if ly.get('name') else ''} "
                        f"({f.length(top)} – {f.length(top + ly['thickness'])})", "cell"),
                      f.cond(ly["k"]) + (f", μ {mu:.3f}" if mu is not None else ""),
                      P(src_soil, "cell")])
        top += ly["thickness"]
    at_drain = s["inputs"].get("soil_at_drain_depth", {})
    for key, label in (("k", "Hydraulic conductivity K"), ("k_above", "K above drain level"),
                       ("k_below", "K below drain level"),
                       ("k_vertical", "Vertical K (top layer)")):
        value = soil.get(key, at_drain.get(key) if soil.get("layers") else None)
        if value is not None:
            src = src_soil if key in soil else "layers, thickness-weighted at drain level"
            irows.append([label, f.cond(value), P(src, "cell")])
    if soil.get("interface_depth") is not None:
        irows.append(["Layer interface depth", f.length(soil["interface_depth"]),
                      P(src_soil, "cell")])
    irows.append(["Barrier depth", f.length(soil["barrier_depth"]), P(src_soil, "cell")])
    mu = soil.get("drainable_porosity", at_drain.get("drainable_porosity"))
    if mu is not None:
        irows.append(["Drainable porosity", f"{mu:.3f}", P(src_soil, "cell")])
    for key, label, fmt in (("recharge", "Design recharge", f.rate),
                            ("water_table_depth", "Water-table depth midway", f.length),
                            ("initial_depth", "Initial water-table depth", f.length),
                            ("final_depth", "Final water-table depth", f.length)):
        if crit.get(key) is not None:
            irows.append([label, fmt(crit[key]), P(src_crit, "cell")])
    if crit.get("days") is not None:
        irows.append(["Time allowed", f"{crit['days']:g} d", P(src_crit, "cell")])
    dr = s["inputs"]["drains"]
    irows.append(["Effective drain radius", f.radius(dr["radius_m"]),
                  P("templates/drain_radius.csv or project file", "cell")])
    irows.append(["Drain depths compared", ", ".join(f.length(z) for z in dr["depths_m"]),
                  P("project file", "cell")])
    irows.append(["Drainage coefficient (pipes)",
                  f.rate(s["inputs"]["drainage_coefficient_m_per_d"]), P("project file", "cell")])
    story.append(_table(irows, widths=[55 * mm, 40 * mm, width - 95 * mm]))
    story.append(P("Sensitivity of the design spacing", "h"))
    story.append(_table(_sensitivity_rows(s, f, P),
                        widths=[50 * mm] + [(width - 50 * mm) / 3] * 3))
    story.append(P("Design spacing before rounding (narrowest of the criteria; the criterion "
                   "is named where it differs from the base case), with one input at its low or "
                   "high value and the others at their base values.", "small"))
    story.append(P("Other methods at the design depth", "h"))
    mrows = [["Method", "Spacing", "Equivalent depth"]]
    for m in s["methods"]:
        mrows.append([METHOD_NAMES.get(m["method"], m["method"]),
                      f.spacing(m["spacing_m"], 1) if m["spacing_m"] else
                      P(_esc(m["note"] or "–"), "cell"),
                      f.length(m.get("equivalent_depth_m"))])
    story.append(_table(mrows, widths=[45 * mm, 45 * mm, 45 * mm]))
    story.append(P("References", "h"))
    for ref in s["references"]:
        story.append(P(_esc(ref), "small"))

    story += _uncertainty_section(s, figures_png, P, units, width)

    # ---- fields, pipes
    story.append(CondPageBreak(45 * mm))
    story.append(P("Fields", "hl"))
    frows = [["Field", "Area", "Spacing", "Laterals", "Lateral length", "Main length",
              "Drained area", "Outlet flow"]]
    for fr in s["fields"]:
        frows.append([T(fr["field_id"], "field id"), f.area(fr.get("field_area_ha")),
                      f.spacing(fr.get("spacing_m")), str(fr.get("laterals", "–")),
                      f.length(fr.get("lateral_length_m"), 0),
                      f.length(fr.get("main_length_m"), 0), f.area(fr.get("drained_area_ha")),
                      f.flow(fr.get("outlet_flow_l_s"))])
    story.extend(_long_tables(frows, font_size=7.5))
    story.append(CondPageBreak(45 * mm))
    story.append(P("Quantity take-off", "hl"))
    trows = [["Item", "Material", "Size", "Quantity"]]
    for t in s["takeoff"]:
        qty = f.length(t["length_m"], 1) if t["length_m"] else f"{t['count']} pcs"
        kind = t["kind"] + (" (perforated)" if t.get("perforated") else "")
        trows.append([kind, t["material"] or "–", t["size"], qty])
    story.extend(_long_tables(trows, chunk=25))
    story.append(P("Whole job; per-field quantities are in summary.json. Perforated pipe is "
                   "the laterals only; connectors, sub-mains, mains, trunk and the outlet "
                   "pipe are solid.", "small"))
    if "profiles" in figures_png:
        story.append(P("Profiles", "h"))
        story.append(_image(figures_png["profiles"], width * 0.9))
    story.append(P("Grade, capacity and layout warnings", "h"))
    problems = s["pipe_problems"]
    if not problems:
        story.append(P("No grade, cover, junction or velocity problem found."))
    story.append(P("Outlet: " + _esc(N(s.get("outlet_check", ""))) + ".", "small"))
    for line in s.get("pipe_problem_summary") or [
            f"{v['reach_id']}: {v['problem']} -> {v['fix']}" for v in problems]:
        story.append(P("• " + _esc(N(line).replace(" -> ", " — ")), "small"))
    if problems:
        story.append(P("Every place is listed in pipe_schedule.csv (warnings column) and the "
                       "pipe_warnings layer.", "small"))
    for n in s["layout_notes"] + s["pipe_notes"]:
        story.append(P("• " + _esc(N(n)), "small"))

    # ---- season simulation
    if s.get("simulation"):
        story.append(PageBreak())
        story.extend(_simulation_page(s["simulation"], figures_png, f, P, width))

    # ---- cautions
    story.append(PageBreak())
    story.append(P("Cautions", "h"))
    for title, text in (cautions or read_cautions()):
        story.append(P(f"<b>{_esc(title)}</b>", "h2"))
        story.append(P(_esc(text)))
        story.append(Spacer(1, 4))

    # ---- appendix: pipe schedule
    story.append(PageBreak())
    story.append(P("Appendix — Pipe schedule", "hl"))
    qu, vu = f.unit("flow"), f.unit("velocity")
    reaches = s["reaches"]
    if len(reaches) > MAX_SCHEDULE_ROWS:
        mains = [r for r in reaches if r["kind"] != "lateral"]
        shown = mains[:MAX_SCHEDULE_ROWS]
        story.append(P(f"{len(reaches)} reaches: the sheet lists "
                       f"{'the first ' if len(mains) > len(shown) else ''}{len(shown)} main "
                       "reaches; every reach, laterals included, is in pipe_schedule.csv.",
                       "small"))
    else:
        shown = reaches
    prow = [["Reach", f"Length ({L_u})", "Area", f"Flow ({qu})", "Grade", "Size",
             P(f"Usable capacity, "
               f"{(s['inputs'].get('pipes') or {}).get('capacity_factor', 0.75):.0%} of full "
               f"({qu})", "cell"), f"V ({vu})", "Used",
             f"Inverts up/down ({L_u})", f"Cover ({L_u})"]]
    for r in shown:
        prow.append([T(r["reach_id"]), f"{f.to(r['length_m'], 'length'):.0f}",
                     f.area(r["drained_area_ha"]),
                     f"{f.to(r['flow_l_s'], 'flow'):.3f}", f"{r['grade']:.2%}", r["size"] or "–",
                     f"{f.to(r['capacity_l_s'], 'flow'):.3f}" if r.get("capacity_l_s") else "–",
                     f"{f.to(r['velocity_m_s'], 'velocity'):.2f}" if r.get("velocity_m_s")
                     else "–",
                     f"{r['capacity_used_pct']:.0f} %" if r.get("capacity_used_pct") else "–",
                     (f"{f.to(r['invert_up_m'], 'length'):.2f} / "
                      f"{f.to(r['invert_down_m'], 'length'):.2f}"
                      if r.get("invert_up_m") is not None else "–"),
                     f"{f.to(r['cover_min_m'], 'length'):.2f}"
                     if r.get("cover_min_m") is not None else "–"])
    story.extend(_long_tables(prow, font_size=6.5))

    site = sheet_text(proj.get("name", ""), "site name", [])
    _build_pdf(story, path, page, footer="drainplan design sheet — " + site,
               title="Drainage design — " + site)
    return text_warnings


def _simulation_page(sim, figures_png, f, P, width):
    """The season-simulation page: figure, key spacings, method agreement, assumptions."""
    from reportlab.lib.units import mm

    def sew(v, unit=True):
        """SEW30 in cm·d (its unit), or in in·d on a US sheet."""
        if v is None:
            return "–"
        text = f"{v / 2.54:.0f}" if f.us else f"{v:.0f}"
        return f"{text} {'in·d' if f.us else 'cm·d'}" if unit else text

    def note(text):
        return _esc(_text_in_units(text, f.units))

    sew_u = "in·d" if f.us else "cm·d"
    depth30 = "11.8 in" if f.us else "30 cm"
    out = [P("Season simulation over the weather record", "h")]
    w = sim["weather"]
    model = ("non-linear Boussinesq flow between the drains with the equivalent depth"
             if sim["model"] == "boussinesq" else "the de Zeeuw–Hellinga linear reservoir")
    pet = ("PET from the file" if w["pet_source"] == "file" else
           f"PET by Hargreaves–Samani at latitude {w['latitude_deg']:.1f}°")
    basis = "mean season" if sim["target_basis"] == "mean" else "worst season"
    out.append(P(f"Water table midway between drains simulated day by day with {model}, "
                 f"weather {_esc(w['file'])} ({w['first_day']} to {w['last_day']}, "
                 f"{w['days']} days; {pet}); season {_esc(sim['season'])}. SEW30 is the sum "
                 f"of the water-table height above {depth30} depth over the days of a season "
                 f"({sew_u}; Sieben 1964), shown for the {basis}.", "small"))
    if "simulation" in figures_png:
        out.append(_image(figures_png["simulation"], width * 0.95, fit=True))
    other = "reservoir" if sim.get("other_model") == "reservoir" else "Boussinesq"
    rows = [["Spacing", "SEW30\nmean", "SEW30\nworst", "Wet\nd/yr", "Drain", "Runoff",
             "Peak\ndrain", "99 %\ndrain", "Full pipes\nd/yr", f"SEW30\n{other}"]]
    yrs = w["days"] / 365.25
    per_year = f.unit("recharge").replace("/d", "/yr")

    def amount(v_mm, nd):
        return f"{float(f.to(v_mm / 1000 / yrs, 'recharge')):.{nd}f} {per_year}"

    for name, r in sim["key_spacings"].items():
        rows.append([f"{f.spacing(r['spacing_m'])} ({name})", sew(r["sew30_cm_d"], False),
                     sew(r["sew30_worst_year_cm_d"], False), f"{r['wet_days_per_year']:.1f}",
                     amount(r["drain_mm"], 1 if f.us else 0),
                     amount(r["runoff_mm"], 2 if f.us else 1),
                     f.rate(r["peak_drain_mm_d"] / 1000), f.rate(r["p99_drain_mm_d"] / 1000),
                     f"{r.get('pipe_full_days_per_year', float('nan')):.1f}",
                     sew(r.get("other_model", {}).get("sew30_cm_d"), False)])
    out.append(_table(rows, font_size=6.8, widths=[w_ * mm for w_ in
                                                   (28, 13, 13, 12, 22, 19, 18, 18, 16, 15)]))
    out.append(P(f"SEW30 in {sew_u} per season; wet days: days with the water table within "
                 f"{depth30} of the surface; drain and runoff per year; full pipes: days a "
                 "year the drains carry more than the pipe drainage coefficient "
                 f"({f.rate(sim['drainage_coefficient_m_per_d'])}).", "small"))
    a = sim["agreement"]
    out.append(P("Method agreement", "h2"))
    arows = [["Analytic spacing (before rounding)", f.spacing(a["analytic_spacing_m"])],
             ["Design spacing", f.spacing(a["design_spacing_m"])],
             [f"SEW30 at the design spacing ({basis})", sew(a["design_sew30_cm_d"])]]
    t = sim.get("target")
    if t is not None:
        arows.append([f"SEW30 target ({basis})", sew(t["target_cm_d"])])
        arows.append(["Widest spacing within the target",
                      f.spacing(t["spacing_m"]) if t.get("spacing_m") else "none simulated"])
    out.append(_table(arows, widths=[75 * mm, 45 * mm], header=False))
    if a.get("reason"):
        out.append(P(f"Simulated {f.spacing(a['simulated_spacing_m'])} against analytic "
                     f"{f.spacing(a['analytic_spacing_m'])} ({a['ratio']:.2f}×): "
                     + note(a["reason"])))
    elif t is None:
        out.append(P(f"At the design spacing the simulated SEW30 is "
                     f"{sew(a['design_sew30_cm_d'])} in the {basis}; no SEW30 target was "
                     "given, so no simulated spacing is derived."))
    else:
        out.append(P(f"At the design spacing the simulated SEW30 is "
                     f"{sew(a['design_sew30_cm_d'])} in the {basis}; " + note(t["note"]) + "."))
    out.append(P("Assumptions of the simulation", "h2"))
    for text in sim["assumptions"]:
        out.append(P("• " + note(text), "small"))
    return out


from .units import text_in_units as _text_in_units  # noqa: E402  (notes in US units)


def _type_label(name, units):
    """A pipe type name as words, sizes in the sheet's units ('gravel envelope 12 in')."""
    import re

    from .units import to_display

    def size(m):
        mm = float(m.group(1))
        if units == "us":
            return f" {float(to_display(mm / 1000.0, 'radius', units)):.0f} in"
        return f" {mm:g} mm"

    text = re.sub(r"-?(\d+(?:\.\d+)?)mm", size, name)
    text = re.sub(r"-?(\d+)in\b", r" \1 in", text)
    text = re.sub(r"(\d)row\b", r"\1 row", text)
    return text.replace("-", " ").replace("  ", " ").strip()


def _show_density(v, units):
    from .units import show

    return show(v, "density", units, 0)


def _esc_keep(text):
    """Escape a title that may carry <sub>/<super> markup of our own."""
    return text


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
    """Text for a reportlab paragraph: markup characters escaped, and characters the sheet
    font cannot show replaced by '?' (never an empty box; see drainplan._text)."""
    from ._text import sheet_text

    text = sheet_text(text, "text", [])
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
