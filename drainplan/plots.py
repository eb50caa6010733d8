"""Matplotlib figures: plan map of a layout (more figures join as the design grows).

Functions take data objects and an optional ``ax``, return the axes, and never
call ``show()``. The look is plain: thin blue laterals, a heavy dark main,
grey exclusions, a scale bar and a north arrow. Every figure takes ``units``
("metric" or "us") and labels its axes and scale in that system (through
:mod:`drainplan.units`); the data stay in metres.
"""

from __future__ import annotations

import numpy as np

__all__ = ["plan_map", "save_figure", "cross_section", "falling_water_table", "profile_plot",
           "key_profiles", "spacing_against_k", "design_figures", "simulated_water_table",
           "sew30_against_spacing", "drain_exceedance", "season_simulation_panels"]


def _u(units):
    """(factor from metres, unit label) for lengths in a unit system."""
    from .units import display_unit, to_display

    return float(to_display(1.0, "length", units)), display_unit("length", units)

_STYLE = {
    "field_edge": "#3b3b3b", "field_fill": "#f4f1e8", "lateral": "#2a6fb0",
    "connector": "#8a8a8a", "main": "#1b1b1b", "outlet": "#c0392b",
    "exclusion": "#b9b9b9", "unconnected": "#d98c1a", "submain": "#5b3a8c",
    "trunk": "#0b6e4f",
}


def _nice_length(span):
    raw = span / 5.0
    exp = 10 ** np.floor(np.log10(raw))
    for m in (1, 2, 5, 10):
        if m * exp >= raw:
            return m * exp
    return 10 * exp


def plan_map(layers, *, ax=None, title=None, units="metric"):
    """Plan of a layout: fields, laterals, connectors, mains, outlets, exclusions.

    Parameters
    ----------
    layers : dict of str -> GeoDataFrame
        Layers as produced by :func:`drainplan.layout_plan.plan_layout`, in a
        projected CRS in metres.
    ax : matplotlib Axes, optional
    title : str, optional
    units : {"metric", "us"}
        Unit of the scale bar (metres or feet).

    Returns
    -------
    matplotlib.axes.Axes
    """
    import matplotlib.pyplot as plt
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    if ax is None:
        _, ax = plt.subplots(figsize=(8, 8))
    s = _STYLE
    fld = layers["field"]
    fld.plot(ax=ax, facecolor=s["field_fill"], edgecolor=s["field_edge"], linewidth=1.0)
    handles = [Patch(facecolor=s["field_fill"], edgecolor=s["field_edge"], label="field")]
    if any(len(getattr(g, "interiors", ())) or any(len(p.interiors) for p in getattr(g, "geoms", ()))
           for g in fld.geometry):
        handles.append(Patch(facecolor="white", edgecolor=s["field_edge"],
                             label="hole in field (not drained)"))
    ex = layers.get("exclusions")
    if ex is not None and len(ex):
        zone = ex.copy()
        zone["geometry"] = zone.geometry.buffer(np.asarray(zone["setback_m"], float))
        zone.plot(ax=ax, facecolor="none", edgecolor=s["exclusion"], linestyle="--",
                  linewidth=0.8)
        ex.plot(ax=ax, color=s["exclusion"], markersize=25, linewidth=2)
        handles.append(Patch(facecolor=s["exclusion"], label="exclusion (dashed: setback)"))
    for name, color, lw, label in (("laterals", s["lateral"], 0.8, "lateral"),
                                   ("connectors", s["connector"], 0.8, "connector (solid pipe)"),
                                   ("unconnected", s["unconnected"], 1.0,
                                    "unconnected (see reason)"),
                                   ("submains", s["submain"], 1.4, "sub-main (solid pipe)"),
                                   ("mains", s["main"], 2.2, "collector main"),
                                   ("trunk", s["trunk"], 3.0, "trunk main to the outlet")):
        g = layers.get(name)
        if g is not None and len(g):
            g.plot(ax=ax, color=color, linewidth=lw)
            handles.append(Line2D([], [], color=color, linewidth=lw, label=label))
    out = layers.get("outlets")
    if out is not None and len(out):
        out.plot(ax=ax, color=s["outlet"], markersize=40, marker="v", zorder=5)
        handles.append(Line2D([], [], color=s["outlet"], marker="v", linestyle="none",
                              label="outlet"))
    for _, row in fld.iterrows():
        c = row.geometry.representative_point()
        ax.annotate(str(row["field_id"]), (c.x, c.y), ha="center", va="center", fontsize=9,
                    color="#444444", bbox=dict(boxstyle="round,pad=0.2", fc="white",
                                               ec="none", alpha=0.7))
    ax.set_aspect("equal")
    ax.set_axis_off()
    x0, y0, x1, y1 = fld.total_bounds
    for name in ("outlets", "trunk"):      # the outlet may lie beyond the fields
        g = layers.get(name)
        if g is not None and len(g):
            b = g.total_bounds
            x0, y0, x1, y1 = min(x0, b[0]), min(y0, b[1]), max(x1, b[2]), max(y1, b[3])
    span = max(x1 - x0, y1 - y0)
    pad = 0.06 * span
    ax.set_xlim(x0 - pad, x1 + pad)
    ax.set_ylim(y0 - 2 * pad, y1 + pad)
    # scale bar, a round length in the display unit
    fac, lu = _u(units)
    bar_d = _nice_length((x1 - x0) * fac)
    bar = bar_d / fac
    bx, by = x0, y0 - 1.3 * pad
    ax.plot([bx, bx + bar], [by, by], color="black", linewidth=3, solid_capstyle="butt")
    ax.text(bx + bar / 2, by + 0.25 * pad, f"{bar_d:g} {lu}", ha="center", va="bottom",
            fontsize=8)
    # north arrow (grid north of the projected CRS)
    nx, ny = x1, y0 - 1.6 * pad
    ax.annotate("N", xy=(nx, ny + 1.2 * pad), xytext=(nx, ny), ha="center", va="top",
                fontsize=9, arrowprops=dict(arrowstyle="-|>", color="black", lw=1.2))
    ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.0, 1.0), fontsize=8,
              frameon=False)
    if title:
        ax.set_title(title, fontsize=11)
    return ax


def save_figure(fig, path, *, dpi=150, tight=True):
    """Save a figure as PNG without timestamps in its metadata (deterministic bytes).

    ``tight`` crops to the drawn content, at the cost of drawing the figure twice;
    figures laid out with fixed margins pass ``tight=False``.
    """
    fig.savefig(path, dpi=dpi, bbox_inches="tight" if tight else None,
                metadata={"Software": None})


def profile_plot(profile, *, ax=None, title=None, invert_label="pipe invert",
                 units="metric"):
    """Long section of one pipe: ground line and invert against chainage.

    Parameters
    ----------
    profile : dict
        ``chainage``, ``ground`` and ``invert`` arrays [m].
    units : {"metric", "us"}
    """
    import matplotlib.pyplot as plt

    if ax is None:
        _, ax = plt.subplots(figsize=(8, 3))
    fac, lu = _u(units)
    ch, ground, inv = (np.asarray(profile[k], float) * fac
                       for k in ("chainage", "ground", "invert"))
    ax.plot(ch, ground, color="#6b4f2a", linewidth=1.4, label="ground")
    ax.plot(ch, inv, color="#2a6fb0", linewidth=1.4, label=invert_label)
    ax.fill_between(ch, inv, ground, color="#e9e2d0", alpha=0.6, linewidth=0)
    ax.set_xlabel(f"chainage ({lu})")
    ax.set_ylabel(f"elevation ({lu})")
    ax.grid(True, color="#dddddd", linewidth=0.5)
    ax.legend(fontsize=8, frameon=False)
    if title:
        ax.set_title(title, fontsize=10)
    return ax


def cross_section(fig_data, *, ax=None, units=None):
    """Soil profile between drains: surface, layers, barrier, drains and the steady
    water table (depths below the surface).

    ``units`` defaults to ``fig_data["units"]`` (else metric).
    """
    import matplotlib.pyplot as plt
    from matplotlib.patches import Ellipse

    if ax is None:
        _, ax = plt.subplots(figsize=(8, 3.2))
    units = units or fig_data.get("units", "metric")
    fac, lu = _u(units)
    L = fig_data["spacing"] * fac
    zd, zb = fig_data["drain_depth"] * fac, fig_data["barrier_depth"] * fac
    x = np.asarray(fig_data["x"], float) * fac
    xs = np.concatenate([x - L, x, x + L])
    band = 0.12 * zb
    ax.axhspan(zb, zb + band, color="#9c8f7a", alpha=0.8)
    ax.text(-0.5 * L, zb + band / 2, "barrier (slowly permeable layer)", ha="center",
            va="center", fontsize=7.5, color="white")
    for zl in fig_data.get("layer_bottoms") or []:
        if zl * fac < zb - 1e-9:
            ax.axhline(zl * fac, color="#8a7a5a", linestyle=":", linewidth=0.8)
    zi = fig_data.get("interface_depth")
    if zi is not None and zi * fac < zb:
        ax.axhline(zi * fac, color="#8a7a5a", linestyle=":", linewidth=1)
        ax.text(-L + 0.02 * L, zi * fac - 0.02 * zb, "layer interface", fontsize=7,
                color="#6b5a3a")
    ax.axhline(0.0, color="#3b6e2a", linewidth=1.5)
    ax.text(-L + 0.02 * L, -0.015 * zb, "ground surface", fontsize=7.5, color="#3b6e2a",
            va="bottom")
    if "steady_depth" in fig_data:
        wt = np.concatenate([np.asarray(fig_data["steady_depth"], float) * fac] * 3)
        ax.plot(xs, wt, color="#2a6fb0", linewidth=1.6, label="steady water table (design)")
        ax.axhline(fig_data["steady_target"] * fac, color="#2a6fb0", linestyle="--",
                   linewidth=0.8, label="required water-table depth")
    rx = max(0.03 * L / 10, 0.06 * fac)
    for k in (-1, 0, 1, 2):
        ax.add_patch(Ellipse((k * L, zd), width=2 * rx, height=0.035 * zb, color="#1b1b1b",
                             label="drain" if k == 0 else None))
    # spacing dimension below drain level, where no water table runs
    ya = zd + 0.3 * (zb - zd)
    ax.annotate("", xy=(0, ya), xytext=(L, ya),
                arrowprops=dict(arrowstyle="<->", color="#444444", lw=0.8))
    ax.plot([0, 0], [zd, ya], color="#888888", linewidth=0.5, linestyle=":")
    ax.plot([L, L], [zd, ya], color="#888888", linewidth=0.5, linestyle=":")
    ax.text(L / 2, ya + 0.02 * zb, f"L = {L:.4g} {lu}", ha="center", va="top", fontsize=8)
    ax.set_xlim(-L, 2 * L)
    ax.set_ylim(zb + band, -0.06 * zb)
    ax.set_xlabel(f"distance ({lu})")
    ax.set_ylabel(f"depth below surface ({lu})")
    ax.legend(fontsize=7, loc="upper center", bbox_to_anchor=(0.5, -0.22), ncol=3,
              frameon=False)
    ax.set_title(f"Cross-section: drains at {zd:.3g} {lu}, barrier at {zb:.3g} {lu}",
                 fontsize=10)
    return ax


def falling_water_table(fig_data, *, axes=None, units=None):
    """Falling water table: midway depth against time, and shapes between drains."""
    import matplotlib.pyplot as plt

    if axes is None:
        _, axes = plt.subplots(1, 2, figsize=(8, 3))
    units = units or fig_data.get("units", "metric")
    fac, lu = _u(units)
    a1, a2 = axes
    t, mid = fig_data["falling_t"], np.asarray(fig_data["falling_mid_depth"], float) * fac
    top = -0.05 * fig_data["drain_depth"] * fac
    bottom = (fig_data["drain_depth"] + 0.1) * fac
    a1.plot(t, mid, color="#2a6fb0", linewidth=1.6, label="midway water table")
    a1.axhline(fig_data["falling_target"] * fac, color="#c0392b", linestyle="--",
               linewidth=0.8, label="required depth")
    a1.axvline(fig_data["falling_days"], color="#888888", linestyle=":", linewidth=0.8)
    a1.set_ylim(bottom, top)
    a1.set_xlabel("time (d)")
    a1.set_ylabel(f"depth below surface ({lu})")
    a1.legend(fontsize=7, frameon=False)
    a1.set_title("Midway depth over time (series)", fontsize=9)
    x = np.asarray(fig_data["x"], float) * fac
    for (tt, prof), style in zip(sorted(fig_data["falling_profiles"].items()),
                                 ("-", "--", ":")):
        a2.plot(x, np.asarray(prof, float) * fac, color="#2a6fb0", linestyle=style,
                linewidth=1.3, label=f"t = {tt:g} d")
    a2.set_ylim(bottom, top)
    a2.set_xlabel(f"distance from drain ({lu})")
    a2.legend(fontsize=7, frameon=False)
    a2.set_title("Water table between drains", fontsize=9)
    return axes


def key_profiles(design, *, axes=None, units="metric"):
    """Long sections of a pipe design: the trunk and mains from the outlet up (or the
    longest main) and the flattest lateral.

    Returns the axes, or None when the design has no profiles (no elevations).
    """
    import matplotlib.pyplot as plt

    prof = design.profiles
    if "outlet up" in prof:             # the network's backbone: trunk and mains
        lats = [r for r in design.reaches if r["kind"] == "lateral" and r["reach_id"] in prof]
        if axes is None:
            _, axes = plt.subplots(1, 2, figsize=(8, 2.8))
        p = prof["outlet up"]
        profile_plot(p, ax=axes[0], title="from the outlet up: " +
                     " \u2192 ".join(p.get("carriers", [])[:4]) +
                     (" ..." if len(p.get("carriers", [])) > 4 else ""), units=units)
        axes[0].set_xlabel(f"distance from the outlet ({_u(units)[1]})")
        if lats:
            flat = min(lats, key=lambda r: r["grade"])
            profile_plot(prof[flat["reach_id"]], ax=axes[1],
                         title=f"lateral {flat['reach_id']} (least fall, grade "
                               f"{flat['grade']:.2%})", units=units)
        return axes
    mains = [k for k in prof if k.endswith("-M")]
    lats = [r for r in design.reaches if r["kind"] == "lateral" and r["reach_id"] in prof]
    if not mains and not lats:
        return None
    if axes is None:
        _, axes = plt.subplots(1, 2, figsize=(8, 2.8))
    if mains:
        k = max(mains, key=lambda m: prof[m]["chainage"][-1])
        profile_plot(prof[k], ax=axes[0], title=f"main {k}", units=units)
    if lats:
        flat = min(lats, key=lambda r: r["grade"])
        profile_plot(prof[flat["reach_id"]], ax=axes[1],
                     title=f"lateral {flat['reach_id']} (least fall, grade {flat['grade']:.2%})",
                     units=units)
    return axes


def spacing_against_k(rows, *, ax=None, units="metric", title=None, k_label=None):
    """Spacing against hydraulic conductivity (log K axis).

    Parameters
    ----------
    rows : sequence of (k [m/d], spacing [m])
    units : {"metric", "us"}
    k_label : str, optional
        Axis label for K (default "hydraulic conductivity K (unit)"); say here
        when K above and below the drains are scaled together.

    Notes
    -----
    Ticks on the log axis are the 1-2-5 values in plain decimals, minor ticks
    unlabelled, so labels never run into each other over a short range.
    """
    import matplotlib.pyplot as plt
    from matplotlib.ticker import FixedLocator, FuncFormatter, LogLocator, NullFormatter

    from .units import display_unit, to_display

    if ax is None:
        _, ax = plt.subplots(figsize=(6, 4))
    k = np.array([r[0] for r in rows], float)
    L = np.array([r[1] for r in rows], float)
    ku, lu = display_unit("conductivity", units), display_unit("spacing", units)
    kd = to_display(k, "conductivity", units)
    ax.plot(kd, to_display(L, "spacing", units), marker="o", color="#2a6fb0")
    ax.set_xscale("log")
    lo, hi = float(np.nanmin(kd)), float(np.nanmax(kd))
    decades = 10.0 ** np.arange(np.floor(np.log10(lo)) - 1, np.ceil(np.log10(hi)) + 1)
    subs = (1.0, 2.0, 5.0)
    for subs in ((1.0, 2.0, 5.0), tuple(range(1, 10))):
        ticks = [d * m for d in decades for m in subs if lo <= d * m <= hi]
        if len(ticks) >= 2:
            break
    if len(ticks) >= 2:
        ax.xaxis.set_major_locator(LogLocator(base=10.0, subs=subs))
    else:
        ax.xaxis.set_major_locator(FixedLocator([float(f"{lo:.2g}"), float(f"{hi:.2g}")]))
    ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:.6g}"))
    ax.xaxis.set_minor_locator(LogLocator(base=10.0, subs=np.arange(2, 10) * 1.0))
    ax.xaxis.set_minor_formatter(NullFormatter())
    ax.set_xlabel(k_label or f"hydraulic conductivity K ({ku})")
    ax.set_ylabel(f"drain spacing ({lu})")
    ax.grid(True, which="both", color="#dddddd", linewidth=0.5)
    if title:
        ax.set_title(title, fontsize=10)
    return ax


def _png(fig, dpi=150):
    """The figure drawn once at ``dpi`` as PNG bytes, RGB without an alpha channel (the
    figures are opaque: an alpha channel would make the PDF carry a soft mask of every
    image), with no date in the file."""
    import io

    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from PIL import Image

    canvas = FigureCanvasAgg(fig)
    fig.set_dpi(dpi)
    canvas.draw()
    w, h = canvas.get_width_height(physical=True)
    img = Image.frombuffer("RGBA", (w, h), canvas.buffer_rgba(), "raw", "RGBA", 0, 1)
    buf = io.BytesIO()
    img.convert("RGB").save(buf, "PNG", dpi=(dpi, dpi))
    return buf.getvalue()


#: The sheet's figures, in the order they are made.
DESIGN_FIGURES = ("plan", "section", "falling", "probability", "simulation", "profiles")


def design_figures(result, units=None, names=DESIGN_FIGURES):
    """PNG bytes of the sheet's figures: plan, section, falling (if any), probability
    (if any), simulation (if any), profiles (if any).

    Figures are made with :class:`matplotlib.figure.Figure` (no pyplot state), in the
    project's report units unless ``units`` is given; ``names`` picks some of
    :data:`DESIGN_FIGURES` (the others are not made).
    """
    from matplotlib.figure import Figure

    units = units or result.project.report.get("units", "metric")
    lp, fd = result.layout_plan, result.figures
    out = {}
    # fixed margins instead of tight bounding boxes: each figure is drawn once
    if "plan" in names:
        metric = {k: v.to_crs(lp.work_crs) for k, v in lp.layers.items()}
        fig = Figure(figsize=(8, 6.2))
        fig.subplots_adjust(left=0.01, right=0.74, bottom=0.01, top=0.99)
        plan_map(metric, ax=fig.add_subplot(), units=units)
        out["plan"] = _png(fig)
    if "section" in names:
        fig = Figure(figsize=(8, 3.6))
        fig.subplots_adjust(left=0.09, right=0.98, bottom=0.27, top=0.91)
        cross_section(fd, ax=fig.add_subplot(), units=units)
        out["section"] = _png(fig)
    if "falling" in names and "falling_t" in fd:
        fig = Figure(figsize=(8, 2.8))
        fig.subplots_adjust(left=0.09, right=0.98, bottom=0.17, top=0.9, wspace=0.12)
        falling_water_table(fd, axes=fig.subplots(1, 2), units=units)
        out["falling"] = _png(fig)
    if "probability" in names and "probability" in fd:          # spacing under uncertainty
        fig = Figure(figsize=(8, 2.8))
        fig.subplots_adjust(left=0.09, right=0.98, bottom=0.17, top=0.9)
        probability_curve(fd["probability"], ax=fig.add_subplot(), units=units)
        out["probability"] = _png(fig)
    if "simulation" in names and "simulation" in fd:
        fig = Figure(figsize=(8, 6.4))
        season_simulation_panels(fd["simulation"], fig=fig, units=units)
        out["simulation"] = _png(fig)
    if "profiles" in names:
        fig = Figure(figsize=(8, 2.8))
        fig.subplots_adjust(left=0.09, right=0.98, bottom=0.17, top=0.9, wspace=0.28)
        if key_profiles(result.pipes_plan.design, axes=fig.subplots(1, 2),
                        units=units) is not None:
            out["profiles"] = _png(fig)
    return out


# ---- season simulation figures -------------------------------------------------------

def simulated_water_table(dates, depths, *, ax=None, units="metric", drain_depth=None,
                          title=None):
    """Midway water-table depth over a period for a few spacings.

    Parameters
    ----------
    dates : numpy.ndarray of datetime64[D]
    depths : dict of float -> numpy.ndarray
        Spacing [m] -> daily midway water-table depth below the surface [m].
    drain_depth : float, optional
        Drawn as a line [m].
    """
    import matplotlib.pyplot as plt

    from .units import display_unit, to_display

    if ax is None:
        _, ax = plt.subplots(figsize=(8, 3))
    lu = display_unit("length", units)
    colors = ("#1f5f99", "#2a9d8f", "#c26a1a", "#7a3b8f")
    t = dates.astype("datetime64[D]").astype("O")
    for (L, z), color in zip(sorted(depths.items()), colors):
        ax.plot(t, to_display(z, "length", units), color=color, linewidth=1.1,
                label=f"L = {to_display(L, 'spacing', units):.0f} {display_unit('spacing', units)}")
    ax.axhline(to_display(0.30, "length", units), color="#c0392b", linestyle="--",
               linewidth=0.8, label="SEW30 depth (11.8 in)" if units == "us"
               else "30 cm (SEW30)")
    if drain_depth is not None:
        ax.axhline(to_display(drain_depth, "length", units), color="#555555", linestyle=":",
                   linewidth=0.8, label="drain level")
        ax.set_ylim(to_display(drain_depth * 1.05, "length", units), 0.0)
    else:
        ax.invert_yaxis()
    ax.set_ylabel(f"midway water-table depth ({lu})")
    ax.grid(True, color="#dddddd", linewidth=0.5)
    ax.legend(fontsize=7, frameon=False, loc="upper left", bbox_to_anchor=(1.0, 1.0))
    ax.figure.autofmt_xdate()
    if title:
        ax.set_title(title, fontsize=10)
    return ax


def sew30_against_spacing(spacings, sew30, *, ax=None, units="metric", target=None,
                          other=None, marks=None, title=None, label="Boussinesq"):
    """SEW30 per season against drain spacing, with the target.

    Parameters
    ----------
    spacings : array_like
        Drain spacings [m].
    sew30 : array_like
        SEW30 [cm d] per season (mean or worst year, as labelled by the caller); drawn in
        in·d with ``units="us"``.
    target : float, optional
        SEW30 target [cm d].
    other : (label, values) or (label, spacings, values), optional
        The other model's SEW30 (on ``spacings`` unless given), drawn dashed.
    marks : dict of str -> float, optional
        Spacings to mark with vertical lines (label -> spacing [m]).
    """
    import matplotlib.pyplot as plt

    from .units import display_unit, to_display

    if ax is None:
        _, ax = plt.subplots(figsize=(4, 3))
    su = display_unit("spacing", units)
    # SEW30 is defined in cm·d; a US sheet shows in·d
    k, sew_u = (1 / 2.54, "in·d") if units == "us" else (1.0, "cm·d")
    L = to_display(np.asarray(spacings, float), "spacing", units)
    ax.plot(L, k * np.asarray(sew30, float), marker="o", markersize=3, color="#1f5f99",
            linewidth=1.4, label=label)
    if other is not None:
        lo = L if len(other) == 2 else to_display(np.asarray(other[1], float), "spacing", units)
        ax.plot(lo, k * np.asarray(other[-1], float), color="#888888", linestyle="--",
                linewidth=1.0, label=other[0])
    if target is not None:
        ax.axhline(k * target, color="#c0392b", linestyle="--", linewidth=0.9,
                   label=f"target {k * target:.3g} {sew_u}")
    for (label, value), style in zip((marks or {}).items(), (":", "-.", "--")):
        if value is not None:
            ax.axvline(to_display(value, "spacing", units), color="#444444", linestyle=style,
                       linewidth=0.9, label=label)
    ax.set_xlabel(f"drain spacing ({su})")
    ax.set_ylabel(f"SEW30 per season ({sew_u})")
    ax.grid(True, color="#dddddd", linewidth=0.5)
    ax.legend(fontsize=7, frameon=False)
    if title:
        ax.set_title(title, fontsize=10)
    return ax


def drain_exceedance(discharges, *, ax=None, units="metric", coefficient=None, title=None):
    """Exceedance curve of daily drain discharge, with the pipe drainage coefficient.

    Parameters
    ----------
    discharges : dict of str -> numpy.ndarray
        Label -> daily drain discharge [m/d].
    coefficient : float, optional
        Pipe drainage coefficient [m/d], drawn as a line.
    """
    import matplotlib.pyplot as plt

    from .units import display_unit, to_display

    if ax is None:
        _, ax = plt.subplots(figsize=(4, 3))
    qu = display_unit("recharge", units)
    colors = ("#1f5f99", "#2a9d8f", "#c26a1a", "#7a3b8f")
    for (label, q), color in zip(discharges.items(), colors):
        qs = np.sort(np.asarray(q, float))[::-1]
        frac = 100.0 * np.arange(1, qs.size + 1) / qs.size
        ax.plot(frac, to_display(qs, "recharge", units), color=color, linewidth=1.2,
                label=label)
    if coefficient is not None:
        ax.axhline(to_display(coefficient, "recharge", units), color="#c0392b",
                   linestyle="--", linewidth=0.9, label="pipe drainage coefficient")
    ax.set_xscale("log")
    ax.set_xlim(100.0 / max(len(q) for q in discharges.values()), 100.0)
    ax.set_xlabel("% of days exceeded")
    ax.set_ylabel(f"drain discharge ({qu})")
    ax.grid(True, which="both", color="#dddddd", linewidth=0.5)
    ax.legend(fontsize=7, frameon=False)
    if title:
        ax.set_title(title, fontsize=10)
    return ax


def season_simulation_panels(data, *, fig=None, units="metric"):
    """The season-simulation figure: water table over the wettest season (top), SEW30
    against spacing with the target (bottom left), drain-discharge exceedance with the
    pipe drainage coefficient (bottom right).

    Parameters
    ----------
    data : dict
        ``dates``, ``year``, ``depths`` (spacing -> daily depth), ``spacings``, ``sew30``,
        ``other`` (label, values) or None, ``target``, ``basis``, ``marks``,
        ``discharges`` (spacing -> daily m/d), ``coefficient``, ``drain_depth``.

    Returns
    -------
    list of matplotlib Axes
    """
    import matplotlib.pyplot as plt

    from .units import display_unit, to_display

    if fig is None:
        fig = plt.figure(figsize=(8, 6.4))
    gs = fig.add_gridspec(2, 2, left=0.09, right=0.83, bottom=0.08, top=0.95,
                          hspace=0.5, wspace=0.32)
    ax1 = fig.add_subplot(gs[0, :])
    simulated_water_table(data["dates"], data["depths"], ax=ax1, units=units,
                          drain_depth=data.get("drain_depth"),
                          title=f"Wettest season ({data['year']}): midway water table")
    ax2 = fig.add_subplot(gs[1, 0])
    basis = "mean season" if data.get("basis", "mean") == "mean" else "worst season"
    sew30_against_spacing(data["spacings"], data["sew30"], ax=ax2, units=units,
                          target=data.get("target"), other=data.get("other"),
                          marks=data.get("marks"), title=f"SEW30, {basis}",
                          label=data.get("label", "Boussinesq"))
    ax3 = fig.add_subplot(gs[1, 1])
    su = display_unit("spacing", units)
    drain_exceedance({f"L = {to_display(L, 'spacing', units):.0f} {su}": q
                      for L, q in sorted(data["discharges"].items())}, ax=ax3, units=units,
                     coefficient=data.get("coefficient"), title="Daily drain discharge")
    return [ax1, ax2, ax3]


def probability_curve(data, *, ax=None, units="metric"):
    """Probability that a drain spacing meets the design criteria, against spacing.

    Parameters
    ----------
    data : dict
        ``spacings`` [m] and ``probability`` arrays, ``confidence``,
        ``spacing_at_confidence`` [m], ``design_spacing`` [m], ``varied``
        (names of the inputs that were sampled); as made by
        :func:`drainplan.design.design` (``figures["probability"]``).
    units : {"metric", "us"}
    """
    import matplotlib.pyplot as plt

    from .units import display_unit, to_display

    if ax is None:
        _, ax = plt.subplots(figsize=(8, 3))
    lu = display_unit("spacing", units)
    x = to_display(np.asarray(data["spacings"], float), "spacing", units)
    ax.plot(x, data["probability"], color="#2a6fb0", linewidth=1.6,
            label="probability of meeting the criteria")
    c, Lc = data["confidence"], data["spacing_at_confidence"]
    if np.isfinite(Lc):
        xc = float(to_display(Lc, "spacing", units))
        ax.axhline(c, color="#888888", linestyle=":", linewidth=0.8)
        ax.axvline(xc, color="#888888", linestyle=":", linewidth=0.8)
        ax.annotate(f"{c * 100:.0f} %: {xc:.1f} {lu}", (xc, c), xytext=(6, 6),
                    textcoords="offset points", fontsize=7)
    xd = float(to_display(data["design_spacing"], "spacing", units))
    pd = float(np.interp(xd, x, data["probability"]))
    ax.plot([xd], [pd], marker="o", color="#c0392b", linestyle="none",
            label=f"design spacing {xd:.1f} {lu}")
    ax.set_ylim(-0.02, 1.02)
    ax.set_xlabel(f"drain spacing ({lu})")
    ax.set_ylabel("probability")
    ax.grid(True, color="#dddddd", linewidth=0.5)
    ax.legend(fontsize=7, frameon=False, loc="upper right")
    ax.set_title("Probability that a spacing meets the criteria (varied: "
                 + ", ".join(data["varied"]) + ")", fontsize=9)
    return ax
