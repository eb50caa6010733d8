"""Odd inputs never end in a traceback: one line on stderr, a non-zero exit code."""

from pathlib import Path

import pytest

DEMO = Path(__file__).resolve().parents[1] / "demo_fields"

CASES = [
    ["spacing", "--k", "1e400", "--drain-depth", "1", "--barrier-depth", "3",
     "--drain-radius", "0.05", "--recharge", "0.01", "--water-table-depth", "0.5"],
    ["spacing", "--k", "0.5", "--drain-depth", "nan", "--barrier-depth", "3",
     "--drain-radius", "0.05", "--recharge", "0.01", "--water-table-depth", "0.5"],
    ["spacing", "--k", "0.5", "--drain-depth", "1", "--barrier-depth", "3",
     "--drain-radius", "0.05", "--recharge", "0.01 m", "--water-table-depth", "0.5"],
    ["spacing", "--method", "ernst", "--k", "0.5", "--drain-depth", "1", "--barrier-depth",
     "3", "--drain-radius", "0.05", "--recharge", "0.01", "--water-table-depth", "0.5",
     "--geometry-factor", "-2"],
    ["spacing", "--k", "0.5", "--drain-depth", "1", "--barrier-depth", "3", "--drain-radius",
     "0.05", "--recharge", "0.01", "--water-table-depth", "0.5", "--sweep-k", "a:b:c"],
    ["layout", str(DEMO / "survey.csv"), "--spacing", "18", "-o", "{tmp}/x.gpkg"],
    ["layout", str(DEMO / "fields.geojson"), "--spacing", "0", "-o", "{tmp}/x.gpkg"],
    ["layout", str(DEMO / "fields.geojson"), "--spacing", "18", "-o", "{tmp}/x.txt"],
    ["layout", str(DEMO / "fields.geojson"), "--spacing", "18", "--offset", "40",
     "-o", "{tmp}/x.gpkg"],
    ["layout", str(DEMO / "fields.geojson"), "--spacing", "18", "--crs", "EPSG:999999",
     "-o", "{tmp}/x.gpkg"],
    ["layout", str(DEMO / "fields.geojson"), "--spacing", "18", "--work-crs", "EPSG:4326",
     "-o", "{tmp}/x.gpkg"],
    ["layout", str(DEMO / "fields.geojson"), "--spacing", "18", "--exclude",
     str(DEMO / "nothing.geojson"), "-o", "{tmp}/x.gpkg"],
    ["layout", str(DEMO / "fields.geojson"), "--spacing", "18", "--pattern", "herringbone",
     "--herringbone-angle", "89", "-o", "{tmp}/x.gpkg"],
    ["pipes", str(DEMO / "fields.geojson"), "--coefficient", "10 mm/d", "-o", "{tmp}/s.csv"],
    ["design", str(DEMO / "fields.geojson"), "-o", "{tmp}/d"],
    ["design", str(DEMO / "nothing.toml"), "-o", "{tmp}/d"],
    ["init", "{tmp}/p", "--template", "rice"],
]


@pytest.mark.parametrize("args", CASES, ids=[" ".join(c[:3]) for c in CASES])
def test_no_traceback(run, tmp_path, args):
    r = run(*[a.replace("{tmp}", str(tmp_path)) for a in args])
    assert r.exit_code in (1, 2), r.output
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("drainplan: error:"), r.stderr
    assert not [p for p in tmp_path.rglob("*") if p.is_file()]


def test_bad_survey_crs(run, tmp_path):
    from click.testing import CliRunner

    from drainplan.cli import cli

    lay = tmp_path / "layout.gpkg"
    r = CliRunner().invoke(cli, ["layout", str(DEMO / "fields.geojson"), "--spacing", "18 m",
                                 "-o", str(lay)])
    assert r.exit_code == 0
    out = tmp_path / "s.csv"
    r = run("pipes", lay, "--coefficient", "10 mm/d", "--survey", DEMO / "survey.csv",
            "--survey-crs", "EPSG:999999", "-o", out)
    assert r.exit_code == 2 and "--survey-crs" in r.stderr
    assert len(r.stderr.strip().splitlines()) == 1 and not out.exists()
