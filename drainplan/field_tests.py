"""Field tests at the edge: readings from text or CSV files, and several tests reduced
to one design K with its spread.

This is the project-pipeline side of :mod:`drainplan.auger_hole`: it reads the
readings (the only file access for field tests), converts their units, calls
the core reductions and summarises a field's tests with
:func:`drainplan.uncertainty.k_summary`.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np

from .auger_hole import auger_hole_test, inverse_auger_hole_test
from .errors import InputError
from .uncertainty import k_summary

__all__ = ["TEST_KINDS", "parse_readings", "read_readings_csv", "reduce_test",
           "summarise_tests"]

#: Kinds of field test accepted in ``[[soil.tests]]``.
TEST_KINDS = ("auger-hole", "inverse-auger-hole", "k")

_TIME_UNITS = ("s", "min", "h")
_DEPTH_UNITS = ("m", "cm", "mm", "ft", "in")


def parse_readings(text, *, name="--readings"):
    """Readings typed as ``"0:1.40,40:1.34,80:1.285"`` (seconds : metres below the surface).

    Returns
    -------
    (numpy.ndarray, numpy.ndarray)
        Times [s] and depths to water [m].

    Examples
    --------
    >>> t, z = parse_readings("0:1.40, 40:1.34")
    >>> t.tolist(), z.tolist()
    ([0.0, 40.0], [1.4, 1.34])
    """
    times, depths = [], []
    for item in str(text).replace(";", ",").split(","):
        item = item.strip()
        if not item:
            continue
        parts = item.split(":")
        try:
            if len(parts) != 2:
                raise ValueError
            times.append(float(parts[0]))
            depths.append(float(parts[1]))
        except ValueError:
            raise InputError(f"{name}: cannot read {item!r}; expected SECONDS:METRES pairs such "
                             "as '0:1.40,40:1.34'", param="readings") from None
    if len(times) < 2:
        raise InputError(f"{name}: at least two readings SECONDS:METRES are needed",
                         param="readings")
    return np.array(times), np.array(depths)


def _unit(header, prefix, allowed):
    unit = header[len(prefix):].lstrip("_")
    if unit not in allowed:
        raise InputError(f"readings file: column {header!r} needs a unit suffix, one of "
                         + ", ".join(f"{prefix}_{u}" for u in allowed), param="readings_file")
    return unit


def read_readings_csv(path):
    """Read a readings CSV: a ``time_<unit>`` and a ``water_depth_<unit>`` column.

    Time units s, min or h; depth units m, cm, mm, ft or in (for example
    ``time_s,water_depth_m`` or ``time_min,water_depth_cm``). Depths are to
    the water in the hole below the ground surface.

    Returns
    -------
    (numpy.ndarray, numpy.ndarray)
        Times [s] and depths to water [m].
    """
    from .units import convert

    p = Path(path)
    try:
        with p.open(newline="", encoding="utf-8-sig") as fh:
            rows = list(csv.reader(fh))
    except FileNotFoundError:
        raise InputError(f"readings file not found: {path}", param="readings_file") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read readings file {path}: {exc}",
                         param="readings_file") from None
    rows = [r for r in rows if any(c.strip() for c in r)]
    if len(rows) < 3:
        raise InputError(f"{p.name}: needs a header and at least two readings",
                         param="readings_file")
    header = [h.strip().lower() for h in rows[0]]
    tcol = [i for i, h in enumerate(header) if h.startswith("time")]
    zcol = [i for i, h in enumerate(header) if h.startswith("water_depth")]
    if len(tcol) != 1 or len(zcol) != 1:
        raise InputError(f"{p.name}: needs one time_<unit> and one water_depth_<unit> column "
                         "(e.g. time_s,water_depth_m)", param="readings_file")
    tu = _unit(header[tcol[0]], "time", _TIME_UNITS)
    zu = _unit(header[zcol[0]], "water_depth", _DEPTH_UNITS)
    t, z = [], []
    for line, row in enumerate(rows[1:], start=2):
        try:
            t.append(float(row[tcol[0]]))
            z.append(float(row[zcol[0]]))
        except (ValueError, IndexError):
            raise InputError(f"{p.name}, line {line}: expected numbers in the time and "
                             "water-depth columns", param="readings_file") from None
    return (np.asarray(convert(np.array(t), tu, "s"), float),
            np.asarray(convert(np.array(z), zu, "m"), float))


def reduce_test(test):
    """K of one ``[[soil.tests]]`` entry (SI values, readings already read).

    Parameters
    ----------
    test : dict
        ``kind`` (auger-hole, inverse-auger-hole, k); ``place``; for the hole
        methods ``hole_radius``, ``hole_depth``, ``water_table_depth``
        (auger-hole), ``barrier_depth`` (optional), ``times`` [s] and
        ``water_depths`` [m]; for ``k`` the value ``k`` [m/d].

    Returns
    -------
    dict
        ``place``, ``kind``, ``k_m_per_d``, ``readings_used``, ``notes``.
    """
    kind = test.get("kind")
    place = test.get("place", "")
    if kind == "k":
        if "k" not in test:
            raise InputError(f"test {place!r}: kind 'k' needs a value k", param="tests")
        return {"place": place, "kind": kind, "k_m_per_d": float(test["k"]),
                "readings_used": None, "notes": []}
    if kind not in TEST_KINDS:
        raise InputError(f"test {place!r}: kind must be one of {', '.join(TEST_KINDS)}",
                         param="tests")
    for key in ("hole_radius", "hole_depth", "times") + (
            ("water_table_depth",) if kind == "auger-hole" else ()):
        if test.get(key) is None:
            what = "readings or readings_file" if key == "times" else key
            raise InputError(f"test {place!r}: {kind} needs {what}", param="tests")
    try:
        if kind == "auger-hole":
            r = auger_hole_test(hole_radius=test["hole_radius"], hole_depth=test["hole_depth"],
                                water_table_depth=test["water_table_depth"],
                                barrier_depth=test.get("barrier_depth"),
                                times=test["times"], water_depths=test["water_depths"],
                                intermediate_barrier=test.get("intermediate_barrier",
                                                              "refuse"))
        else:
            r = inverse_auger_hole_test(hole_radius=test["hole_radius"],
                                        hole_depth=test["hole_depth"],
                                        water_table_depth=test.get("water_table_depth"),
                                        times=test["times"], water_depths=test["water_depths"])
    except InputError as exc:
        raise InputError(f"test {place!r}: {exc}", param="tests") from None
    return {"place": place, "kind": kind, "k_m_per_d": r.k,
            "readings_used": f"{r.readings_used} of {r.readings_total}", "notes": list(r.notes)}


def summarise_tests(tests, *, percentile=None):
    """Reduce every test and summarise them into a design K and spread.

    Returns
    -------
    dict
        ``tests`` (one dict per test, see :func:`reduce_test`) and the keys of
        :func:`drainplan.uncertainty.k_summary`.
    """
    rows = [reduce_test(t) for t in tests]
    summary = k_summary([r["k_m_per_d"] for r in rows], percentile=percentile)
    return {"tests": rows, **summary}
