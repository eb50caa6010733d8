"""`drainplan spacing` end to end: output, JSON, sweep and bad input."""

import json

import pytest

BASE = ["spacing", "--k", "0.5", "--drain-depth", "1.2", "--barrier-depth", "4",
        "--drain-radius", "5 cm", "--recharge", "10 mm/d", "--water-table-depth", "0.6"]
FALL = ["spacing", "--method", "glover-dumm", "--k", "1.0", "--drain-depth", "1.5",
        "--barrier-depth", "5.5", "--drain-radius", "0.1", "--initial-depth", "0.5",
        "--final-depth", "1.0", "--days", "2", "--drainable-porosity", "0.06"]


def test_text_output(run):
    r = run(*BASE)
    assert r.exit_code == 0, r.output
    assert "drain spacing" in r.stdout and "20.1 m" in r.stdout
    assert "equivalent depth" in r.stdout and "qualified professional" in r.stdout


def test_json_hooghoudt_matches_library(run):
    from drainplan.spacing import hooghoudt_spacing
    r = run(*BASE, "--json")
    assert r.exit_code == 0
    out = json.loads(r.stdout)
    assert out["method"] == "hooghoudt"
    L = hooghoudt_spacing(recharge=0.01, head=0.6, k_below=0.5, depth_to_barrier=2.8,
                          drain_radius=0.05)
    assert out["spacing_m"] == pytest.approx(float(L), rel=1e-12)
    assert out["inputs"]["recharge_m_per_d"] == pytest.approx(0.01)
    assert out["equivalent_depth_m"] > 0


def test_json_glover_dumm_case(run):
    # Method notes C-T2: K 1 m/d, mu 0.06, 2 d, y0 1.0 -> 0.5 m, D0 4 m, r0 0.1 -> 28.66 m
    r = run(*FALL, "--json")
    assert r.exit_code == 0, r.output
    out = json.loads(r.stdout)
    assert out["spacing_m"] == pytest.approx(28.66, abs=0.006)
    assert out["flow_depth_m"] == pytest.approx(out["equivalent_depth_m"])
    r2 = json.loads(run(*FALL, "--json", "--flow-depth", "equivalent-plus-half-head").stdout)
    assert r2["spacing_m"] == pytest.approx(32.67, abs=0.006)
    assert r2["flow_depth_m"] == pytest.approx(r2["equivalent_depth_m"] + 0.5)


@pytest.mark.parametrize("method", ["hooghoudt", "ernst", "kirkham"])
def test_steady_methods_run(run, method):
    r = run(*BASE, "--method", method, "--json")
    assert r.exit_code == 0, r.output
    assert 10 < json.loads(r.stdout)["spacing_m"] < 30


def test_us_units(run):
    r = run("spacing", "--k", "0.8 in/h", "--drain-depth", "4 ft", "--barrier-depth", "12 ft",
            "--drain-radius", "sock-4in", "--recharge", "3/8 in/d", "--water-table-depth",
            "1 ft", "--units", "us")
    assert r.exit_code == 0, r.output
    assert " ft" in r.stdout and "in/d" in r.stdout


def test_sweep(run):
    r = run(*BASE, "--sweep-k", "0.1:2:5", "--json")
    rows = json.loads(r.stdout)["sweep"]
    assert len(rows) == 5
    assert [x["k_m_per_d"] for x in rows] == pytest.approx([0.1, 0.2115, 0.4472, 0.9457, 2.0],
                                                           rel=1e-3)
    spacings = [x["spacing_m"] for x in rows]
    assert spacings == sorted(spacings)


BAD = [
    (["--k", "-1"], "--k"),
    (["--k", "abc"], "--k"),
    (["--k", "3 m"], "--k"),
    (["--barrier-depth", "1.0"], "--barrier-depth"),
    (["--water-table-depth", "1.5"], "--water-table-depth"),
    (["--barrier-depth", "1.22"], "--drain-radius"),
    (["--drain-radius", "pipe"], "--drain-radius"),
    (["--recharge", "0"], "--recharge"),
    (["--recharge", "-3 mm/d"], "--recharge"),
    (["--method", "foo"], "--method"),
    (["--sweep-k", "2:1:5"], "--sweep-k"),
    (["--units", "si"], "--units"),
    (["--days", "2"], "--days"),
    (["--k-above", "0.5"], "--k"),
    (["--method", "kirkham", "--k", "0.5", "--interface-depth", "2"], "--interface-depth"),
]


@pytest.mark.parametrize("extra,option", BAD)
def test_bad_input_one_line(run, extra, option):
    args = list(BASE)
    for i in range(0, len(extra), 2):
        if extra[i] in args and extra[i] != "--method":
            j = args.index(extra[i])
            args[j + 1] = extra[i + 1]
        else:
            args += extra[i:i + 2]
    r = run(*args)
    assert r.exit_code == 2, r.output
    assert r.stdout == ""
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("drainplan: error:")
    assert option in lines[0]
    assert "Traceback" not in r.output


def test_missing_recharge(run):
    args = [a for a in BASE]
    i = args.index("--recharge")
    del args[i:i + 2]
    r = run(*args)
    assert r.exit_code == 2 and "--recharge" in r.stderr


@pytest.mark.parametrize("extra,option", [
    (["--final-depth", "0.4"], "--final-depth"), (["--drainable-porosity", "0"],
                                                   "--drainable-porosity"),
    (["--drainable-porosity", "1.5"], "--drainable-porosity"), (["--days", "0"], "--days"),
    (["--initial-depth", "2.0"], "--initial-depth"),
])
def test_bad_falling_input(run, extra, option):
    args = list(FALL)
    j = args.index(extra[0])
    args[j + 1] = extra[1]
    r = run(*args)
    assert r.exit_code == 2, r.output
    assert option in r.stderr and len(r.stderr.strip().splitlines()) == 1


def test_no_solution_exit_1(run):
    args = list(BASE)
    args[args.index("--k") + 1] = "1e-6"
    args[args.index("--recharge") + 1] = "1 m/d"
    r = run(*args)
    assert r.exit_code == 1
    assert "no drain spacing" in r.stderr


def test_version_and_help(run):
    assert run("--version").exit_code == 0
    r = run("spacing", "--help")
    assert r.exit_code == 0 and "--water-table-depth" in r.stdout


def test_sweep_plot(run, tmp_path):
    png = tmp_path / "k.png"
    r = run(*BASE, "--sweep-k", "0.1:2:5", "--plot", png)
    assert r.exit_code == 0, r.output
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    r = run(*BASE, "--plot", tmp_path / "x.png")
    assert r.exit_code == 2 and "--sweep-k" in r.stderr and not (tmp_path / "x.png").exists()


def test_check_spacing(run):
    # ILRI Publ. 16 Example 8.1 site (inputs quoted second-hand): the widest spacing meeting
    # the criterion is 64 m; 50 m meets it with a deeper water table, 70 m does not.
    site = ["spacing", "--k", "0.14", "--drain-depth", "1.2", "--barrier-depth", "6.0",
            "--drain-radius", "0.1", "--recharge", "1 mm/d", "--water-table-depth", "0.2",
            "--json"]
    ok = json.loads(run(*site, "--check-spacing", "50 m").stdout)["check"]
    bad = json.loads(run(*site, "--check-spacing", "70 m").stdout)["check"]
    assert ok["meets"] and not bad["meets"]
    assert ok["required_spacing_m"] == pytest.approx(64.0, abs=0.05)
    assert ok["midway_water_table_depth_m"] > 0.2 > bad["midway_water_table_depth_m"]
    assert ok["drainage_rate_m_per_d"] > 0.001 > bad["drainage_rate_m_per_d"]
    text = run(*site[:-1], "--check-spacing", "70 m").stdout
    assert "does NOT meet" in text
    r = run(*site, "--check-spacing", "-5 m")
    assert r.exit_code == 2 and "--check-spacing" in r.stderr


def test_check_spacing_falling(run):
    r = run(*FALL, "--check-spacing", "25 m", "--json")
    c = json.loads(r.stdout)["check"]
    assert c["meets"] and c["midway_depth_after_days_m"] > 1.0
