"""Import boundaries between layers."""

import subprocess
import sys


def _loaded_after(statement):
    code = f"import sys; {statement}; print(' '.join(sorted(sys.modules)))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    return set(out.stdout.split())


def test_design_core_is_light():
    mods = _loaded_after("import drainplan")
    heavy = {"click", "shapely", "geopandas", "matplotlib", "reportlab", "pint", "pyproj"}
    assert not heavy & {m.split(".")[0] for m in mods}


def test_cli_help_does_not_load_heavy_libraries():
    mods = _loaded_after("from drainplan.cli import cli")
    heavy = {"shapely", "geopandas", "matplotlib", "reportlab", "pint", "pyproj"}
    assert not heavy & {m.split(".")[0] for m in mods}


def test_core_modules_do_not_import_upward():
    import pathlib
    import re

    root = pathlib.Path(__file__).resolve().parents[1] / "drainplan"
    for path in (root / "spacing").glob("*.py"):
        text = path.read_text()
        assert not re.search(r"^\s*(import|from)\s+(click|drainplan\.cli|\.\.cli)", text, re.M), path
