"""Matplotlib figures: plan map of a layout (more figures join as the design grows).

Functions take data objects and an optional ``ax``, return the axes, and never
call ``show()``. The look is plain: thin blue laterals, a heavy dark main,
grey exclusions, a scale bar in metres and a north arrow.
"""

from __future__ import annotations

import numpy as np

__all__ = ["plan_map", "save_figure"]

_STYLE = {
    "field_edge": "#3b3b3b", "field_fill": "#f4f1e8", "lateral": "#2a6fb0",
    "connector": "#8a8a8a", "main": "#1b1b1b", "outlet": "#c0392b",
    "exclusion": "#b9b9b9", "unconnected": "#d98c1a",
}


def _nice_length(span):
    raw = span / 5.0
    exp = 10 ** np.floor(np.log10(raw))
    for m in (1, 2, 5, 10):
        if m * exp >= raw:
            return m * exp
    return 10 * exp


def plan_map(layers, *, ax=None, title=None):
    """Plan of a layout: fields, laterals, connectors, mains, outlets, exclusions.

    Parameters
    ----------
    layers : dict of str -> GeoDataFrame
        Layers as produced by :func:`drainplan.layout_plan.plan_layout`, in a
        projected CRS in metres.
    ax : matplotlib Axes, optional
    title : str, optional

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
                                   ("unconnected", s["unconnected"], 1.0, "needs sub-main"),
                                   ("mains", s["main"], 2.2, "collector main")):
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
    span = max(x1 - x0, y1 - y0)
    pad = 0.06 * span
    ax.set_xlim(x0 - pad, x1 + pad)
    ax.set_ylim(y0 - 2 * pad, y1 + pad)
    # scale bar
    bar = _nice_length(x1 - x0)
    bx, by = x0, y0 - 1.3 * pad
    ax.plot([bx, bx + bar], [by, by], color="black", linewidth=3, solid_capstyle="butt")
    ax.text(bx + bar / 2, by + 0.25 * pad, f"{bar:g} m", ha="center", va="bottom", fontsize=8)
    # north arrow (grid north of the projected CRS)
    nx, ny = x1, y0 - 1.6 * pad
    ax.annotate("N", xy=(nx, ny + 1.2 * pad), xytext=(nx, ny), ha="center", va="top",
                fontsize=9, arrowprops=dict(arrowstyle="-|>", color="black", lw=1.2))
    ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.0, 1.0), fontsize=8,
              frameon=False)
    if title:
        ax.set_title(title, fontsize=11)
    return ax


def save_figure(fig, path, *, dpi=150):
    """Save a figure as PNG without timestamps in its metadata (deterministic bytes)."""
    fig.savefig(path, dpi=dpi, bbox_inches="tight", metadata={"Software": None})


def profile_plot(profile, *, ax=None, title=None, invert_label="pipe invert"):
    """Long section of one pipe: ground line and invert against chainage.

    Parameters
    ----------
    profile : dict
        ``chainage``, ``ground`` and ``invert`` arrays [m].
    """
    import matplotlib.pyplot as plt

    if ax is None:
        _, ax = plt.subplots(figsize=(8, 3))
    ch, ground, inv = profile["chainage"], profile["ground"], profile["invert"]
    ax.plot(ch, ground, color="#6b4f2a", linewidth=1.4, label="ground")
    ax.plot(ch, inv, color="#2a6fb0", linewidth=1.4, label=invert_label)
    ax.fill_between(ch, inv, ground, color="#e9e2d0", alpha=0.6, linewidth=0)
    ax.set_xlabel("chainage (m)")
    ax.set_ylabel("elevation (m)")
    ax.grid(True, color="#dddddd", linewidth=0.5)
    ax.legend(fontsize=8, frameon=False)
    if title:
        ax.set_title(title, fontsize=10)
    return ax
