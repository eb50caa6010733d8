"""Daily weather records for the season simulation: read, check, and PET by Hargreaves-Samani.

A weather file is a CSV with a ``date`` column (ISO ``YYYY-MM-DD``, one row per
day, no gaps, no repeats) and rain and potential ET columns whose unit is in the
name: ``rain_mm`` or ``rain_in``, ``pet_mm`` or ``pet_in``. Instead of PET, daily
minimum and maximum air temperature (``tmin_c``/``tmax_c`` or ``tmin_f``/``tmax_f``)
give PET by Hargreaves-Samani (FAO-56 Eq. 52) with the latitude. Lines starting
with ``#`` are comments. Every problem is reported with its line number.

:func:`parse_weather` takes the text, :func:`read_weather` a path; everything
else is pure. Amounts are returned in SI (m per day).
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import InputError

__all__ = ["Weather", "parse_weather", "read_weather", "extraterrestrial_radiation",
           "hargreaves_samani", "parse_season", "season_years"]

_INCH = 0.0254


@dataclass(frozen=True)
class Weather:
    """A daily weather record (SI).

    Attributes
    ----------
    dates : numpy.ndarray of datetime64[D]
    rain, pet : numpy.ndarray
        Rain and potential ET of each day [m].
    pet_source : str
        ``"file"`` or ``"hargreaves-samani"``.
    latitude : float or None
        Latitude used for Hargreaves-Samani [degrees].
    name : str
        File name (for messages and reports).
    """

    dates: np.ndarray
    rain: np.ndarray
    pet: np.ndarray
    pet_source: str = "file"
    latitude: float | None = None
    name: str = "weather"
    notes: tuple = field(default_factory=tuple)

    @property
    def years(self):
        """Length of the record [years of 365.25 d]."""
        return self.dates.size / 365.25


def extraterrestrial_radiation(latitude, day_of_year):
    """Daily extraterrestrial radiation Ra [MJ m-2 d-1] (FAO-56 Eqs. 21-25).

    Parameters
    ----------
    latitude : array_like
        Latitude [degrees], north positive, -90 to 90.
    day_of_year : array_like
        Day of the year J, 1 to 366.

    Returns
    -------
    numpy.ndarray or float
        Ra [MJ m-2 d-1].

    Notes
    -----
    ``Ra = (24 60 / pi) Gsc dr [ws sin(phi) sin(delta) + cos(phi) cos(delta) sin(ws)]``
    (Eq. 21) with Gsc = 0.0820 MJ m-2 min-1, ``dr = 1 + 0.033 cos(2 pi J / 365)``
    (Eq. 23), ``delta = 0.409 sin(2 pi J / 365 - 1.39)`` (Eq. 24) and
    ``ws = arccos(-tan(phi) tan(delta))`` (Eq. 25; clipped for polar day/night).

    References
    ----------
    .. [1] Allen, R.G., Pereira, L.S., Raes, D. and Smith, M. (1998). Crop
       evapotranspiration: guidelines for computing crop water requirements. FAO
       Irrigation and Drainage Paper 56, FAO, Rome.

    Examples
    --------
    >>> round(float(extraterrestrial_radiation(-20.0, 246)), 1)
    32.2
    """
    phi = np.radians(np.asarray(latitude, float))
    J = np.asarray(day_of_year, float)
    dr = 1.0 + 0.033 * np.cos(2.0 * np.pi * J / 365.0)                 # Eq. (23)
    delta = 0.409 * np.sin(2.0 * np.pi * J / 365.0 - 1.39)              # Eq. (24)
    ws = np.arccos(np.clip(-np.tan(phi) * np.tan(delta), -1.0, 1.0))    # Eq. (25)
    ra = 24.0 * 60.0 / np.pi * 0.0820 * dr * (
        ws * np.sin(phi) * np.sin(delta) + np.cos(phi) * np.cos(delta) * np.sin(ws))  # Eq. (21)
    ra = np.maximum(ra, 0.0)
    return ra[()] if ra.ndim == 0 else ra


def hargreaves_samani(*, tmin, tmax, latitude, day_of_year):
    """Reference evapotranspiration ET0 by Hargreaves-Samani [m/d].

    Parameters
    ----------
    tmin, tmax : array_like
        Daily minimum and maximum air temperature [deg C], tmax >= tmin.
    latitude : array_like
        Latitude [degrees].
    day_of_year : array_like
        Day of the year, 1 to 366.

    Returns
    -------
    numpy.ndarray or float
        ET0 [m/d] (FAO-56 gives it in mm/d).

    Notes
    -----
    FAO-56 Eq. (52)::

        ET0 = 0.0023 (Tmean + 17.8) sqrt(Tmax - Tmin) Ra

    with Ra as evaporation equivalent (0.408 x MJ m-2 d-1, mm/d) and
    Tmean = (Tmax + Tmin) / 2. Negative values (very cold days) are set to 0.
    A temperature-only estimate: use measured PET where there is one.

    References
    ----------
    .. [1] Hargreaves, G.H. and Samani, Z.A. (1985). Reference crop
       evapotranspiration from temperature. Applied Engineering in Agriculture
       1(2), 96-99.
    .. [2] Allen, R.G. et al. (1998). FAO Irrigation and Drainage Paper 56, Eq. 52.

    Examples
    --------
    >>> round(float(hargreaves_samani(tmin=10.0, tmax=24.0, latitude=45.0,
    ...                               day_of_year=180)) * 1000, 2)
    5.1
    """
    tn, tx = np.asarray(tmin, float), np.asarray(tmax, float)
    ra_mm = 0.408 * extraterrestrial_radiation(latitude, day_of_year)
    tmean = 0.5 * (tn + tx)
    et0 = 0.0023 * (tmean + 17.8) * np.sqrt(np.maximum(tx - tn, 0.0)) * ra_mm  # Eq. (52)
    out = np.maximum(et0, 0.0) / 1000.0
    return out[()] if out.ndim == 0 else out


def _columns(header, name):
    cols = [c.strip() for c in header]
    if "date" not in cols:
        raise InputError(f"{name}: no 'date' column (columns: {', '.join(cols)})",
                         param="weather")
    rain = [c for c in ("rain_mm", "rain_in") if c in cols]
    if len(rain) != 1:
        raise InputError(f"{name}: needs one rain column, rain_mm or rain_in "
                         f"(columns: {', '.join(cols)})", param="weather")
    pet = [c for c in ("pet_mm", "pet_in") if c in cols]
    temps = [(a, b) for a, b in (("tmin_c", "tmax_c"), ("tmin_f", "tmax_f"))
             if a in cols and b in cols]
    if len(pet) > 1 or len(temps) > 1 or (pet and temps):
        raise InputError(f"{name}: give either pet_mm/pet_in or one pair of daily "
                         "temperatures (tmin_c and tmax_c, or tmin_f and tmax_f), not both",
                         param="weather")
    if not pet and not temps:
        raise InputError(f"{name}: needs a potential-ET column (pet_mm or pet_in) or daily "
                         "temperatures (tmin_c and tmax_c, or tmin_f and tmax_f)",
                         param="weather")
    return cols, rain[0], (pet[0] if pet else None), (temps[0] if temps else None)


def _parse_rows_fast(data, cols, idx, rain_col, pet_col, temp_cols):
    """The data rows read as whole columns: (dates, rain, second, third) as in
    :func:`_parse_rows`, or None when any row needs a closer look (the line-by-line
    reader then names the first problem)."""
    rows = list(csv.reader(line for _, line in data))
    if any(len(f) != len(cols) for f in rows):
        return None
    n = len(rows)
    try:
        ds = [f[idx["date"]].strip() for f in rows]
        if any(len(d) != 10 for d in ds):
            return None
        dates = np.array(ds, dtype="datetime64[D]")

        def column(col):
            return np.fromiter((float(f[idx[col]]) for f in rows), float, count=n)

        rain = column(rain_col)
        if pet_col is not None:
            second, third = column(pet_col), np.empty(n)
            values = (rain, second)
        else:
            second, third = column(temp_cols[0]), column(temp_cols[1])
            values = (rain,)
            if not (np.all(np.isfinite(second)) and np.all(np.isfinite(third))
                    and np.all(third >= second)):
                return None
    except ValueError:                  # an empty or unreadable value, a bad date
        return None
    if not all(np.all(np.isfinite(v)) and np.all(v >= 0) for v in values):
        return None
    if n > 1 and not np.all(np.diff(dates).astype(int) == 1):
        return None
    return dates, rain, second, third


def _parse_rows(data, cols, idx, rain_col, pet_col, temp_cols, name):
    """The data rows read one by one: (dates, rain, second, third) with ``second`` the
    PET or the minimum temperature and ``third`` the maximum temperature; raises an
    :class:`InputError` naming the file, the line and the problem."""
    n = len(data)
    dates = np.empty(n, dtype="datetime64[D]")
    rain = np.empty(n)
    second = np.empty(n)
    third = np.empty(n)
    seen = {}
    for k, (line_no, line) in enumerate(data):
        where = f"{name} line {line_no}"
        fields = next(csv.reader(io.StringIO(line)))
        if len(fields) != len(cols):
            raise InputError(f"{where}: {len(fields)} values for {len(cols)} columns",
                             param="weather")
        ds = fields[idx["date"]].strip()
        try:
            if len(ds) != 10:
                raise ValueError
            day = np.datetime64(ds, "D")
        except ValueError:
            raise InputError(f"{where}: date {ds!r} is not a date written YYYY-MM-DD",
                             param="weather") from None
        if day in seen:
            raise InputError(f"{where}: date {ds} repeats line {seen[day]}", param="weather")
        if k > 0:
            step = int((day - dates[k - 1]).astype(int))
            if step < 1:
                raise InputError(f"{where}: date {ds} comes before the previous date "
                                 f"{dates[k - 1]}; the record must be in date order",
                                 param="weather")
            if step > 1:
                raise InputError(f"{where}: date {ds} leaves a gap after {dates[k - 1]} "
                                 f"({step - 1} day{'s' if step > 2 else ''} missing); the "
                                 "record must be daily without gaps", param="weather")
        seen[day] = line_no
        dates[k] = day

        def number(col, nonneg=True):
            s = fields[idx[col]].strip()
            if not s:
                raise InputError(f"{where}: {col} is empty", param="weather")
            try:
                v = float(s)
            except ValueError:
                raise InputError(f"{where}: {col} {s!r} is not a number",
                                 param="weather") from None
            if not np.isfinite(v):
                raise InputError(f"{where}: {col} {s!r} is not a finite number",
                                 param="weather")
            if nonneg and v < 0:
                raise InputError(f"{where}: {col} {s} is negative", param="weather")
            return v

        rain[k] = number(rain_col)
        if pet_col is not None:
            second[k] = number(pet_col)
        else:
            second[k] = number(temp_cols[0], nonneg=False)
            third[k] = number(temp_cols[1], nonneg=False)
            if third[k] < second[k]:
                raise InputError(f"{where}: {temp_cols[1]} {third[k]:g} is below "
                                 f"{temp_cols[0]} {second[k]:g}", param="weather")
    return dates, rain, second, third


def parse_weather(text, *, name="weather", latitude=None):
    """Read a daily weather CSV from text.

    Parameters
    ----------
    text : str
        The file's content.
    name : str
        Shown in error messages.
    latitude : float, optional
        Latitude [degrees] for Hargreaves-Samani (required when the file gives
        temperatures instead of PET).

    Returns
    -------
    Weather

    Raises
    ------
    drainplan.errors.InputError
        One line naming the file, the line number and the problem: a missing
        column, an unreadable or negative value, a repeated date, a gap.

    Examples
    --------
    >>> w = parse_weather("date,rain_mm,pet_mm\\n2001-01-01,4.0,0.5\\n2001-01-02,0,0.6\\n")
    >>> w.rain.tolist(), str(w.dates[-1])
    ([0.004, 0.0], '2001-01-02')
    >>> try:
    ...     parse_weather("date,rain_mm,pet_mm\\n2001-01-01,4,0\\n2001-01-03,1,0\\n")
    ... except ValueError as exc:
    ...     print(str(exc)[:61])
    weather line 3: date 2001-01-03 leaves a gap after 2001-01-01
    """
    lines = text.splitlines()
    rows = [(i, ln) for i, ln in enumerate(lines, start=1)
            if ln.strip() and not ln.lstrip().startswith("#")]
    if not rows:
        raise InputError(f"{name}: the file is empty", param="weather")
    header_line, header = rows[0][0], next(csv.reader([rows[0][1]]))
    cols, rain_col, pet_col, temp_cols = _columns(header, name)
    idx = {c: cols.index(c) for c in cols}
    if temp_cols is not None:
        if latitude is None:
            raise InputError(f"{name}: the file gives temperatures, not PET; the latitude is "
                             "needed for Hargreaves-Samani (--latitude)", param="latitude")
        lat = float(latitude)
        if not (np.isfinite(lat) and -90.0 <= lat <= 90.0):
            raise InputError(f"latitude {latitude} must lie between -90 and 90 degrees",
                             param="latitude")
    data = rows[1:]
    if not data:
        raise InputError(f"{name}: no data rows after the header (line {header_line})",
                         param="weather")
    parsed = _parse_rows_fast(data, cols, idx, rain_col, pet_col, temp_cols)
    if parsed is None:                  # something to report: read line by line, say where
        parsed = _parse_rows(data, cols, idx, rain_col, pet_col, temp_cols, name)
    dates, rain, second, third = parsed
    to_m = 0.001 if rain_col.endswith("_mm") else _INCH
    rain = rain * to_m
    if pet_col is not None:
        pet = second * (0.001 if pet_col.endswith("_mm") else _INCH)
        return Weather(dates, rain, pet, "file", None, name)
    tn, tx = second, third
    if temp_cols[0].endswith("_f"):
        tn, tx = (tn - 32.0) / 1.8, (tx - 32.0) / 1.8
    doy = (dates - dates.astype("datetime64[Y]")).astype(int) + 1
    pet = hargreaves_samani(tmin=tn, tmax=tx, latitude=lat, day_of_year=doy)
    return Weather(dates, rain, np.asarray(pet, float), "hargreaves-samani", lat, name,
                   (f"PET by Hargreaves-Samani (FAO-56 Eq. 52) at latitude {lat:.2f} deg",))


def read_weather(path, *, latitude=None):
    """Read a daily weather CSV file (see :func:`parse_weather`)."""
    from ._textfile import read_text_file

    text = read_text_file(path, what="weather file", param="weather", encoding="utf-8-sig")
    return parse_weather(text, name=Path(path).name, latitude=latitude)


def parse_season(text):
    """A growing season ``"MM-DD:MM-DD"`` (first and last day, may wrap the year end).

    Returns
    -------
    tuple of two (month, day) pairs, or None for ``None``/``"all"`` (the whole record).

    Examples
    --------
    >>> parse_season("03-15:06-30")
    ((3, 15), (6, 30))
    """
    if text is None or str(text).strip().lower() in ("", "all", "whole-record"):
        return None
    parts = str(text).strip().split(":")
    try:
        if len(parts) != 2:
            raise ValueError
        out = []
        for part in parts:
            m, d = (int(v) for v in part.split("-"))
            np.datetime64(f"2000-{m:02d}-{d:02d}")          # a leap year accepts 02-29
            out.append((m, d))
    except ValueError:
        raise InputError(f"season {text!r} must be MM-DD:MM-DD, e.g. 03-15:06-30 "
                         "(first and last day), or 'all'", param="season") from None
    return tuple(out)


def season_years(dates, season):
    """Which days fall in the season, and the season-year each belongs to.

    Parameters
    ----------
    dates : numpy.ndarray of datetime64[D]
    season : tuple or None
        From :func:`parse_season`; None means every day (seasons are calendar years).

    Returns
    -------
    mask : numpy.ndarray of bool
    year : numpy.ndarray of int
        The calendar year in which the day's season starts.

    Examples
    --------
    >>> d = np.arange(np.datetime64("2001-12-30"), np.datetime64("2002-01-03"))
    >>> m, y = season_years(d, ((12, 31), (1, 1)))
    >>> m.tolist(), y[m].tolist()
    ([False, True, True, False], [2001, 2001])
    """
    years = dates.astype("datetime64[Y]").astype(int) + 1970
    if season is None:
        return np.ones(dates.size, bool), years
    months = dates.astype("datetime64[M]").astype(int) % 12 + 1
    days = (dates - dates.astype("datetime64[M]")).astype(int) + 1
    key = months * 100 + days
    (m0, d0), (m1, d1) = season
    k0, k1 = m0 * 100 + d0, m1 * 100 + d1
    if k0 <= k1:
        return (key >= k0) & (key <= k1), years
    mask = (key >= k0) | (key <= k1)
    return mask, np.where(key >= k0, years, years - 1)
