"""Data safety: drainplan never destroys a user's files.

``--overwrite`` replaces drainplan's own outputs only (those its manifest records,
unchanged); a folder holding anything else, or an input of the project, is refused
with the names; files beside the output folder always survive; a link to a folder is
written through; a read-only folder is refused; an interrupted run (Ctrl-C, SIGTERM,
a failure inside a writer) leaves neither a partial output nor a temporary file, and
the temporary folders of a killed run are cleared on the next run.
"""

import hashlib
import json
import os
import shutil
import signal
import subprocess
import sys
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from drainplan.errors import InputError
from drainplan.outputs import MANIFEST, OUTPUT_FILES, check_output_folder

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_fields"
FIELDS = DEMO / "fields.geojson"
NAMES = (*OUTPUT_FILES, "plan.png")


def _sha(path):
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def _tree(folder):
    """{relative path: sha256} of every file under ``folder`` (hidden ones too)."""
    folder = Path(folder)
    return {str(p.relative_to(folder)): _sha(p) for p in sorted(folder.rglob("*"))
            if p.is_file()}


def _dead_pid():
    pid = 4_000_000
    while True:
        try:
            os.kill(pid, 0)
        except ProcessLookupError:
            return pid
        except PermissionError:
            pass
        pid -= 1


@pytest.fixture(scope="module")
def result():
    """The demo design, computed once (the writing is what these tests exercise)."""
    from drainplan.design import design
    from drainplan.project import load_project

    return design(load_project(DEMO / "project.toml"))


@pytest.fixture
def quick_sheet(monkeypatch):
    """Replace the figures and the PDF by small stand-ins (they are tested elsewhere);
    the GeoPackage, schedule and summary are the real ones."""
    import drainplan.outputs as outputs
    import drainplan.sheet as sheet

    monkeypatch.setattr(outputs, "render_figures",
                        lambda result, names=None: {"plan": b"PNG stand-in"})
    calls = []

    def fake_sheet(summary, figs, path, **kw):
        calls.append(path)
        Path(path).write_bytes(b"%PDF stand-in " + str(len(calls)).encode())

    monkeypatch.setattr(sheet, "build_sheet", fake_sheet)
    return calls


def _write(result, out, **kw):
    from drainplan.outputs import write_design_outputs

    return write_design_outputs(result, out, **kw)


# --------------------------------------------------------------------------- CLI


def test_overwrite_refuses_foreign_files(run, tmp_path):
    out = tmp_path / "out"
    (out / "sub").mkdir(parents=True)
    (out / "notes.txt").write_text("my notes")
    (out / "sub" / "contract.doc").write_text("signed")
    (tmp_path / "beside.txt").write_text("beside")
    before = _tree(tmp_path)
    r = run("design", DEMO / "project.toml", "-o", out, "--overwrite")
    assert r.exit_code == 2, r.output
    line = r.stderr.strip()
    assert line.count("\n") == 0 and "notes.txt" in line and "sub/" in line, line
    assert _tree(tmp_path) == before


def test_output_folder_holding_the_project_is_refused(run, tmp_path):
    proj = tmp_path / "farm"
    shutil.copytree(DEMO, proj)
    before = _tree(tmp_path)
    for target in (proj, tmp_path):          # the project folder, or a folder above it
        r = run("design", proj / "project.toml", "-o", target, "--overwrite")
        assert r.exit_code == 2, r.output
        assert "holds input files of the project" in r.stderr and "project.toml" in r.stderr
    assert _tree(tmp_path) == before


def test_overwrite_through_the_cli_keeps_neighbours(run, tmp_path):
    """A real design twice into one folder: the second run replaces the first's files,
    the files beside the folder are untouched."""
    out = tmp_path / "out"
    (tmp_path / "beside.txt").write_text("keep me")
    r = run("-q", "design", DEMO / "project.toml", "-o", out)
    assert r.exit_code == 0, r.output
    manifest = json.loads((out / MANIFEST).read_text())
    assert sorted(manifest["files"]) == sorted(NAMES)
    assert all(manifest["files"][n] == _sha(out / n) for n in NAMES)
    r = run("-q", "design", DEMO / "project.toml", "-o", out)
    assert r.exit_code == 2 and "--overwrite" in r.stderr
    r = run("-q", "design", DEMO / "project.toml", "-o", out, "--overwrite")
    assert r.exit_code == 0, r.output
    assert (tmp_path / "beside.txt").read_text() == "keep me"
    assert sorted(p.name for p in out.iterdir()) == sorted((*NAMES, MANIFEST))
    assert sorted(p.name for p in tmp_path.iterdir()) == ["beside.txt", "out"]


# --------------------------------------------------------------- folder writer


def test_manifest_and_edited_output(result, quick_sheet, tmp_path):
    out = tmp_path / "out"
    _write(result, out)
    _write(result, out, overwrite=True)                   # our own files: replaced
    assert (out / "design_sheet.pdf").read_bytes().endswith(b"2")
    (out / "summary.json").write_text("{}  edited by hand\n")
    before = _tree(out)
    with pytest.raises(InputError, match="summary.json"):
        _write(result, out, overwrite=True)
    assert _tree(out) == before


def test_folder_without_manifest_is_not_ours(result, quick_sheet, tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    (out / "design.gpkg").write_text("a user's own file with our name")
    with pytest.raises(InputError, match="no drainplan manifest"):
        _write(result, out, overwrite=True)
    assert (out / "design.gpkg").read_text().startswith("a user's own")


def test_symlinked_output_is_written_through(result, quick_sheet, tmp_path):
    real = tmp_path / "real"
    real.mkdir()
    link = tmp_path / "link"
    link.symlink_to(real, target_is_directory=True)
    _write(result, link)
    assert link.is_symlink() and os.readlink(link) == str(real)
    assert sorted(p.name for p in real.iterdir()) == sorted((*NAMES, MANIFEST))
    _write(result, link, overwrite=True)
    assert link.is_symlink() and (real / "design.gpkg").exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["link", "real"]
    dangling = tmp_path / "dangling"
    dangling.symlink_to(tmp_path / "gone")
    with pytest.raises(InputError, match="does not exist"):
        _write(result, dangling)


def test_read_only_folder_is_refused(result, quick_sheet, tmp_path):
    out = tmp_path / "ro"
    out.mkdir()
    out.chmod(0o555)
    try:
        with pytest.raises(InputError, match="read-only"):
            _write(result, out, overwrite=True)
        with pytest.raises(InputError, match="read-only"):
            _write(result, out / "inner")
    finally:
        out.chmod(0o755)
    assert list(out.iterdir()) == []


def test_stale_temporary_folders_are_cleared(result, quick_sheet, tmp_path):
    dead = _dead_pid()
    stale = tmp_path / f".out.dp{dead}.abcd1234"
    stale.mkdir()
    (stale / "design.gpkg").write_text("half written")
    foreign = tmp_path / ".out.notours"                    # not drainplan's: left alone
    foreign.mkdir()
    live = tmp_path / f".out.dp{os.getpid()}.live1234"      # a running process's: left alone
    live.mkdir()
    _write(result, tmp_path / "out")
    assert not stale.exists() and foreign.exists() and live.exists()
    staging = tmp_path / "out" / f".drainplan-staging.dp{dead}.xyz12345"
    staging.mkdir()
    _write(result, tmp_path / "out", overwrite=True)
    assert not staging.exists()


@pytest.mark.parametrize("exc", [KeyboardInterrupt, RuntimeError])
def test_interrupted_writer_leaves_nothing(result, quick_sheet, monkeypatch, tmp_path, exc):
    import drainplan.network.plan as pp

    def boom(design):
        raise exc("stopped while writing")

    # a fresh folder: nothing appears
    out = tmp_path / "new"
    monkeypatch.setattr(pp, "schedule_csv", boom)
    with pytest.raises(exc):
        _write(result, out)
    assert list(tmp_path.iterdir()) == []
    # an existing design folder: the previous outputs stay as they were
    monkeypatch.undo()
    import drainplan.outputs as outputs
    import drainplan.sheet as sheet

    monkeypatch.setattr(outputs, "render_figures", lambda result, names=None: {"plan": b"PNG"})
    monkeypatch.setattr(sheet, "build_sheet", lambda s, f, path, **kw: Path(path).write_text("x"))
    _write(result, out)
    before = _tree(out)
    monkeypatch.setattr(pp, "schedule_csv", boom)
    with pytest.raises(exc):
        _write(result, out, overwrite=True)
    assert _tree(out) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["new"]


@settings(max_examples=20, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(names=st.lists(st.sampled_from(["notes.txt", "design.gpkg", "summary.json", "sub",
                                       "plan.png", "README", ".hidden", MANIFEST]),
                      unique=True, max_size=5),
       edit=st.booleans())
def test_overwrite_check_never_accepts_foreign(tmp_path_factory, names, edit):
    """Property: with --overwrite, a folder is accepted only if every entry is a file
    the manifest records unchanged; the check itself never removes a file."""
    out = tmp_path_factory.mktemp("o")
    mine = {}
    for n in names:
        if n == "sub":
            (out / n).mkdir()
            (out / n / "x").write_text("x")
        elif n != MANIFEST:
            (out / n).write_text(n)
            if n in NAMES:
                mine[n] = _sha(out / n)
    if MANIFEST in names:
        (out / MANIFEST).write_text(json.dumps({"files": mine}))
        if edit and mine:
            (out / next(iter(mine))).write_text("edited")
    before = _tree(out)
    foreign = [n for n in names if n != MANIFEST and not (
        MANIFEST in names and n in mine and not (edit and n == next(iter(mine))))]
    if foreign:
        with pytest.raises(InputError) as e:
            check_output_folder(out, overwrite=True)
        assert all(n in str(e.value) for n in foreign[:5])
    else:
        check_output_folder(out, overwrite=True)
    assert _tree(out) == before


# ------------------------------------------------------- layout / pipes / init


def _layout(run, out, *extra):
    return run("layout", FIELDS, "--spacing", "18 m", "--setback", "6 m", "-o", out, *extra)


def test_geojson_dir_targets_checked_before_writing(run, tmp_path):
    gj = tmp_path / "gj"
    gj.mkdir()
    (gj / "laterals.geojson").write_text("a user's file")
    out = tmp_path / "o.gpkg"
    r = _layout(run, out, "--geojson-dir", gj, "--plot", tmp_path / "p.png")
    assert r.exit_code == 2 and "--geojson-dir" in r.stderr
    assert not out.exists() and not (tmp_path / "p.png").exists()
    assert sorted(p.name for p in gj.iterdir()) == ["laterals.geojson"]
    assert (gj / "laterals.geojson").read_text() == "a user's file"


def test_ctrl_c_during_plot_leaves_nothing(run, tmp_path, monkeypatch):
    import drainplan.plots as plots

    def interrupted(fig, path, **kw):
        Path(path).write_bytes(b"half a PNG")
        raise KeyboardInterrupt

    monkeypatch.setattr(plots, "save_figure", interrupted)
    r = _layout(run, tmp_path / "o.gpkg", "--plot", tmp_path / "p.png", "--geojson-dir",
                tmp_path / "gj")
    assert r.exit_code == 1 and "aborted" in r.stderr
    assert list(tmp_path.iterdir()) == []


def test_geojson_names_are_the_layers_and_reruns_identical(run, tmp_path):
    for d in ("a", "b"):
        r = _layout(run, tmp_path / f"{d}.gpkg", "--geojson-dir", tmp_path / d)
        assert r.exit_code == 0, r.output
    for f in sorted((tmp_path / "a").iterdir()):
        assert json.loads(f.read_text())["name"] == f.stem
        assert f.read_bytes() == (tmp_path / "b" / f.name).read_bytes(), f.name


def test_symlinked_file_output_written_through(run, tmp_path):
    real = tmp_path / "real.gpkg"
    real.write_text("old")
    link = tmp_path / "link.gpkg"
    link.symlink_to(real)
    r = _layout(run, link, "--overwrite")
    assert r.exit_code == 0, r.output
    assert link.is_symlink() and real.stat().st_size > 1000


def test_error_names_the_right_option(run, tmp_path):
    (tmp_path / "p.png").write_text("x")
    lay = tmp_path / "lay.gpkg"
    assert _layout(run, lay).exit_code == 0
    r = run("pipes", lay, "--coefficient", "10 mm/d", "--survey", DEMO / "survey.csv",
            "--survey-crs", "EPSG:4326", "-o", tmp_path / "s.csv", "--plot", tmp_path / "p.png")
    assert r.exit_code == 2 and "--plot" in r.stderr and "--output" not in r.stderr
    assert not (tmp_path / "s.csv").exists()
    r = run("init", tmp_path / "farm")
    assert r.exit_code == 0
    r = run("init", tmp_path / "farm")
    assert r.exit_code == 2 and "--output" not in r.stderr and "--overwrite" in r.stderr


_SLOW_WRITER = """
import pathlib, sys, time
import drainplan.plots as plots
real = plots.save_figure
def slow(fig, path, **kw):
    real(fig, path, **kw)
    pathlib.Path(sys.argv[1]).write_text("writing")
    time.sleep(120)
plots.save_figure = slow
from drainplan.cli import main
main(sys.argv[2:])
"""


def test_sigterm_while_writing_leaves_nothing(tmp_path):
    """A real process stopped by SIGTERM in the middle of writing its outputs."""
    work = tmp_path / "work"
    work.mkdir()
    marker = tmp_path / "marker"
    proc = subprocess.Popen(
        [sys.executable, "-c", _SLOW_WRITER, str(marker), "layout", str(FIELDS), "--spacing",
         "18 m", "-o", str(work / "o.gpkg"), "--plot", str(work / "p.png"), "--geojson-dir",
         str(work / "gj")], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        for _ in range(1200):
            if marker.exists() or proc.poll() is not None:
                break
            import time

            time.sleep(0.05)
        assert marker.exists(), proc.communicate()
        proc.send_signal(signal.SIGTERM)
        _, err = proc.communicate(timeout=60)
    finally:
        if proc.poll() is None:
            proc.kill()
    assert proc.returncode == 1, err
    assert "terminated" in err and "Traceback" not in err
    assert list(work.iterdir()) == []
