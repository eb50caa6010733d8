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


# Layers, lowest first (DEVELOPERS.md); a module may import only its own layer or lower.
LAYERS = [
    {"errors", "units", "_solve", "_validate", "_templates"},
    {"spacing", "soil"},
    {"geometry", "pipes", "terrain"},
    {"pipe_design"},
    {"gisio", "layout_plan", "pipes_plan", "weather", "simulation_plan"},
    {"project", "design"},
    {"plots", "sheet", "outputs"},
    {"cli", "__main__"},
]


def _layer(name):
    for i, group in enumerate(LAYERS):
        if name in group:
            return i
    raise AssertionError(f"module {name} is missing from the layer map")


def test_lower_layers_never_import_higher_ones():
    import ast
    import pathlib

    root = pathlib.Path(__file__).resolve().parents[1] / "drainplan"
    for path in root.rglob("*.py"):
        rel = path.relative_to(root).parts
        if rel == ("__init__.py",):
            continue
        top = rel[0].removesuffix(".py")
        me = _layer(top)
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, ast.ImportFrom) and node.level:
                # resolve the first package component of a relative import
                depth = len(rel) - 1 - (node.level - 1)
                parts = list(rel[:-1])[:depth] + (node.module.split(".") if node.module else [])
                target = parts[0] if parts else (node.names[0].name if node.level > 1 else top)
                target = target.removesuffix(".py")
                if target in ("__init__", "drainplan") or (
                        node.module is None and not any(target in g for g in LAYERS)):
                    continue           # the package itself (e.g. its __version__)
                assert _layer(target) <= me, f"{path}: imports {target} from a higher layer"
            if isinstance(node, (ast.Import, ast.ImportFrom)) and me < _layer("cli"):
                names = [a.name for a in node.names] if isinstance(node, ast.Import) else \
                    [node.module or ""]
                assert not any(n.split(".")[0] == "click" for n in names), path
