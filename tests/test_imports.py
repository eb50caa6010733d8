"""Import boundaries between layers."""

import subprocess
import sys

import pytest


def _loaded_after(statement):
    code = f"import sys; {statement}; print(' '.join(sorted(sys.modules)))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    return set(out.stdout.split())


def test_package_import_is_light():
    """`import drainplan` loads no numpy: the design core is re-exported lazily."""
    mods = _loaded_after("import drainplan")
    heavy = {"numpy", "scipy", "click", "shapely", "geopandas", "matplotlib", "reportlab",
             "pint", "pyproj"}
    assert not heavy & {m.split(".")[0] for m in mods}


def test_design_core_is_light():
    mods = _loaded_after("import drainplan as dp; dp.hooghoudt_spacing; dp.kirkham_f")
    tops = {m.split(".")[0] for m in mods}
    assert "numpy" in tops and "drainplan.spacing.hooghoudt" in mods
    heavy = {"click", "shapely", "geopandas", "matplotlib", "reportlab", "pint", "pyproj"}
    assert not heavy & tops


def test_package_reexports_the_design_core():
    import drainplan
    import drainplan.spacing

    assert set(drainplan._CORE) == set(drainplan.spacing.__all__)
    for name in drainplan.spacing.__all__:
        assert getattr(drainplan, name) is getattr(drainplan.spacing, name)
        assert name in drainplan.__all__ and name in dir(drainplan)
    with pytest.raises(AttributeError):
        drainplan.no_such_function


def test_cli_help_does_not_load_heavy_libraries():
    mods = _loaded_after("from drainplan.cli import cli")
    heavy = {"numpy", "shapely", "geopandas", "matplotlib", "reportlab", "pint", "pyproj"}
    assert not heavy & {m.split(".")[0] for m in mods}
    mods = _loaded_after("from drainplan.cli import main\ntry:\n    main(['--help'])\n"
                         "except SystemExit:\n    pass")
    assert not heavy & {m.split(".")[0] for m in mods}


# Layers, lowest first (DEVELOPERS.md); a module may import only its own layer or lower.
LAYERS = [
    {"errors", "units", "_solve", "_validate", "_templates", "_text", "_textfile",
     "_background"},
    {"spacing", "soil", "auger_hole", "pedotransfer", "uncertainty"},
    {"geometry", "terrain", "soilmap"},
    {"network"},
    {"gisio", "layout_plan", "network.plan", "weather", "simulation_plan"},
    {"project", "design", "check", "field_tests", "batch", "engines"},
    {"plots", "sheet", "outputs", "check_sheet", "batch_map"},
    {"cli", "__main__"},
]


def _layer(name, sub=None):
    """Layer of a top-level module or package; ``sub`` names a module of a package
    that sits in a higher layer than the package (``network.plan``)."""
    for key in ([f"{name}.{sub}"] if sub else []) + [name]:
        for i, group in enumerate(LAYERS):
            if key in group:
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
        me = _layer(top, rel[1].removesuffix(".py") if len(rel) > 1 else None)
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
                sub = parts[1] if len(parts) > 1 and parts[0] == target else None
                assert _layer(target, sub) <= me, f"{path}: imports {target} from a higher layer"
            if isinstance(node, (ast.Import, ast.ImportFrom)) and me < _layer("cli"):
                names = [a.name for a in node.names] if isinstance(node, ast.Import) else \
                    [node.module or ""]
                assert not any(n.split(".")[0] == "click" for n in names), path
