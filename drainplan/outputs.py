"""Write a design's deliverables into one folder, safely.

The folder gets the design sheet (PDF), a GeoPackage with every layer, the pipe
schedule (CSV), ``summary.json`` holding every number on the sheet and a plan
PNG. Files are first written into a temporary folder; they are moved into place
only when everything succeeded, with Ctrl-C and SIGTERM held while they move.

Data safety: a manifest (``.drainplan-outputs.json``) records every file a design
wrote with its SHA-256. ``--overwrite`` replaces drainplan's own outputs only: a
folder holding any other file or folder (or a file drainplan wrote but someone
has since changed) is refused with the names, and so is a folder holding an input
of the project. Nothing drainplan did not create is ever deleted. A link to a
folder is written through; a read-only folder is refused; temporary folders left
by an interrupted run are cleared on the next run.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import shutil
import tempfile
from pathlib import Path

from . import _background as background
from .errors import InputError

__all__ = ["write_design_outputs", "write_output_folder", "check_output_folder",
           "render_figures", "load_report_libraries", "OUTPUT_FILES", "MANIFEST"]

OUTPUT_FILES = ("design_sheet.pdf", "design.gpkg", "pipe_schedule.csv", "summary.json")

#: The manifest of a design folder: which files drainplan wrote, with their SHA-256.
MANIFEST = ".drainplan-outputs.json"
_STAGING = ".drainplan-staging"


#: Figures made in a second process while this one makes the others (where the
#: machine allows; see drainplan._background): about half the drawing time.
_FIGURES_BESIDE = ("simulation", "profiles")


def render_figures(result, names=None):
    """PNG bytes of the sheet's figures (all, or those in ``names``): plan, section,
    falling, probability, simulation and profiles where the design has them, in the
    project's report units (see :func:`drainplan.plots.design_figures`)."""
    from .plots import DESIGN_FIGURES, design_figures

    return design_figures(result, names=DESIGN_FIGURES if names is None else names)


def load_report_libraries():
    """Import matplotlib's figure and image backend and reportlab (half a second on a
    fresh process), e.g. while waiting for a part of the design running elsewhere."""
    import matplotlib.backends.backend_agg  # noqa: F401
    import matplotlib.figure  # noqa: F401
    import reportlab.platypus  # noqa: F401

    from . import plots  # noqa: F401
    from .sheet import _fonts

    _fonts()                    # the sheet font read and registered once


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


def _sha256(path):
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _read_manifest(folder):
    """{file name: [accepted sha256, ...]} of a design folder ({} without a manifest)."""
    try:
        data = json.loads((Path(folder) / MANIFEST).read_text(encoding="utf-8"))
        files = data["files"]
        return {str(k): ([v] if isinstance(v, str) else [str(x) for x in v])
                for k, v in files.items()}
    except (OSError, ValueError, KeyError, TypeError, AttributeError):
        return {}


def _manifest_text(files):
    return json.dumps({"written_by": "drainplan", "files": files}, indent=2,
                      sort_keys=True) + "\n"


def _within(path, folder):
    try:
        Path(path).resolve().relative_to(Path(folder).resolve())
        return True
    except ValueError:
        return False


def _names(paths, limit=5):
    names = [p if isinstance(p, str) else p.name + ("/" if p.is_dir() else "") for p in paths]
    more = f" and {len(names) - limit} more" if len(names) > limit else ""
    return ", ".join(sorted(names)[:limit]) + more


def check_output_folder(outdir, *, overwrite=False, inputs=()):
    """Check a design's output folder before any work; return the Path given.

    Parameters
    ----------
    outdir : str or Path
        The folder (created if missing; a link to a folder is written through).
    overwrite : bool
        Replace drainplan's own outputs in a non-empty folder.
    inputs : iterable of paths
        The project's input files: a folder holding any of them is refused.

    Raises
    ------
    InputError
        A file in the way, a non-empty folder without ``overwrite``, a folder
        holding files drainplan did not write or the project's inputs (named), a
        missing parent folder, a read-only folder.
    """
    from .gisio import _pid_alive, _read_only, clear_stale_temps

    out = Path(outdir)
    if out.is_symlink() and not out.exists():
        raise InputError(f"{out} is a link to {os.readlink(out)}, which does not exist",
                         param="output")
    real = out.resolve() if out.exists() else Path(os.path.abspath(out))
    if real.exists() and not real.is_dir():
        raise InputError(f"{out} exists and is not a folder", param="output")
    parent = real.parent
    if not parent.exists():
        raise InputError(f"folder {parent} does not exist", param="output")
    clear_stale_temps(parent, real.name)
    held = [Path(i) for i in inputs if i is not None and _within(i, real)]
    if held:
        raise InputError(f"{out} holds input files of the project ({_names(held)}); "
                         "write the design into another folder", param="output")
    if not real.exists():
        if _read_only(parent):
            raise InputError(f"cannot create {out}: folder {parent} is read-only",
                             param="output")
        return out
    if _read_only(real):
        raise InputError(f"cannot write into {out}: the folder is read-only", param="output")
    entries = []
    for e in real.iterdir():
        if e.name.startswith(_STAGING + "."):
            pid = e.name[len(_STAGING) + 1:].split(".")[0].removeprefix("dp")
            if pid.isdigit() and _pid_alive(int(pid)):
                raise InputError(f"another drainplan run is writing into {out}",
                                 param="output")
            shutil.rmtree(e, ignore_errors=True)       # left by an interrupted run
            continue
        entries.append(e)
    if not entries:
        return out
    if not overwrite:
        raise InputError(f"{out} is not empty; use --overwrite to replace drainplan's "
                         "outputs in it", param="output")
    manifest = _read_manifest(real)
    foreign = [e for e in entries if e.name != MANIFEST and not (
        e.name in manifest and e.is_file() and not e.is_symlink()
        and _sha256(e) in manifest[e.name])]
    if foreign:
        why = ("drainplan did not write them" if manifest else
               "the folder has no drainplan manifest")
        raise InputError(f"{out} holds files that --overwrite will not replace "
                         f"({_names(foreign)}: {why}); move them or choose another folder",
                         param="output")
    return out


def write_design_outputs(result, outdir, *, overwrite=False, progress=None):
    """Write the deliverables of ``result`` into ``outdir``.

    Refuses a non-empty ``outdir`` unless ``overwrite``, and with it refuses a
    folder holding anything drainplan did not write there (see
    :func:`check_output_folder`). Returns the list of paths written.
    """
    from .gisio import layers_writer
    from .network.plan import schedule_csv
    from .sheet import build_sheet

    say = progress or (lambda text: None)
    project = result.project
    inputs = project.input_files() if hasattr(project, "input_files") else ()

    def write_data(tmp):
        layers = dict(result.layout_plan.layers)
        layers.update(result.pipes_plan.layers)
        layers_writer(layers)(str(tmp / "design.gpkg"))
        (tmp / "pipe_schedule.csv").write_text(schedule_csv(result.pipes_plan.design),
                                               encoding="utf-8")
        (tmp / "summary.json").write_text(
            json.dumps(_clean(result.summary), indent=2, sort_keys=True) + "\n",
            encoding="utf-8")

    def write_files(tmp):
        # the GIS layers, schedule and summary need nothing from the figures or the
        # sheet, and some figures nothing from the others: made beside them (in second
        # processes where a core is free)
        with background.start(write_data, tmp) as data:
            say("figures")
            load_report_libraries()     # once, before the process splits
            from .plots import DESIGN_FIGURES

            with background.start(render_figures, result, _FIGURES_BESIDE) as beside:
                figs = render_figures(result, [n for n in DESIGN_FIGURES
                                               if n not in _FIGURES_BESIDE])
                figs.update(beside.result())
            figs = {n: figs[n] for n in DESIGN_FIGURES if n in figs}
            say("design sheet")
            rep = project.report
            build_sheet(result.summary, figs, str(tmp / "design_sheet.pdf"),
                        units=rep.get("units", "metric"), paper=rep.get("paper", "A4"),
                        logo=rep.get("logo"))
            (tmp / "plan.png").write_bytes(figs["plan"])
            say("GIS layers and schedule")
            data.result()

    return write_output_folder(outdir, write_files, names=(*OUTPUT_FILES, "plan.png"),
                               overwrite=overwrite, inputs=inputs)


def write_output_folder(outdir, write_files, *, names, overwrite=False, inputs=()):
    """Write a command's output files into a folder, all or none, replacing only
    drainplan's own files.

    Parameters
    ----------
    outdir : str or Path
    write_files : callable
        ``write_files(tmp)`` writes every file of ``names`` into the folder ``tmp``.
    names : sequence of str
        The files written (recorded with their SHA-256 in the manifest).
    overwrite : bool
    inputs : iterable of paths
        Input files that must not lie in the folder.

    Returns
    -------
    list of Path
    """
    from .gisio import signals_deferred, temp_prefix

    out = check_output_folder(outdir, overwrite=overwrite, inputs=inputs)
    real = out.resolve() if out.exists() else Path(os.path.abspath(out))
    fresh = not real.exists()
    where = real.parent if fresh else real
    prefix = temp_prefix(real.name) if fresh else f"{_STAGING}.dp{os.getpid()}."
    tmp = Path(tempfile.mkdtemp(prefix=prefix, dir=where))
    try:
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o777 & ~umask)      # mkdtemp makes it private; a result folder is not
        write_files(tmp)
        new = {name: _sha256(tmp / name) for name in names}
        if fresh:
            (tmp / MANIFEST).write_text(_manifest_text(new), encoding="utf-8")
            with signals_deferred():
                os.replace(tmp, real)
        else:
            old = _read_manifest(real)
            # while files move, the manifest accepts the old and the new versions, so an
            # interruption can never make drainplan's own files look foreign
            both = {k: sorted(set(old.get(k, [])) | {new[k]} if k in new else old[k])
                    for k in set(old) | set(new)}
            (tmp / (MANIFEST + ".1")).write_text(_manifest_text(both), encoding="utf-8")
            (tmp / (MANIFEST + ".2")).write_text(_manifest_text(new), encoding="utf-8")
            with signals_deferred():
                os.replace(tmp / (MANIFEST + ".1"), real / MANIFEST)
                for name in names:
                    os.replace(tmp / name, real / name)
                for name in old:
                    if name not in new and name == Path(name).name and name != MANIFEST \
                            and (real / name).is_file():
                        os.unlink(real / name)      # an output of ours no longer made
                os.replace(tmp / (MANIFEST + ".2"), real / MANIFEST)
            shutil.rmtree(tmp, ignore_errors=True)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    return [out / name for name in names]
