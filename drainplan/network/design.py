"""Pipe network of a layout: flows, invert profiles, grades, sizes and checks.

Works on shapely geometries in metres (the layout's working CRS) and an
elevation surface from :mod:`drainplan.terrain`. Each lateral run (its
perforated pieces plus any connectors, from the far end to its junction on the
main) is one reach; each main is split into reaches between junctions. Flows
accumulate downstream; inverts follow the ground at the design depth where that
gives a usable grade, and otherwise a constant-grade line kept inside the depth
limits. Every problem is reported with its place and a suggested fix.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import DrainplanError, InputError
from .hydraulics import (CAPACITY_METHODS, DEFAULT_CAPACITY_FACTOR, design_flow,
                    manning_full_capacity, manning_n, pipe_series, power_law_capacity,
                    select_size)

__all__ = ["PipeOptions", "LateralRun", "PipeDesign", "design_pipes"]

_STEP = 5.0   # m between profile samples


@dataclass(frozen=True)
class PipeOptions:
    """Pipe design options (SI: m, m/d, m/m, m/s).

    Defaults are common practice where no single source governs: minimum grade
    0.1 % (0.05 % is possible with laser control and no sediment risk), minimum
    cover 0.6 m (about 2 ft over the pipe in mineral soil), maximum trench depth
    2.0 m, free outfall 0.10 m above the receiving water.
    """

    coefficient: float
    material: str = "corrugated"
    series: str = "metric"
    method: str = "manning"
    capacity_factor: float = DEFAULT_CAPACITY_FACTOR
    drain_depth: float = 1.0
    main_depth: float | None = None          # default drain depth + 0.3 m
    min_grade: float = 0.001
    max_grade: float = 0.05
    min_cover: float = 0.6
    max_depth: float = 2.0
    min_velocity: float = 0.15
    max_velocity: float = 1.5
    ditch_water_level: float | None = None   # m, same datum as the elevations
    outfall_margin: float = 0.10
    assumed_grade: float = 0.001             # used where no elevations are given
    sizes_path: str | None = None

    def validate(self):
        if not (self.coefficient > 0 and np.isfinite(self.coefficient)):
            raise InputError("drainage coefficient must be greater than 0", param="coefficient")
        if self.method not in CAPACITY_METHODS:
            raise InputError(f"capacity method {self.method!r} is unknown; choose one of "
                             + ", ".join(CAPACITY_METHODS), param="method")
        if not 0 < self.capacity_factor <= 1:
            raise InputError("capacity factor must lie in (0, 1]", param="capacity_factor")
        if not 0 < self.min_grade < self.max_grade:
            raise InputError("grades need 0 < minimum grade < maximum grade",
                             param="min_grade")
        if not 0 < self.drain_depth <= self.max_depth:
            raise InputError(f"drain depth {self.drain_depth:g} m must be positive and not "
                             f"deeper than the maximum depth {self.max_depth:g} m",
                             param="drain_depth")
        if self.min_cover < 0 or self.min_cover >= self.max_depth:
            raise InputError("minimum cover must be 0 or more and less than the maximum depth",
                             param="min_cover")


@dataclass
class LateralRun:
    """One lateral from its far end to its junction on the main (metres)."""

    run_id: str
    field_id: str
    line: object                 # LineString, far end -> junction
    perforated_length: float
    spacing: float


@dataclass
class PipeDesign:
    """Result of :func:`design_pipes`."""

    reaches: list
    violations: list
    takeoff: list
    profiles: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)
    totals: dict = field(default_factory=dict)


def _grade_line(ch, ground, design_depth, min_depth, max_depth, min_grade, max_grade):
    """Invert along a reach that flows towards increasing chainage.

    Returns (invert, ok, message): the constant-depth invert where its grades
    lie within the limits everywhere, else a constant-grade line within the
    depth limits (upstream end as close to the design depth as they allow).
    """
    inv = ground - design_depth
    seg = -np.diff(inv) / np.diff(ch)
    if seg.size and np.all(seg >= min_grade - 1e-12) and np.all(seg <= max_grade + 1e-12):
        return inv, True, None
    length = ch[-1] - ch[0]
    natural = (inv[0] - inv[-1]) / length if length > 0 else min_grade
    g = float(np.clip(natural, min_grade, max_grade))
    hi = np.min(ground + g * ch - min_depth)   # invert at ch=0 must keep cover everywhere
    lo = np.max(ground + g * ch - max_depth)   # ... and not exceed the maximum depth
    z0 = float(np.clip(ground[0] - design_depth, lo, hi))
    msg = None
    if lo > hi:
        z0 = hi
        msg = "no constant grade keeps the pipe within the cover and depth limits"
    return z0 - g * ch, msg is None, msg


def _violation(reach_id, chainage, xy, problem, fix):
    return {"reach_id": reach_id, "chainage_m": round(float(chainage), 2),
            "x": round(float(xy[0]), 3), "y": round(float(xy[1]), 3),
            "problem": problem, "fix": fix}


def design_pipes(runs, mains, options, *, surface=None, receiving_outlet=None):
    """Size and grade the laterals and mains of a layout.

    Parameters
    ----------
    runs : list of LateralRun
    mains : dict field_id -> LineString
        Each main ordered from its upstream end to its outlet.
    options : PipeOptions
    surface : callable, optional
        Ground elevation for an (n, 2) array of points; None: grades are the
        assumed grade and no profile checks are made.
    receiving_outlet : (x, y), optional
        Point of the receiving ditch; the nearest main outlet gets the outlet pipe.

    Returns
    -------
    PipeDesign
    """
    import shapely

    options.validate()
    main_depth = options.main_depth if options.main_depth is not None \
        else options.drain_depth + 0.3
    if not 0 < main_depth <= options.max_depth:
        raise InputError(f"main depth {main_depth:g} m must be positive and not deeper "
                         f"than the maximum depth {options.max_depth:g} m", param="main_depth")
    series = pipe_series(options.material, options.series, path=options.sizes_path)
    q = options.coefficient
    reaches, violations, notes = [], [], []
    profiles = {}
    method_text = ("Manning full-flow capacity, n by material and size "
                   "(templates/manning_n.csv)" if options.method == "manning" else
                   "drain-pipe power laws (laterals with uniform inflow)")
    notes.append(f"capacities: {method_text}, of which {options.capacity_factor:.0%} is used "
                 "(allowance for sediment and partial clogging)")
    if surface is None:
        notes.append(f"no elevations given: every pipe sized at the assumed grade "
                     f"{options.assumed_grade:.2%}; grades and cover are not checked")

    # --- main profiles first (laterals must join above them)
    main_profiles = {}
    for fid, main in mains.items():
        ch, xy = _samples(main)
        if surface is None:
            inv = None
        else:
            ground = surface(xy)
            inv, ok, msg = _grade_line(ch, ground, main_depth,
                                       options.min_cover + 0.2, options.max_depth,
                                       options.min_grade, options.max_grade)
            if not ok:
                violations.append(_violation(f"{fid}-M", 0.0, xy[0], msg,
                                             "split the main, lower the outlet or accept "
                                             "a deeper trench"))
            profiles[f"{fid}-M"] = {"chainage": ch, "ground": ground, "invert": inv}
        main_profiles[fid] = (main, ch, xy, inv)

    # --- laterals
    lat_rows = []
    for run in runs:
        ch, xy = _samples(run.line)
        length = float(run.line.length)
        area = run.perforated_length * run.spacing
        flow = float(design_flow(q, area))
        row = {"reach_id": run.run_id, "kind": "lateral", "field_id": run.field_id,
               "from": "end", "to": f"{run.field_id}-M", "length_m": length,
               "drained_area_ha": area / 1e4, "flow_l_s": flow * 1000.0, "warnings": []}
        if surface is None:
            grade = options.assumed_grade
            row.update(invert_up_m=None, invert_down_m=None, cover_min_m=None)
        else:
            ground = surface(xy)
            inv, ok, msg = _grade_line(ch, ground, options.drain_depth,
                                       options.min_cover + 0.1, options.max_depth,
                                       options.min_grade, options.max_grade)
            if not ok:
                violations.append(_violation(run.run_id, 0.0, xy[0], msg,
                                             "shorten the lateral, add a junction closer "
                                             "to its end, or accept a deeper trench"))
                row["warnings"].append("grade/depth limits")
            grade = (inv[0] - inv[-1]) / length if length > 0 else options.min_grade
            row.update(invert_up_m=float(inv[0]), invert_down_m=float(inv[-1]))
            profiles[run.run_id] = {"chainage": ch, "ground": ground, "invert": inv}
            # junction: lateral invert above the main invert there
            mp = main_profiles.get(run.field_id)
            if mp is not None and mp[3] is not None:
                main, mch, _, minv = mp
                jch = main.project(shapely.Point(xy[-1]))
                main_inv = float(np.interp(jch, mch, minv))
                row["main_invert_at_junction_m"] = main_inv
                if inv[-1] < main_inv:
                    violations.append(_violation(
                        run.run_id, length, xy[-1],
                        f"lateral invert {inv[-1]:.2f} m is below the main invert "
                        f"{main_inv:.2f} m at the junction",
                        "lower the main here or raise the lateral's outlet end"))
                    row["warnings"].append("junction below main")
            row["_ground"] = ground
        row["grade"] = float(grade)
        row["_junction"] = xy[-1]
        row["_start"] = xy[0]
        lat_rows.append(row)

    _size_rows(lat_rows, series, options, uniform_inflow=True)
    for row in lat_rows:
        if "_ground" in row:
            row["cover_min_m"] = _min_cover(row, row.pop("_ground"), series)
            if row["cover_min_m"] < options.min_cover - 1e-9:
                violations.append(_violation(row["reach_id"], 0.0, row["_start"],
                                             f"cover {row['cover_min_m']:.2f} m is less than "
                                             f"{options.min_cover:.2f} m", "deepen the pipe"))
                row["warnings"].append("shallow cover")
    reaches.extend(lat_rows)

    # --- main reaches between junctions
    for fid, (main, mch, mxy, minv) in main_profiles.items():
        these = [r for r in lat_rows if r["field_id"] == fid]
        if not these:
            continue
        jch = np.array([main.project(shapely.Point(r["_junction"])) for r in these])
        areas = np.array([r["drained_area_ha"] * 1e4 for r in these])
        cuts = np.unique(np.r_[0.0, jch, main.length].round(6))
        cuts = cuts[(cuts >= 0) & (cuts <= main.length + 1e-9)]
        main_rows = []
        for k in range(len(cuts) - 1):
            a, b = cuts[k], cuts[k + 1]
            if b - a < 1e-6:
                continue
            up_area = areas[jch <= a + 1e-6].sum()
            flow = float(design_flow(q, up_area)) if up_area > 0 else 0.0
            row = {"reach_id": f"{fid}-M{k + 1:02d}", "kind": "main", "field_id": fid,
                   "from": f"{a:.1f} m", "to": f"{b:.1f} m", "length_m": float(b - a),
                   "drained_area_ha": up_area / 1e4, "flow_l_s": flow * 1000.0,
                   "warnings": [], "main_chainage_m": [float(a), float(b)],
                   "_start": np.asarray(main.interpolate(a).coords[0])}
            if minv is None:
                row["grade"] = options.assumed_grade
                row.update(invert_up_m=None, invert_down_m=None, cover_min_m=None)
            else:
                iu, idn = np.interp([a, b], mch, minv)
                row.update(grade=float((iu - idn) / (b - a)), invert_up_m=float(iu),
                           invert_down_m=float(idn))
            main_rows.append(row)
        lat_idx = np.array([_size_index(r, series) for r in these])
        floor = [int(lat_idx[jch <= r["main_chainage_m"][0] + 1e-6].max(initial=-1))
                 for r in main_rows]
        _size_rows(main_rows, series, options, uniform_inflow=False, taper=True,
                   min_index=np.array(floor, int))
        if minv is not None:
            ground = profiles[f"{fid}-M"]["ground"]
            for row in main_rows:
                a, b = row["main_chainage_m"]
                sel = (mch >= a - 1e-9) & (mch <= b + 1e-9)
                depth = np.interp(mch[sel], mch, ground) - np.interp(mch[sel], mch, minv)
                row["cover_min_m"] = float(depth.min() - _outside(row, series))
                if row["cover_min_m"] < options.min_cover - 1e-9:
                    xy = main.interpolate(a).coords[0]
                    violations.append(_violation(row["reach_id"], a, xy,
                                                 f"cover {row['cover_min_m']:.2f} m is less "
                                                 f"than {options.min_cover:.2f} m",
                                                 "deepen the main"))
                    row["warnings"].append("shallow cover")
        # outlet level
        if minv is not None and options.ditch_water_level is not None:
            out_inv = float(minv[-1])
            need = options.ditch_water_level + options.outfall_margin
            if out_inv < need:
                violations.append(_violation(
                    f"{fid}-M", main.length, main.coords[-1],
                    f"outlet invert {out_inv:.2f} m is below the receiving water level "
                    f"{options.ditch_water_level:.2f} m + {options.outfall_margin:.2f} m",
                    "raise the main (shallower design), lower the ditch, or use a pumped "
                    "outlet"))
        reaches.extend(main_rows)

    # velocities and flags
    for row in reaches:
        _velocity_checks(row, options, violations)
    for row in reaches:
        for k in [k for k in row if k.startswith("_")]:
            row.pop(k)
        row["warnings"] = "; ".join(row["warnings"])

    takeoff = _takeoff(reaches, mains, receiving_outlet)
    out_flow = sum(r["flow_l_s"] for r in reaches if r["kind"] == "lateral")
    totals = {
        "drained_area_ha": sum(r["drained_area_ha"] for r in reaches if r["kind"] == "lateral"),
        "outlet_flow_l_s": out_flow,
        "lateral_length_m": sum(r["length_m"] for r in reaches if r["kind"] == "lateral"),
        "main_length_m": sum(r["length_m"] for r in reaches if r["kind"] == "main"),
        "violations": len(violations),
    }
    return PipeDesign(reaches, violations, takeoff, profiles, notes, totals)


def _samples(line):
    from ..terrain import sample_line

    return sample_line(line, _STEP)


def _size_index(row, series):
    return series.nominal.index(row["size"]) if row.get("size") in series.nominal else -1


def _size_rows(rows, series, options, *, uniform_inflow, taper=False, min_index=None):
    if not rows:
        return
    flow = np.array([r["flow_l_s"] / 1000.0 for r in rows])
    grade = np.array([max(r["grade"], 1e-9) for r in rows])
    idx, cap = select_size(flow, grade, series, method=options.method,
                           uniform_inflow=uniform_inflow,
                           capacity_factor=options.capacity_factor)
    if taper:
        # never a smaller pipe downstream, nor smaller than a lateral it receives
        if min_index is not None:
            idx = np.where(idx < 0, idx, np.maximum(idx, min_index))
        run_max = np.maximum.accumulate(np.where(idx < 0, len(series.nominal), idx))
        idx = np.where(run_max >= len(series.nominal), -1, run_max)
        d = series.inner_diameter[np.maximum(idx, 0)]
        cap = np.where(idx >= 0, _capacity(d, grade, series, options, uniform_inflow), np.nan)
    if np.any(idx < 0):
        k = int(np.flatnonzero(idx < 0)[0])
        r = rows[k]
        raise DrainplanError(
            f"no {series.series} {series.material} pipe up to {series.nominal[-1]} carries "
            f"{r['flow_l_s']:.1f} L/s at a grade of {r['grade']:.2%} (reach {r['reach_id']}); "
            "choose another material or size series, or split the system",
            param="material")
    for r, i, c, s in zip(rows, idx, cap, grade):
        r["material"] = series.material
        d = float(series.inner_diameter[i])
        r["size"] = series.nominal[i]
        r["inner_diameter_mm"] = round(d * 1000.0, 1)
        r["capacity_l_s"] = float(c) * 1000.0
        r["capacity_used_pct"] = 100.0 * r["flow_l_s"] / (float(c) * 1000.0) if c > 0 else None
        full = _capacity(np.array([d]), np.array([s]), series, options, False)[0]
        r["velocity_m_s"] = float(full / (np.pi * d * d / 4.0))


def _capacity(d, grade, series, options, uniform_inflow):
    if options.method == "manning":
        cap = manning_full_capacity(d, grade, manning_n(series.material, d))
    else:
        wall = "smooth" if series.material in ("smooth", "clay") else "corrugated"
        cap = power_law_capacity(d, grade, wall=wall, uniform_inflow=uniform_inflow)
    return np.asarray(cap, float) * options.capacity_factor


def _outside(row, series):
    """Outside diameter estimate [m]: corrugated walls add about 15 % [PRACTICE]."""
    d = (row.get("inner_diameter_mm") or 100.0) / 1000.0
    return d * (1.15 if series.material == "corrugated" else 1.1)


def _min_cover(row, ground, series):
    inv = np.linspace(row["invert_up_m"], row["invert_down_m"], ground.size)
    return float(np.min(ground - inv) - _outside(row, series))


def _velocity_checks(row, options, violations):
    v = row.get("velocity_m_s")
    if v is None:
        return
    xy = row.get("_start", (None, None))
    x, y = (round(float(xy[0]), 3), round(float(xy[1]), 3)) if xy[0] is not None else (None,
                                                                                        None)
    if v < options.min_velocity:
        row["warnings"].append(f"full-flow velocity {v:.3f} m/s below {options.min_velocity:.2f}")
        violations.append({"reach_id": row["reach_id"], "chainage_m": 0.0, "x": x,
                           "y": y, "problem": f"full-flow velocity {v:.3f} m/s is below "
                           f"the self-cleaning minimum {options.min_velocity:.2f} m/s",
                           "fix": "steepen the grade or use a smaller pipe if capacity allows"})
    if v > options.max_velocity:
        row["warnings"].append(f"full-flow velocity {v:.3f} m/s above {options.max_velocity:.2f}")
        violations.append({"reach_id": row["reach_id"], "chainage_m": 0.0, "x": x,
                           "y": y, "problem": f"full-flow velocity {v:.2f} m/s exceeds "
                           f"{options.max_velocity:.2f} m/s for this soil",
                           "fix": "flatten the grade (drop structure) or protect the "
                           "envelope and joints"})


def _takeoff(reaches, mains, receiving_outlet):
    import shapely

    items = {}
    for r in reaches:
        key = (r["kind"], r["material"], r.get("size") or "no size")
        it = items.setdefault(key, {"kind": r["kind"], "material": r["material"],
                                    "size": r.get("size") or "no size", "length_m": 0.0,
                                    "count": 0, "_d": r.get("inner_diameter_mm") or 1e9})
        it["length_m"] += r["length_m"]
        it["count"] += 1
    rows = sorted(items.values(), key=lambda x: (x["kind"], x["material"], x.pop("_d")))
    laterals = [r for r in reaches if r["kind"] == "lateral"]
    rows.append({"kind": "fitting", "material": "", "size": "junction (tee or wye) on the main",
                 "length_m": 0.0, "count": len(laterals)})
    rows.append({"kind": "fitting", "material": "", "size": "end cap (lateral upstream end)",
                 "length_m": 0.0, "count": len(laterals)})
    # outlet pipe: rigid non-perforated pipe at each main outlet (common practice:
    # about 6 m / 20 ft), longer where the receiving ditch is farther away
    total = 0.0
    for fid, main in mains.items():
        end = shapely.Point(main.coords[-1])
        dist = end.distance(shapely.Point(receiving_outlet)) if receiving_outlet else 0.0
        total += max(6.0, dist) if receiving_outlet is None or dist < 50 else 6.0
    rows.append({"kind": "outlet", "material": "rigid, non-perforated",
                 "size": "as the last main reach", "length_m": round(total, 1),
                 "count": len(mains)})
    for r in rows:
        r["length_m"] = round(r["length_m"], 1)
    return rows
