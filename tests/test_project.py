"""Project files: templates, validation messages, `drainplan init`."""

from pathlib import Path

import pytest

from drainplan.errors import InputError
from drainplan.project import TEMPLATES, load_project

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_fields" / "project.toml"


@pytest.mark.parametrize("name", list(TEMPLATES))
def test_templates_load(name):
    p = load_project(ROOT / "drainplan" / "templates" / TEMPLATES[name], check_files=False)
    assert p.soil["barrier_depth"] > 0 and p.drains["radius"] > 0


def test_units_in_strings():
    p = load_project(DEMO)
    assert p.criteria["recharge"] == pytest.approx(0.375 * 0.0254)    # "3/8 in/d"
    assert p.pipes["coefficient"] == pytest.approx(0.5 * 0.0254)      # "1/2 in/d"
    assert p.drains["depth"] == pytest.approx([0.9, 1.0, 1.1])
    assert p.pipes["min_grade"] == pytest.approx(0.001)               # "0.1 %"
    assert Path(p.fields["file"]).is_absolute()


def _variant(tmp_path, old, new):
    text = DEMO.read_text().replace(old, new, 1)
    assert text != DEMO.read_text() or old == new
    path = tmp_path / "project.toml"
    path.write_text(text)
    for name in ("fields.geojson", "exclusions.geojson", "outlet.geojson", "survey.csv",
                 "weather.csv"):
        (tmp_path / name).symlink_to(DEMO.parent / name)
    return path


BAD = [
    ("malformed", 'k_above = "0.8 m/d"', 'k_above = "0.8 m/d', "line {k_above}"),
    ("unknown key", "barrier_depth =", "barier_depth =", "did you mean 'soil.barrier_depth'"),
    ("unknown section", "[layout]", "[layuot]", "did you mean 'layout'"),
    ("missing required", 'radius = "sock-4in"\n', "", "drains.radius is required"),
    ("wrong dimension", 'barrier_depth = "3.2 m"', 'barrier_depth = "3.2 m/d"',
     "soil.barrier_depth"),
    ("bad choice", 'material = "corrugated"', 'material = "steel"', "pipes.material"),
    ("missing falling part", "days = 1\n", "", "criteria.days is required"),
]


@pytest.mark.parametrize("case,old,new,text", BAD, ids=[b[0] for b in BAD])
def test_bad_project(tmp_path, case, old, new, text):
    path = _variant(tmp_path, old, new)
    line = 1 + DEMO.read_text().splitlines().index('k_above = "0.8 m/d"')
    text = text.format(k_above=line)
    with pytest.raises(InputError, match=text.replace("(", r"\(").replace("?", r"\?")):
        load_project(path)


def test_malformed_line_number(tmp_path):
    path = tmp_path / "p.toml"
    path.write_text('[site]\nname = "x"\n\n[soil]\nk = "0.5 m/d\n')
    with pytest.raises(InputError, match="line 5"):
        load_project(path)


@pytest.mark.parametrize("template", ["humid-field-crops", "vegetables", "irrigated-arid"])
def test_init_writes_loadable_project(run, tmp_path, template):
    r = run("init", tmp_path / "farm", "--template", template)
    assert r.exit_code == 0, r.output
    p = load_project(tmp_path / "farm" / "project.toml", check_files=False)
    assert p.site["name"]
    r = run("init", tmp_path / "farm", "--template", template)
    assert r.exit_code == 2 and "--overwrite" in r.stderr
