"""Map of a batch: fields coloured by their drain spacing (matplotlib)."""

from __future__ import annotations

import numpy as np

__all__ = ["spacing_map", "write_spacing_map"]


def spacing_map(fields, *, ax=None, title=None):
    """Fields coloured by ``spacing_m``; fields without a spacing hatched grey.

    Parameters
    ----------
    fields : GeoDataFrame
        The ``fields`` layer of a batch (any CRS; a geographic one is drawn in its
        local UTM zone).
    ax : matplotlib Axes, optional
    title : str, optional

    Returns
    -------
    matplotlib Axes
    """
    import matplotlib.pyplot as plt

    if ax is None:
        _, ax = plt.subplots(figsize=(8, 7))
    gdf = fields
    if gdf.crs is not None and gdf.crs.is_geographic and len(gdf):
        gdf = gdf.to_crs(gdf.estimate_utm_crs())
    designed = gdf[np.isfinite(gdf["spacing_m"].to_numpy(float))]
    other = gdf[~np.isfinite(gdf["spacing_m"].to_numpy(float))]
    if len(designed):
        designed.plot(column="spacing_m", ax=ax, cmap="viridis", edgecolor="#333333",
                      linewidth=0.3, legend=True,
                      legend_kwds={"label": "drain spacing [m]", "shrink": 0.7})
    if len(other):
        other.plot(ax=ax, facecolor="#dddddd", edgecolor="#777777", linewidth=0.3,
                   hatch="///")
    ax.set_aspect("equal")
    ax.set_xticks([])
    ax.set_yticks([])
    ax.set_ylabel("")
    n_other = len(other)
    ax.set_xlabel(f"{len(designed)} fields designed"
                  + (f"; {n_other} not designed (hatched: see their warnings)"
                     if n_other else ""), fontsize=9)
    if title:
        ax.set_title(title, fontsize=11)
    return ax


def write_spacing_map(fields, path, *, overwrite=False, title=None):
    """Write :func:`spacing_map` as a PNG, atomically."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from .gisio import write_atomic
    from .plots import save_figure

    fig, ax = plt.subplots(figsize=(8, 7))
    spacing_map(fields, ax=ax, title=title)
    try:
        write_atomic(path, lambda tmp: save_figure(fig, tmp), overwrite=overwrite)
    finally:
        plt.close(fig)
    return path
