"""Write a design's deliverables into one folder, atomically.

The folder gets the design sheet (PDF), a GeoPackage with every layer, the pipe
schedule (CSV) and ``summary.json`` holding every number on the sheet. Files
are first written into a temporary folder beside the target, which is renamed
into place only when everything succeeded.
"""

from __future__ import annotations

import io
import json
import math
import os
import shutil
import tempfile
from pathlib import Path

from .errors import InputError

__all__ = ["write_design_outputs", "check_output_folder", "render_figures", "OUTPUT_FILES"]

OUTPUT_FILES = ("design_sheet.pdf", "design.gpkg", "pipe_schedule.csv", "summary.json")


def _png(fig):
    from .plots import save_figure

    buf = io.BytesIO()
    save_figure(fig, buf)
    import matplotlib.pyplot as plt

    plt.close(fig)
    return buf.getvalue()


def render_figures(result):
    """PNG bytes of the sheet's figures: plan, section, falling (if any), profiles (if any)."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from .plots import cross_section, falling_water_table, key_profiles, plan_map

    lp, fd = result.layout_plan, result.figures
    out = {}
    metric = {k: v.to_crs(lp.work_crs) for k, v in lp.layers.items()}
    fig, ax = plt.subplots(figsize=(8, 6.2))
    plan_map(metric, ax=ax)
    out["plan"] = _png(fig)
    fig, ax = plt.subplots(figsize=(8, 3.0))
    cross_section(fd, ax=ax)
    out["section"] = _png(fig)
    if "falling_t" in fd:
        fig, axes = plt.subplots(1, 2, figsize=(8, 2.8))
        falling_water_table(fd, axes=axes)
        fig.tight_layout()
        out["falling"] = _png(fig)
    if "simulation" in fd:
        from .plots import season_simulation_panels

        fig = plt.figure(figsize=(8, 6.4))
        season_simulation_panels(fd["simulation"], fig=fig, units=fd.get("units", "metric"))
        out["simulation"] = _png(fig)
    fig, axes = plt.subplots(1, 2, figsize=(8, 2.8))
    if key_profiles(result.pipes_plan.design, axes=axes) is not None:
        fig.tight_layout()
        out["profiles"] = _png(fig)
    else:
        plt.close(fig)
    return out


def _clean(obj):
    """JSON-safe copy: NaN/inf -> None, numpy scalars -> Python."""
    if isinstance(obj, dict):
        return {str(k): _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    if hasattr(obj, "item") and not isinstance(obj, (str, bytes)):
        obj = obj.item()
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    return obj


def check_output_folder(outdir, *, overwrite=False):
    """Refuse a file, or a non-empty folder without ``overwrite``; return the Path."""
    out = Path(outdir)
    if out.exists() and not out.is_dir():
        raise InputError(f"{out} exists and is not a folder", param="output")
    if out.exists() and any(out.iterdir()) and not overwrite:
        raise InputError(f"{out} is not empty; use --overwrite to replace its contents",
                         param="output")
    return out


def write_design_outputs(result, outdir, *, overwrite=False, progress=None):
    """Write the deliverables of ``result`` into ``outdir``.

    Refuses a non-empty ``outdir`` unless ``overwrite``. Returns the list of
    paths written.
    """
    from .gisio import write_layers
    from .pipes_plan import schedule_csv
    from .sheet import build_sheet

    say = progress or (lambda text: None)
    out = check_output_folder(outdir, overwrite=overwrite)
    parent = out.resolve().parent
    if not parent.exists():
        raise InputError(f"folder {parent} does not exist", param="output")
    tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}.", dir=parent))
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(tmp, 0o777 & ~umask)          # mkdtemp makes it private; a result folder is not
    try:
        say("figures")
        figs = render_figures(result)
        say("design sheet")
        rep = result.project.report
        build_sheet(result.summary, figs, str(tmp / "design_sheet.pdf"),
                    units=rep.get("units", "metric"), paper=rep.get("paper", "A4"),
                    logo=rep.get("logo"))
        say("GIS layers and schedule")
        layers = dict(result.layout_plan.layers)
        layers.update(result.pipes_plan.layers)
        write_layers(tmp / "design.gpkg", layers)
        (tmp / "pipe_schedule.csv").write_text(schedule_csv(result.pipes_plan.design),
                                               encoding="utf-8")
        (tmp / "summary.json").write_text(
            json.dumps(_clean(result.summary), indent=2, sort_keys=True) + "\n",
            encoding="utf-8")
        (tmp / "plan.png").write_bytes(figs["plan"])
        if out.exists():
            backup = Path(tempfile.mkdtemp(prefix=f".{out.name}.old.", dir=parent))
            os.rmdir(backup)
            os.replace(out, backup)
            os.replace(tmp, out)
            shutil.rmtree(backup, ignore_errors=True)
        else:
            os.replace(tmp, out)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    return [out / name for name in (*OUTPUT_FILES, "plan.png")]
