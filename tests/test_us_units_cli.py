"""US customary units on the layout and pipes commands' own output.

A contractor who asks for ``--units us`` reads feet, inches, acres and inch pipe
sizes on every line, including the notes that the layout and pipe layers write
in SI. The conversion factors are the exact international ones (1 ft = 0.3048 m,
NIST SP 811, 2008, Appendix B), checked here independently of drainplan's table.
"""

import re
from pathlib import Path

import pytest

DEMO = Path(__file__).resolve().parents[1] / "demo_fields"
METRIC = re.compile(r"\d\s?(m|mm|cm|km|ha|m/s|L/s|mm/d|m/d)\b(?![²³/])")


@pytest.fixture(scope="module")
def us_layout(tmp_path_factory):
    from click.testing import CliRunner

    from drainplan.cli import cli

    tmp = tmp_path_factory.mktemp("us")
    out = tmp / "layout.gpkg"
    r = CliRunner().invoke(cli, [
        "layout", str(DEMO / "fields.geojson"), "--spacing", "60 ft", "--setback", "20 ft",
        "--exclude", str(DEMO / "exclusions.geojson"), "--outlet", str(DEMO / "outlet.geojson"),
        "-o", str(out), "--units", "us"], catch_exceptions=False)
    assert r.exit_code == 0, r.output
    return r, out, tmp


def test_layout_notes_in_us_units(us_layout):
    r, _, _ = us_layout
    notes = r.stdout.split("Notes", 1)[1]
    assert "ft" in notes
    assert not METRIC.search(notes.replace("EPSG", "")), notes


def test_pipes_default_to_inch_sizes_in_us_units(us_layout, run):
    _, out, tmp = us_layout
    r = run("pipes", out, "--coefficient", "1/2 in/d", "--drain-depth", "3.5 ft",
            "-o", tmp / "s.csv", "--units", "us")
    assert r.exit_code == 0, r.output
    sizes = re.findall(r"(\d+) mm", r.stdout)
    assert not sizes, f"metric pipe sizes in a US take-off: {sizes[:5]}"
    assert re.search(r"\d+ in", r.stdout)
    notes = "\n".join(ln for ln in r.stdout.splitlines() if ln.startswith("note:"))
    assert not METRIC.search(notes), notes


def test_exact_foot_in_note_conversion():
    from drainplan.units import text_in_units

    # 250 m = 250 / 0.3048 ft = 820.2 ft (NIST SP 811 exact foot)
    assert text_in_units("sub-mains of 250 m", "us") == f"sub-mains of {250 / 0.3048:.0f} ft"
    assert text_in_units("sub-mains of 250 m", "metric") == "sub-mains of 250 m"
