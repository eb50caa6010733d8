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


# ---- project file: [[soil.tests]] and the spread of K

_TEST_KEYS = {"kind": "choice", "place": "text", "hole_radius": "length",
              "hole_depth": "length", "water_table_depth": "length",
              "barrier_depth": "length", "readings": "readings", "readings_file": "path",
              "k": "rate", "intermediate_barrier": "choice", "notes": "text"}


def convert_tests(value, base, name="soil.tests"):
    """``[[soil.tests]]`` tables -> one flat entry per test with its K (SI).

    Each entry: ``place``, ``kind``, ``k`` [m/d], ``readings`` ("3 of 4" used, or
    "–"), ``note`` (text). Readings may be given inline (``"0:1.40,40:1.34"`` or
    ``[[0, 1.40], [40, 1.34]]``, seconds and metres) or in a CSV file.
    """
    import difflib

    from .units import parse_quantity

    if not isinstance(value, list) or not value or not all(isinstance(v, dict) for v in value):
        raise InputError(f"{name} must be a list of [[soil.tests]] tables")
    out = []
    for i, entry in enumerate(value, start=1):
        where = f"{name}[{i}]"
        test = {}
        for key, v in entry.items():
            kind = _TEST_KEYS.get(key)
            if kind is None:
                close = difflib.get_close_matches(key, list(_TEST_KEYS), n=1, cutoff=0.5)
                raise InputError(f"unknown key {where}.{key}"
                                 + (f" (did you mean {close[0]!r}?)" if close else ""))
            if kind in ("text", "choice"):
                if not isinstance(v, str):
                    raise InputError(f"{where}.{key} must be text, got {v!r}")
                test[key] = v
            elif kind == "path":
                test[key] = str((Path(base) / v).resolve()) if isinstance(v, str) else None
                if test[key] is None:
                    raise InputError(f"{where}.{key} must be a file path in quotes")
            elif kind == "readings":
                if isinstance(v, str):
                    t, z = parse_readings(v, name=f"{where}.readings")
                elif isinstance(v, list) and all(isinstance(p, list) and len(p) == 2
                                                 for p in v):
                    try:
                        t = np.array([float(p[0]) for p in v])
                        z = np.array([float(p[1]) for p in v])
                    except (TypeError, ValueError):
                        raise InputError(f"{where}.readings must be [[seconds, metres], ...]"
                                         ) from None
                else:
                    raise InputError(f"{where}.readings must be \"SECONDS:METRES,...\" or "
                                     "[[seconds, metres], ...]")
                test["times"], test["water_depths"] = t, z
            else:
                test[key] = parse_quantity(v, kind, name=f"{where}.{key}")
        if "kind" not in test:
            raise InputError(f"{where}.kind is required ({', '.join(TEST_KINDS)})")
        if test["kind"] not in TEST_KINDS:
            raise InputError(f"{where}.kind must be one of {', '.join(TEST_KINDS)}; got "
                             f"{test['kind']!r}")
        if "readings_file" in test:
            if "times" in test:
                raise InputError(f"{where}: give readings or readings_file, not both")
            test["times"], test["water_depths"] = read_readings_csv(test.pop("readings_file"))
        test.setdefault("place", f"test {i}")
        r = reduce_test(test)
        out.append({"place": r["place"], "kind": r["kind"], "k": r["k_m_per_d"],
                    "readings": r["readings_used"] or "–", "note": "; ".join(r["notes"])})
    return out


def apply_tests(soil, criteria):
    """Fill in what the tests give: the design K (when no K is given), the summary,
    and the spread of K used for the uncertainty (``soil["k_log_sd"]``)."""
    from .uncertainty import lognormal_log_sd

    tests = soil.get("tests")
    if tests:
        summary = k_summary([t["k"] for t in tests], percentile=soil.get("tests_percentile"))
        given = [k for k in ("k", "k_above", "k_below", "layers") if k in soil]
        summary["used_for"] = ("the design K (soil.k)" if not given else
                               "the spread of K only (K from "
                               + " and ".join(f"soil.{g}" for g in given) + ")")
        soil["tests_summary"] = summary
        if not given:
            soil["k"] = summary["design_k"]
    elif "tests_percentile" in soil:
        raise InputError("soil.tests_percentile needs [[soil.tests]]")
    if "k_cv" in soil:
        soil["k_log_sd"] = lognormal_log_sd(soil["k_cv"])
    elif tests and len(tests) >= 2:
        soil["k_log_sd"] = soil["tests_summary"]["log_sd"]
    if "confidence" in criteria:
        c = criteria["confidence"]
        if not 0.5 <= c < 1:
            raise InputError(f"criteria.confidence must be from 0.5 to below 1 (e.g. 0.8), "
                             f"got {c:g}")
        if not (soil.get("k_log_sd") or "drainable_porosity_range" in soil
                or "barrier_depth_range" in soil):
            raise InputError("criteria.confidence needs a spread: soil.k_cv, two or more "
                             "[[soil.tests]] or a range (soil.drainable_porosity_range, "
                             "soil.barrier_depth_range)")
