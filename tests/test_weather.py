"""Weather files and Hargreaves-Samani PET (FAO-56)."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from drainplan.errors import InputError
from drainplan.weather import (extraterrestrial_radiation, hargreaves_samani, parse_season,
                               parse_weather, read_weather, season_years)


def _ra_by_hand(lat_deg, J):
    """FAO-56 Eqs. 21-25 written out with the math module (independent of the code)."""
    phi = math.radians(lat_deg)
    dr = 1 + 0.033 * math.cos(2 * math.pi * J / 365)
    delta = 0.409 * math.sin(2 * math.pi * J / 365 - 1.39)
    ws = math.acos(-math.tan(phi) * math.tan(delta))
    ra = 24 * 60 / math.pi * 0.0820 * dr * (ws * math.sin(phi) * math.sin(delta)
                                            + math.cos(phi) * math.cos(delta) * math.sin(ws))
    return ra, dr, delta, ws


def test_extraterrestrial_radiation_fao56_example_8():
    """Allen et al. (1998), FAO Irrigation and Drainage Paper 56, Example 8: 20 deg S on
    3 September (J = 246): dr = 0.985, delta = 0.120 rad, ws = 1.527 rad, Ra = 32.2
    MJ m-2 d-1 (values RECALLED from memory, printed to 3 figures; tolerance half a unit
    of the last figure)."""
    ra, dr, delta, ws = _ra_by_hand(-20.0, 246)
    assert dr == pytest.approx(0.985, abs=0.0005)
    assert delta == pytest.approx(0.120, abs=0.0005)
    assert ws == pytest.approx(1.527, abs=0.0005)
    assert float(extraterrestrial_radiation(-20.0, 246)) == pytest.approx(32.2, abs=0.05)


@pytest.mark.parametrize("lat,J,tmin,tmax", [(-20.0, 246, 14.0, 27.0), (42.7, 172, 12.0, 27.0),
                                             (52.0, 15, -3.0, 4.0), (5.0, 100, 23.0, 33.0)])
def test_hargreaves_samani_eq_52(lat, J, tmin, tmax):
    """FAO-56 Eq. 52: ET0 = 0.0023 (Tmean + 17.8) sqrt(Tmax - Tmin) 0.408 Ra, recomputed
    here from the hand Ra (Hargreaves & Samani 1985)."""
    ra = _ra_by_hand(lat, J)[0]
    et0_mm = 0.0023 * ((tmin + tmax) / 2 + 17.8) * math.sqrt(tmax - tmin) * 0.408 * ra
    got = float(hargreaves_samani(tmin=tmin, tmax=tmax, latitude=lat, day_of_year=J)) * 1000
    assert got == pytest.approx(et0_mm, rel=1e-12)


def test_polar_night_gives_no_radiation():
    """Above the polar circle in midwinter the sun does not rise: Ra = 0 (Eq. 25 clipped)."""
    assert float(extraterrestrial_radiation(75.0, 355)) == 0.0


HEAD = "date,rain_mm,pet_mm\n"


def test_read_units_and_comments():
    w = parse_weather("# invented\n" + "date,rain_in,pet_in\n2001-03-01,1.0,0.1\n"
                      "2001-03-02,0,0.2\n")
    np.testing.assert_allclose(w.rain, [0.0254, 0.0])          # 1 in = 25.4 mm exactly
    np.testing.assert_allclose(w.pet, [0.00254, 0.00508])
    assert w.pet_source == "file"


def test_temperatures_give_hargreaves_pet():
    text = "date,rain_mm,tmin_c,tmax_c\n2001-06-21,0,12,27\n2001-06-22,3,14,22\n"
    w = parse_weather(text, latitude=42.7)
    assert w.pet_source == "hargreaves-samani"
    np.testing.assert_allclose(w.pet[0], hargreaves_samani(tmin=12, tmax=27, latitude=42.7,
                                                           day_of_year=172))
    f = parse_weather(text.replace("tmin_c,tmax_c", "tmin_f,tmax_f").replace(
        "12,27", "53.6,80.6").replace("14,22", "57.2,71.6"), latitude=42.7)
    np.testing.assert_allclose(f.pet, w.pet, rtol=1e-12)
    with pytest.raises(InputError, match="latitude"):
        parse_weather(text)


@pytest.mark.parametrize("text,match", [
    (HEAD + "2001-01-01,1,0\n2001-01-03,1,0\n", "line 3: date 2001-01-03 leaves a gap"),
    (HEAD + "2001-01-01,1,0\n2001-01-01,1,0\n", "line 3: date 2001-01-01 repeats line 2"),
    (HEAD + "2001-01-01,1,0\n2001-01-02,-2,0\n", "line 3: rain_mm -2 is negative"),
    (HEAD + "2001-01-01,1,-0.5\n", "line 2: pet_mm -0.5 is negative"),
    (HEAD + "2001-01-01,1,0\n2000-12-31,1,0\n", "line 3: .*before the previous date"),
    (HEAD + "01/02/2001,1,0\n", "line 2: date '01/02/2001' is not a date"),
    (HEAD + "2001-01-01,,0\n", "line 2: rain_mm is empty"),
    (HEAD + "2001-01-01,x,0\n", "line 2: rain_mm 'x' is not a number"),
    (HEAD + "2001-01-01,1\n", "line 2: 2 values for 3 columns"),
    ("day,rain_mm,pet_mm\n2001-01-01,1,0\n", "no 'date' column"),
    ("date,rain,pet_mm\n2001-01-01,1,0\n", "rain_mm or rain_in"),
    ("date,rain_mm\n2001-01-01,1\n", "pet_mm or pet_in"),
    ("date,rain_mm,tmin_c,tmax_c\n2001-01-01,1,5,3\n", "line 2: tmax_c 3 is below tmin_c 5"),
    (HEAD, "no data rows"),
    ("", "empty"),
])
def test_bad_weather_is_refused_with_its_line(text, match):
    with pytest.raises(InputError, match=match):
        parse_weather(text, latitude=40.0)


@settings(max_examples=60, deadline=None)
@given(n=st.integers(1, 40), temps=st.booleans(), flaw=st.sampled_from(
    [None, "gap", "repeat", "negative", "empty", "word", "short", "order", "nan", "spaces"]),
    at=st.integers(0, 39), seed=st.integers(0, 2**16))
def test_whole_column_reader_agrees_with_the_line_reader(n, temps, flaw, at, seed):
    """Property: the reader by whole columns (the fast path) gives what the reader line by
    line gives, and a flawed file is refused with the line reader's message (derived
    check: two readers of the same text)."""
    import datetime

    from drainplan import weather as wx

    rng = np.random.default_rng(seed)
    day0 = datetime.date(1999, 12, 20)
    rows = []
    for k in range(n):
        d = (day0 + datetime.timedelta(days=k)).isoformat()
        a, b = rng.uniform(0, 30), rng.uniform(-5, 10)
        rows.append([d, f"{a:.1f}", f"{b:.1f}", f"{b + rng.uniform(0, 15):.1f}"] if temps
                    else [d, f"{a:.1f}", f"{abs(b):.2f}"])
    k = at % n
    if flaw == "gap" and n > 1:
        rows[k][0] = (day0 + datetime.timedelta(days=k + (1 if k else 2))).isoformat() \
            if k < n - 1 else rows[k][0]
    elif flaw == "repeat" and k > 0:
        rows[k][0] = rows[k - 1][0]
    elif flaw == "negative":
        rows[k][1] = "-1.5"
    elif flaw == "empty":
        rows[k][2] = ""
    elif flaw == "word":
        rows[k][1] = "wet"
    elif flaw == "short":
        rows[k] = rows[k][:2]
    elif flaw == "order" and k > 0:
        rows[k][0], rows[k - 1][0] = rows[k - 1][0], rows[k][0]
    elif flaw == "nan":
        rows[k][1] = "nan"
    elif flaw == "spaces":
        rows[k][1] = f" {rows[k][1]} "
    head = "date,rain_mm,tmin_c,tmax_c" if temps else "date,rain_mm,pet_mm"
    text = head + "\n" + "\n".join(",".join(r) for r in rows) + "\n"
    data = [(i + 2, ln) for i, ln in enumerate(text.splitlines()[1:])]
    cols = head.split(",")
    idx = {c: cols.index(c) for c in cols}
    args = (data, cols, idx, "rain_mm", None if temps else "pet_mm",
            ("tmin_c", "tmax_c") if temps else None)
    try:
        slow = wx._parse_rows(*args, "w.csv")
    except InputError as exc:
        assert wx._parse_rows_fast(*args) is None
        with pytest.raises(InputError) as info:
            parse_weather(text, name="w.csv", latitude=40.0)
        assert str(info.value) == str(exc)
        return
    fast = wx._parse_rows_fast(*args)
    assert fast is not None
    np.testing.assert_array_equal(fast[0], slow[0])
    for j in (1, 2) + ((3,) if temps else ()):
        np.testing.assert_array_equal(fast[j], slow[j])


def test_missing_file(tmp_path):
    with pytest.raises(InputError, match="not found"):
        read_weather(tmp_path / "nope.csv")


def test_demo_weather_is_invented_30_years_and_small():
    """The demo record says it is invented, spans 30 years daily, and stays well under 1 MB."""
    from pathlib import Path

    path = Path(__file__).resolve().parents[1] / "demo_fields" / "weather.csv"
    assert path.stat().st_size < 500_000
    assert "INVENTED" in path.read_text().splitlines()[0]
    w = read_weather(path)
    assert w.dates.size == 10958 and str(w.dates[0]) == "1995-01-01"


def test_season_wrapping_the_year_end():
    d = np.arange(np.datetime64("2001-10-30"), np.datetime64("2002-05-03"))
    mask, year = season_years(d, parse_season("11-01:04-30"))
    assert mask.sum() == 30 + 31 + 31 + 28 + 31 + 30
    assert set(year[mask]) == {2001}
    with pytest.raises(InputError, match="MM-DD"):
        parse_season("13-01:02-01")
