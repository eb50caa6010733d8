"""`drainplan simulate`: wiring, outputs, and one-line errors with nothing written."""

import csv
import json
from pathlib import Path

import numpy as np
import pytest

ROOT = Path(__file__).resolve().parents[1]
SITE = ["--k", "0.5", "--drain-depth", "1.0", "--barrier-depth", "3", "--drain-radius", "0.05",
        "--drainable-porosity", "0.06"]


@pytest.fixture(scope="module")
def weather2(tmp_path_factory):
    """The first two years of the demo record (invented)."""
    lines = (ROOT / "demo_fields" / "weather.csv").read_text().splitlines()
    head = [i for i, ln in enumerate(lines) if ln.startswith("date,")][0]
    path = tmp_path_factory.mktemp("w") / "weather2.csv"
    path.write_text("\n".join(lines[head:head + 731]) + "\n")
    return path


def test_json_results_and_daily_series(run, weather2, tmp_path):
    daily = tmp_path / "daily.csv"
    r = run("simulate", "--weather", weather2, "--spacing", "15,30", *SITE, "--json",
            "--coefficient", "10 mm/d", "--daily", daily)
    assert r.exit_code == 0, r.output
    out = json.loads(r.stdout)
    rows = out["results"]
    assert [x["spacing_m"] for x in rows] == [15.0, 30.0]
    for key in ("sew30_cm_d", "wet_days", "rain_mm", "et_mm", "drain_mm", "runoff_mm",
                "storage_change_mm", "peak_drain_mm_d", "p99_drain_mm_d", "pipe_full_days"):
        assert key in rows[0]
    for x in rows:             # the water balance closes (issue 10: to 1e-9 of the rain)
        residual = x["rain_mm"] - x["et_mm"] - x["drain_mm"] - x["runoff_mm"] \
            - x["storage_change_mm"]
        assert abs(residual) <= 1e-9 * x["rain_mm"]
    assert out["other_model"] == "reservoir" and "other_model" in rows[0]
    # SEW30 recomputed from the daily series (Sieben 1964 definition, whole record)
    with daily.open() as fh:
        recs = list(csv.DictReader(fh))
    assert list(recs[0]) == ["date", "spacing_m", "water_table_depth_m", "drain_mm",
                             "runoff_mm", "et_mm"]
    for x in rows:
        z = np.array([float(d["water_table_depth_m"]) for d in recs
                      if float(d["spacing_m"]) == x["spacing_m"]])
        assert z.size == 730
        s = np.maximum(0.0, 30.0 - 100.0 * z).sum()
        assert s == pytest.approx(x["sew30_total_cm_d"], abs=0.005 * z.size)
        drain = sum(float(d["drain_mm"]) for d in recs if float(d["spacing_m"]) == x["spacing_m"])
        assert drain == pytest.approx(x["drain_mm"], abs=0.0005 * z.size)
    assert rows[0]["sew30_cm_d"] <= rows[1]["sew30_cm_d"]


def test_target_spacing_meets_the_target(run, weather2):
    """The widest spacing reported meets the SEW30 target, the next one tried does not."""
    r = run("simulate", "--weather", weather2, "--spacing", "10:60:6", *SITE, "--json",
            "--target-sew30", "40", "--target-basis", "worst-year")
    assert r.exit_code == 0, r.output
    t = json.loads(r.stdout)["target"]
    assert t["basis"] == "worst-year" and t["bounded"]
    L, L_bad = t["spacing_m"], t["next_failing_spacing_m"]
    assert 10 < L < L_bad <= 60 and L_bad - L < 1.0
    check = run("simulate", "--weather", weather2, "--spacing", f"{L},{L_bad}", *SITE,
                "--json")
    rows = json.loads(check.stdout)["results"]
    assert rows[0]["sew30_worst_year_cm_d"] <= 40 < rows[1]["sew30_worst_year_cm_d"]


def test_text_plot_reservoir_and_us_units(run, weather2, tmp_path):
    png = tmp_path / "sim.png"
    r = run("simulate", "--weather", weather2, "--spacing", "20", *SITE, "--model",
            "reservoir", "--units", "us", "--plot", png, "--season", "03-01:06-30")
    assert r.exit_code == 0, r.output
    assert "de Zeeuw-Hellinga" in r.stdout and "(ft)" in r.stdout and "in/d" in r.stdout
    assert png.stat().st_size > 10_000
    again = run("simulate", "--weather", weather2, "--spacing", "20", *SITE, "--plot", png)
    assert again.exit_code == 2 and "--overwrite" in again.stderr


def test_temperature_file_needs_latitude(run, tmp_path):
    w = tmp_path / "t.csv"
    w.write_text("date,rain_mm,tmin_c,tmax_c\n" + "".join(
        f"2001-05-{d:02d},{(d % 3) * 6},{8 + d % 4},{20 + d % 5}\n" for d in range(1, 31)))
    bad = run("simulate", "--weather", w, "--spacing", "20", *SITE)
    assert bad.exit_code == 2 and "--latitude" in bad.stderr
    ok = run("simulate", "--weather", w, "--spacing", "20", *SITE, "--latitude", "42.7",
             "--json")
    assert ok.exit_code == 0 and json.loads(ok.stdout)["weather"]["pet_source"] == \
        "hargreaves-samani"


@pytest.mark.parametrize("change,match", [
    ({"weather": "date,rain_mm,pet_mm\n2001-01-01,1,0\n2001-01-03,1,0\n"}, "line 3"),
    ({"weather": "date,rain_mm,pet_mm\n2001-01-01,1,0\n2001-01-01,1,0\n"}, "repeats line 2"),
    ({"weather": "date,rain_mm,pet_mm\n2001-01-01,-1,0\n"}, "negative"),
    ({"--spacing": "10:5:3"}, "--spacing"),
    ({"--spacing": "ten"}, "--spacing"),
    ({"--spacing": "0"}, "--spacing"),
    ({"--season": "02-30:13-01"}, "season"),
    ({"--drainable-porosity": "1.5"}, "porosity"),
    ({"--barrier-depth": "0.5"}, "barrier"),
    ({"--target-sew30": "-3"}, "target"),
    ({"--weather": "missing.csv"}, "not found"),
])
def test_bad_input_one_line_nothing_written(run, tmp_path, change, match):
    w = tmp_path / "w.csv"
    w.write_text(change.pop("weather", "date,rain_mm,pet_mm\n2001-01-01,1,0\n2001-01-02,0,1\n"))
    opts = {"--weather": str(w), "--spacing": "20", "--k": "0.5", "--drain-depth": "1.0",
            "--barrier-depth": "3", "--drain-radius": "0.05", "--drainable-porosity": "0.06"}
    if "--weather" in change:
        change["--weather"] = str(tmp_path / change["--weather"])
    opts.update(change)
    args = [a for kv in opts.items() for a in kv]
    daily, png = tmp_path / "d.csv", tmp_path / "p.png"
    r = run("simulate", *args, "--daily", daily, "--plot", png)
    assert r.exit_code == 2, r.output
    assert len(r.stderr.strip().splitlines()) == 1 and "Traceback" not in r.output
    assert match in r.stderr
    assert not daily.exists() and not png.exists()


def test_target_note_in_us_units(run, weather2):
    """With --units us the target search's note gives its spacing in feet too (12 m is
    39.4 ft, shown to the note's precision as 39 ft: 1 ft = 0.3048 m exactly, NIST SP
    811)."""
    r = run("simulate", "--weather", weather2, "--spacing", "12,20", *SITE,
            "--target-sew30", "0.5", "--units", "us")
    assert r.exit_code == 0, r.output
    line = next(ln for ln in r.stdout.splitlines() if ln.startswith("Target SEW30"))
    assert "narrowest spacing simulated (39 ft)" in line and " m)" not in line
