"""The drainage network as a tree: flows to the outlet, vertical design from the
outlet up, sizes and checks.

Works on shapely geometries in metres (the layout's working CRS) and an
elevation surface from :mod:`drainplan.terrain`. The network is a tree per
outlet: lateral runs (their perforated pieces plus any connectors, from the far
end to where they join) drain into *carriers* — sub-mains, mains and trunk
segments — and every carrier drains into another carrier or to an outlet.

Flows
    Every lateral's drained area (perforated length x spacing) adds to the reach
    it joins and to everything downstream, so the flow at the outlet is the
    drainage coefficient times the drained area served (mass balance).
Vertical design
    Two passes over the tree. Upwards from the leaves, each pipe gets the highest
    invert that keeps it at or below its design depth everywhere and falls at
    least the minimum grade towards the outlet: where the ground falls enough the
    pipe follows it at the design depth, on flat ground it deepens downstream at
    the minimum grade. Junction rule: the joining pipe's invert is at or above the
    receiving pipe's invert at the junction (inverts matched at the lowest), so
    the receiving pipe is lowered where a joining pipe needs it. Then from the
    outlet up: the outlet invert is the receiving water level plus the free-outfall
    margin where that is higher than the network needs (the pipes above are raised
    just enough to keep the minimum grade), otherwise the network's own. Only what
    then exceeds the depth, cover or grade limits is reported, once per pipe, with
    its place and fix.
Sizes
    The smallest size whose design capacity (a share of the full capacity)
    carries the flow at the reach's grade; never smaller downstream along a
    carrier, nor smaller than a pipe it receives. A reach beyond the size table is
    marked with its fix and the rest of the network is still designed.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from .hydraulics import (CAPACITY_METHODS, DEFAULT_CAPACITY_FACTOR, POWER_LAW_RANGE,
                         design_flow, manning_n, outside_diameter, pipe_capacity, pipe_series,
                         power_law_outside, select_size)

__all__ = ["PipeOptions", "LateralRun", "Carrier", "PipeDesign", "design_network",
           "design_pipes", "group_problems", "JUNCTION_RULE"]

_STEP = 5.0   # m between profile samples

#: The junction rule of the vertical design, as printed in the notes.
JUNCTION_RULE = ("junction rule: a joining pipe's invert is at or above the receiving "
                 "pipe's invert at the junction")


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
    envelope: str | None = None              # "sock", "gravel" or None (bare pipe)
    outlet_pipe_length: float = 6.0          # m of rigid outlet pipe per outlet

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
    """One lateral from its far end to where it joins (metres).

    ``to`` is the id of the carrier it joins (default: its field's main,
    ``<field>-M``; None drains straight to an outlet). ``connector_length`` is
    the non-perforated part of ``line`` (connectors across exclusions or bends).
    """

    run_id: str
    field_id: str
    line: object                 # LineString, far end -> junction
    perforated_length: float
    spacing: float
    to: str | None = ""
    connector_length: float = 0.0

    def target(self):
        return f"{self.field_id}-M" if self.to == "" else self.to


@dataclass
class Carrier:
    """A sub-main, main or trunk segment: ``line`` from upstream to downstream; ``to``
    the carrier it drains into (None: an outlet, ``outlet``)."""

    carrier_id: str
    kind: str                    # "submain", "main", "trunk"
    field_id: str
    line: object
    to: str | None = None
    outlet: str = "O1"


@dataclass
class PipeDesign:
    """Result of :func:`design_network`."""

    reaches: list
    violations: list
    takeoff: list
    profiles: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)
    totals: dict = field(default_factory=dict)
    outlets: list = field(default_factory=list)
    problem_summary: list = field(default_factory=list)
    main_path: list = field(default_factory=list)    # carrier ids, outlet first


def _violation(kind, reach_id, chainage, xy, problem, fix):
    return {"kind": kind, "reach_id": reach_id, "chainage_m": round(float(chainage), 2),
            "x": round(float(xy[0]), 3) if xy is not None else None,
            "y": round(float(xy[1]), 3) if xy is not None else None,
            "problem": problem, "fix": fix}


def group_problems(violations, first=3):
    """One line per kind of problem: its count, the first few places and the fix.

    Examples
    --------
    >>> v = [{"kind": "depth", "reach_id": r, "problem": "too deep", "fix": "lift"}
    ...      for r in ("A", "B", "C", "D")]
    >>> group_problems(v)
    ['too deep: 4 pipes (A, B, C, ...) -> lift']
    """
    groups = {}
    for v in violations:
        groups.setdefault(v.get("kind") or v["problem"], []).append(v)
    out = []
    for kind, vs in groups.items():
        places = ", ".join(v["reach_id"] for v in vs[:first]) + (", ..." if len(vs) > first
                                                                  else "")
        head = vs[0].get("summary") or vs[0]["problem"]
        out.append(f"{head}: {len(vs)} pipe{'s' if len(vs) != 1 else ''} ({places}) -> "
                   f"{vs[0]['fix']}")
    return out


def _samples(line, extra=()):
    """Chainages every ``_STEP`` m (ends and ``extra`` chainages included) and points
    (interpolated along the polyline's vertices with numpy)."""
    c = np.asarray(line.coords, float)[:, :2]
    cum = np.r_[0.0, np.cumsum(np.hypot(*np.diff(c, axis=0).T))]
    length = float(cum[-1])
    n = max(2, int(np.ceil(length / _STEP)) + 1)
    ch = np.linspace(0.0, length, n)
    if len(extra):
        ex = np.unique(np.clip(np.asarray(extra, float), 0.0, length))
        near = np.abs(ch[:, None] - ex[None, :]).min(axis=1) < 1.0
        near[[0, -1]] = False
        ch = np.unique(np.r_[ch[~near], ex])
    return ch, np.c_[np.interp(ch, cum, c[:, 0]), np.interp(ch, cum, c[:, 1])]


def _highest_invert(ch, cap, min_grade, max_grade=None):
    """Highest invert z(ch) with z <= cap everywhere and z falling at least
    ``min_grade`` towards increasing chainage: z_i = min_{j<=i} (cap_j + g c_j) - g c_i;
    then, where the ground falls faster than ``max_grade``, the pipe is laid deeper
    upstream so that it falls no faster: z_i <= min_{j>=i} (z_j + G c_j) - G c_i."""
    z = np.minimum.accumulate(cap + min_grade * ch) - min_grade * ch
    if max_grade is not None:
        w = (z + max_grade * ch)[::-1]
        z = np.minimum(z, np.minimum.accumulate(w)[::-1] - max_grade * ch)
    return z


def design_network(runs, carriers, options, *, surface=None, outlets=None):
    """Flows, vertical design, sizes and checks of a drainage network.

    Parameters
    ----------
    runs : list of LateralRun
    carriers : list of Carrier
        Sub-mains, mains and trunk segments; together with the runs one tree per
        outlet.
    options : PipeOptions
    surface : callable, optional
        Ground elevation for an (n, 2) array of points; None: grades are the
        assumed grade and no profile checks are made.
    outlets : dict outlet id -> (x, y), optional
        The outlet points (for the take-off and the report).

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
    gmin = options.min_grade
    violations, notes, profiles = [], [], {}
    method_text = ("Manning full-flow capacity, n by material and size "
                   "(templates/manning_n.csv)" if options.method == "manning" else
                   "drain-pipe power laws (laterals with uniform inflow)")
    notes.append(f"capacities: {method_text}; usable capacity {options.capacity_factor:.0%} "
                 "of full (allowance for sediment and partial clogging)")
    if surface is None:
        notes.append(f"no elevations given: every pipe sized at the assumed grade "
                     f"{options.assumed_grade:.2%}; grades, cover and the outlet are not "
                     "checked")
    else:
        notes.append("vertical design from the outlet up; " + JUNCTION_RULE)

    car = {c.carrier_id: c for c in carriers}
    for r in runs:
        t = r.target()
        if t is not None and t not in car:
            r.to = None                  # its field has no main: it drains to an outlet
    for c in carriers:
        if c.to is not None and c.to not in car:
            raise InputError(f"pipe {c.carrier_id} drains into {c.to}, which is not in the "
                             "network", param="layout")
    # depth of each carrier from its outlet (leaves first = deepest first)
    depth = {}
    for cid in car:
        seen, x = [], cid
        while x is not None and x not in depth:
            if x in seen:
                raise InputError(f"the pipes {', '.join(seen)} drain in a loop",
                                 param="layout")
            seen.append(x)
            x = car[x].to
        d0 = depth[x] if x is not None else -1
        for k, y in enumerate(reversed(seen)):
            depth[y] = d0 + 1 + k
    order = sorted(car, key=lambda c: (-depth[c], c))

    # junction chainages on the receiving carriers
    run_to = [r.target() for r in runs]
    run_end = np.array([np.asarray(r.line.coords)[-1] for r in runs]) if runs else \
        np.empty((0, 2))
    run_jch = np.full(len(runs), np.nan)
    by_carrier = {}
    for i, t in enumerate(run_to):
        if t is not None:
            by_carrier.setdefault(t, []).append(i)
    for t, idx in by_carrier.items():
        run_jch[idx] = shapely.line_locate_point(car[t].line, shapely.points(run_end[idx]))
    car_jch = {}
    inflow_car = {}
    for c in carriers:
        if c.to is not None:
            end = shapely.Point(np.asarray(c.line.coords)[-1])
            car_jch[c.carrier_id] = float(car[c.to].line.project(end))
            inflow_car.setdefault(c.to, []).append(c.carrier_id)

    # samples of every pipe; the ground sampled once for all of them
    lat_s = [_samples(r.line) for r in runs]
    car_s = {cid: _samples(car[cid].line,
                           list(run_jch[by_carrier.get(cid, [])]) +
                           [car_jch[k] for k in inflow_car.get(cid, [])]) for cid in car}
    ground_lat, ground_car = [None] * len(runs), {}
    if surface is not None:
        pts = [s[1] for s in lat_s] + [car_s[c][1] for c in order]
        sizes = np.cumsum([0] + [len(p) for p in pts])
        z = surface(np.vstack(pts)) if pts else np.empty(0)
        for i in range(len(runs)):
            ground_lat[i] = z[sizes[i]:sizes[i + 1]]
        for k, c in enumerate(order):
            ground_car[c] = z[sizes[len(runs) + k]:sizes[len(runs) + k + 1]]

    # flows are known from the tree alone: the size each carrier needs at the minimum
    # grade sets how deep it must lie for its cover (outside diameter)
    od_at = _outside_by_chainage(runs, order, car, by_carrier, run_jch, inflow_car,
                                 car_jch, series, options)

    # ---- pass 1, leaves to outlet: highest inverts within the design depth
    lat_z = [None] * len(runs)
    car_z = {}
    end_z = {}                                      # carrier id -> invert at its end
    if surface is not None:
        for i, r in enumerate(runs):
            ch, _ = lat_s[i]
            lat_z[i] = _highest_invert(ch, ground_lat[i] - options.drain_depth, gmin,
                                       options.max_grade)
        for cid in order:
            ch, _ = car_s[cid]
            # deep enough for the main depth and for the cover over the pipe its flow needs
            cap = ground_car[cid] - np.maximum(main_depth,
                                               options.min_cover + od_at[cid](ch))
            # inflows: the receiving invert at or below the joining invert
            for i in by_carrier.get(cid, []):
                k = int(np.argmin(np.abs(ch - run_jch[i])))
                cap[k] = min(cap[k], lat_z[i][-1])
            for c2 in inflow_car.get(cid, []):
                k = int(np.argmin(np.abs(ch - car_jch[c2])))
                cap[k] = min(cap[k], end_z[c2])
            car_z[cid] = _highest_invert(ch, cap, gmin, options.max_grade)
            end_z[cid] = float(car_z[cid][-1])

    # ---- the outlets, then pass 2, outlet up: raised where the receiving water needs it
    outlet_rows = []
    roots = [c for c in order if car[c].to is None]
    root_runs = [i for i, t in enumerate(run_to) if t is None]
    if surface is not None:
        need = (options.ditch_water_level + options.outfall_margin
                if options.ditch_water_level is not None else None)
        for cid in reversed(order):                 # outlet first
            ch, xy = car_s[cid]
            c = car[cid]
            if c.to is None:
                floor_end = need if need is not None else -np.inf
                if need is not None and end_z[cid] < need:
                    violations.append(_violation(
                        "outlet", cid, ch[-1], xy[-1],
                        f"outlet invert {end_z[cid]:.2f} m is below the receiving water "
                        f"level {options.ditch_water_level:.2f} m + {options.outfall_margin:.2f}"
                        f" m; raised to {need:.2f} m (the pipes above lose depth)",
                        "lower the ditch, use a pumped outlet, or a shallower design depth",
                        ))
            else:
                pch, _ = car_s[c.to]
                floor_end = float(np.interp(car_jch[cid], pch, car_z[c.to]))
            car_z[cid] = np.maximum(car_z[cid], floor_end + gmin * (ch[-1] - ch))
            end_z[cid] = float(car_z[cid][-1])
        for i, r in enumerate(runs):
            ch, xy = lat_s[i]
            t = run_to[i]
            if t is None:
                floor_end = need if need is not None else -np.inf
            else:
                pch, _ = car_s[t]
                floor_end = float(np.interp(run_jch[i], pch, car_z[t]))
            lat_z[i] = np.maximum(lat_z[i], floor_end + gmin * (ch[-1] - ch))
        if options.ditch_water_level is None:
            notes.append("outlet not checked: no receiving water level given "
                         "(--ditch-water-level); the outlet invert follows the design "
                         "depth")
    else:
        notes.append("outlet not checked: no elevations given")

    # ---- reaches: laterals, then carriers split at their junctions
    lat_rows = []
    for i, r in enumerate(runs):
        ch, xy = lat_s[i]
        length = float(r.line.length)
        area = r.perforated_length * r.spacing
        row = {"reach_id": r.run_id, "kind": "lateral", "field_id": r.field_id,
               "from": "end", "to": run_to[i] or "outlet", "length_m": length,
               "perforated_length_m": r.perforated_length,
               "connector_length_m": r.connector_length,
               "drained_area_ha": area / 1e4, "flow_l_s": float(design_flow(q, area)) * 1e3,
               "warnings": [], "_start": xy[0], "_end": xy[-1]}
        if surface is None:
            row.update(grade=options.assumed_grade, invert_up_m=None, invert_down_m=None,
                       cover_min_m=None)
        else:
            z = lat_z[i]
            row.update(grade=float((z[0] - z[-1]) / length) if length > 0 else gmin,
                       invert_up_m=float(z[0]), invert_down_m=float(z[-1]))
            profiles[r.run_id] = {"chainage": ch, "ground": ground_lat[i], "invert": z}
        lat_rows.append(row)
    _size_rows(lat_rows, series, options, violations, uniform_inflow=True)

    car_rows = {}
    area_in = {}                                   # carrier id -> total area it delivers
    size_out = {}                                  # carrier id -> size index at its end
    for cid in order:
        c = car[cid]
        ch, xy = car_s[cid]
        L = float(c.line.length)
        inflow = [(run_jch[i], lat_rows[i]["drained_area_ha"] * 1e4,
                   _size_index(lat_rows[i], series)) for i in by_carrier.get(cid, [])]
        inflow += [(car_jch[k], area_in[k], size_out[k]) for k in inflow_car.get(cid, [])]
        jch = np.array([x[0] for x in inflow]) if inflow else np.zeros(0)
        areas = np.array([x[1] for x in inflow]) if inflow else np.zeros(0)
        sizes_in = np.array([x[2] for x in inflow], int) if inflow else np.zeros(0, int)
        cuts = np.unique(np.clip(np.r_[0.0, jch, L], 0.0, L).round(6))
        cuts[0], cuts[-1] = 0.0, L
        rows = []
        for k in range(len(cuts) - 1):
            a, b = cuts[k], cuts[k + 1]
            if b - a < 1e-6:
                continue
            up = jch <= a + 1e-6
            up_area = float(areas[up].sum())
            row = {"reach_id": f"{cid}{len(rows) + 1:02d}", "kind": c.kind,
                   "field_id": c.field_id, "carrier_id": cid,
                   "from": f"{a:.1f} m", "to": f"{b:.1f} m" if b < L - 1e-6 else
                   (c.to or f"outlet {c.outlet}"), "length_m": float(b - a),
                   "drained_area_ha": up_area / 1e4,
                   "flow_l_s": float(design_flow(q, up_area)) * 1e3 if up_area > 0 else 0.0,
                   "warnings": [], "chainage_m": [float(a), float(b)],
                   "_floor": int(sizes_in[up].max(initial=-1)),
                   "_start": np.asarray(c.line.interpolate(a).coords[0]),
                   "_end": np.asarray(c.line.interpolate(b).coords[0])}
            if surface is None:
                row.update(grade=options.assumed_grade, invert_up_m=None,
                           invert_down_m=None, cover_min_m=None)
            else:
                iu, idn = np.interp([a, b], ch, car_z[cid])
                row.update(grade=float((iu - idn) / (b - a)), invert_up_m=float(iu),
                           invert_down_m=float(idn))
            rows.append(row)
        if not rows:                      # a carrier of no length passes everything on
            area_in[cid] = float(areas.sum())
            size_out[cid] = int(sizes_in.max(initial=-1))
            continue
        _size_rows(rows, series, options, violations, uniform_inflow=False, taper=True,
                   min_index=np.array([r.pop("_floor") for r in rows], int))
        area_in[cid] = float(areas.sum())
        size_out[cid] = _size_index(rows[-1], series)
        car_rows[cid] = rows
        if surface is not None:
            profiles[cid] = {"chainage": ch, "ground": ground_car[cid], "invert": car_z[cid]}

    # ---- checks along every pipe: depth, cover, grade
    if surface is not None:
        for i, row in enumerate(lat_rows):
            ch, xy = lat_s[i]
            _profile_checks(row, ch, xy, ground_lat[i], lat_z[i], series, options,
                            violations, "lateral")
        for cid, rows in car_rows.items():
            ch, xy = car_s[cid]
            for row in rows:
                a, b = row["chainage_m"]
                sel = (ch >= a - 1e-9) & (ch <= b + 1e-9)
                _profile_checks(row, ch[sel], xy[sel], ground_car[cid][sel],
                                car_z[cid][sel], series, options, violations, row["kind"])
        _high_side(runs, lat_s, ground_lat, violations)
    reaches = lat_rows + [r for cid in order for r in car_rows.get(cid, [])]
    speed = []
    for row in reaches:
        _velocity_checks(row, options, speed)
    if surface is None:
        # without elevations the grade is an assumption: one note, not one line per pipe
        slow = [v for v in speed if v["kind"] == "slow"]
        if slow:
            notes.append(f"at the assumed grade {options.assumed_grade:.2%}, {len(slow)} "
                         f"pipe(s) run below the self-cleaning velocity "
                         f"{options.min_velocity:.2f} m/s full; give elevations to check "
                         "the real grades")
        speed = [v for v in speed if v["kind"] != "slow"]
    violations.extend(speed)

    # ---- outlets: the flow at each
    out_ids = sorted({car[c].outlet for c in roots} | ({"own end"} if root_runs else set()))
    for cid in roots:
        last = car_rows.get(cid, [None])[-1]
        outlet_rows.append({"outlet_id": car[cid].outlet, "carrier_id": cid,
                            "field_id": car[cid].field_id if car[cid].kind != "trunk" else "",
                            "flow_l_s": area_in[cid] * q / 86400.0 * 1e3,
                            "drained_area_ha": area_in[cid] / 1e4,
                            "invert_m": end_z.get(cid),
                            "size": last["size"] if last else None,
                            "x": float(np.asarray(car[cid].line.coords)[-1][0]),
                            "y": float(np.asarray(car[cid].line.coords)[-1][1])})
    for i in root_runs:
        r = lat_rows[i]
        outlet_rows.append({"outlet_id": f"{runs[i].field_id} (lateral end)",
                            "carrier_id": runs[i].run_id, "field_id": runs[i].field_id,
                            "flow_l_s": r["flow_l_s"], "drained_area_ha": r["drained_area_ha"],
                            "invert_m": r["invert_down_m"], "size": r.get("size"),
                            "x": float(r["_end"][0]), "y": float(r["_end"][1])})
    del out_ids
    # merge roots sharing an outlet point (several mains ending at one outlet)
    merged = {}
    for o in outlet_rows:
        key = o["outlet_id"]
        if key in merged:
            m = merged[key]
            m["flow_l_s"] += o["flow_l_s"]
            m["drained_area_ha"] += o["drained_area_ha"]
        else:
            merged[key] = dict(o)
    outlet_rows = list(merged.values())

    for row in reaches:
        for k in [k for k in row if k.startswith("_")]:
            row.pop(k)
        row["warnings"] = "; ".join(row["warnings"])

    from .takeoff import takeoff_rows

    junctions = _junctions(runs, run_to, run_jch, lat_rows, car, car_jch, car_rows)
    takeoff = takeoff_rows(reaches, runs, car_rows, junctions, outlet_rows, options)
    lat_area = sum(r["drained_area_ha"] for r in lat_rows)
    totals = {
        "drained_area_ha": lat_area,
        "outlet_flow_l_s": sum(o["flow_l_s"] for o in outlet_rows),
        "outlets": len(outlet_rows),
        "lateral_length_m": sum(r["length_m"] for r in lat_rows),
        "perforated_length_m": sum(r.perforated_length for r in runs),
        "main_length_m": sum(r["length_m"] for r in reaches if r["kind"] == "main"),
        "submain_length_m": sum(r["length_m"] for r in reaches if r["kind"] == "submain"),
        "trunk_length_m": sum(r["length_m"] for r in reaches if r["kind"] == "trunk"),
        "violations": len(violations),
    }
    if len(outlet_rows) > 1:
        notes.append(f"{len(outlet_rows)} separate outlets; the outlet flow is their sum")
    path = _main_path(car, area_in)
    design = PipeDesign(reaches, violations, takeoff, profiles, notes, totals, outlet_rows,
                        group_problems(violations), path)
    if surface is not None and path:
        parts, offset = [], 0.0
        for k, cid in enumerate(path):
            ch = car_s[cid][0]
            L = float(car[cid].line.length)
            if k:
                offset += float(car[path[k - 1]].line.length) - car_jch[cid]
            # this carrier as far up as where the next one on the path joins it
            keep = ch >= (car_jch[path[k + 1]] - 1e-9 if k + 1 < len(path) else -1.0)
            parts.append((offset + L - ch[keep], ground_car[cid][keep], car_z[cid][keep]))
        d = np.concatenate([p[0] for p in parts])
        o = np.argsort(d, kind="stable")
        profiles["outlet up"] = {"chainage": d[o],
                                 "ground": np.concatenate([p[1] for p in parts])[o],
                                 "invert": np.concatenate([p[2] for p in parts])[o],
                                 "carriers": path}
    return design


def _junctions(runs, run_to, run_jch, lat_rows, car, car_jch, car_rows):
    """Every junction: (field, joining size, receiving size, at the receiving pipe's
    upstream end)."""
    def receiving(cid, ch):
        rows = car_rows.get(cid)
        if not rows:
            return None
        for r in rows:
            if r["chainage_m"][0] - 1e-6 <= ch <= r["chainage_m"][1] + 1e-6:
                return r
        return rows[-1]

    out = []
    for i, t in enumerate(run_to):
        if t is None:
            continue
        rr = receiving(t, run_jch[i])
        out.append((runs[i].field_id, lat_rows[i].get("size"), rr["size"] if rr else None,
                    bool(rr and run_jch[i] <= rr["chainage_m"][0] + 1e-6 and
                         rr["chainage_m"][0] < 1e-6)))
    for cid, ch in car_jch.items():
        rows = car_rows.get(cid)
        rr = receiving(car[cid].to, ch)
        out.append((car[cid].field_id, rows[-1]["size"] if rows else None,
                    rr["size"] if rr else None,
                    bool(rr and ch < 1e-6 and rr["chainage_m"][0] < 1e-6)))
    return out


def _outside_by_chainage(runs, order, car, by_carrier, run_jch, inflow_car, car_jch,
                         series, options):
    """Per carrier, a function chainage -> outside diameter [m] of the size its flow needs
    at the minimum grade (the largest size where none is enough)."""
    total = {}
    out = {}
    areas_lat = np.array([r.perforated_length * r.spacing for r in runs])
    for cid in order:
        jch = [run_jch[i] for i in by_carrier.get(cid, [])] + \
            [car_jch[k] for k in inflow_car.get(cid, [])]
        ar = [areas_lat[i] for i in by_carrier.get(cid, [])] + \
            [total[k] for k in inflow_car.get(cid, [])]
        total[cid] = float(np.sum(ar)) if ar else 0.0
        jch, ar = np.asarray(jch, float), np.asarray(ar, float)
        o = np.argsort(jch)
        jch, cum = jch[o], np.cumsum(ar[o])
        if jch.size:
            flow = design_flow(options.coefficient, np.maximum(cum, 1e-9))
            idx, _ = select_size(np.atleast_1d(flow), np.full(jch.size, options.min_grade),
                                 series, method=options.method,
                                 capacity_factor=options.capacity_factor)
            idx = np.where(np.atleast_1d(idx) < 0, len(series.nominal) - 1, idx)
            od = series.inner_diameter[idx] * (1.15 if series.material == "corrugated"
                                               else 1.1)
        else:
            od = np.zeros(0)

        def f(ch, jch=jch, od=od):
            k = np.searchsorted(jch, np.asarray(ch) + 1e-6, side="right") - 1
            return np.where(k >= 0, od[np.maximum(k, 0)] if od.size else 0.0, 0.0)

        out[cid] = f
    return out


def _main_path(car, area_in):
    """Carrier ids from the outlet up along the largest flow (trunk, then main...)."""
    roots = [c for c in car if car[c].to is None]
    if not roots:
        return []
    node = max(roots, key=lambda c: area_in.get(c, 0.0))
    path = [node]
    while True:
        ups = [c for c in car if car[c].to == node]
        if not ups:
            return path
        node = max(ups, key=lambda c: area_in.get(c, 0.0))
        path.append(node)


def _profile_checks(row, ch, xy, ground, z, series, options, violations, kind):
    """Depth, cover and grade of one pipe against the limits: one problem per pipe."""
    if len(ch) < 2:
        return
    depth = ground - z
    od = _outside(row, series)
    cover = depth - od
    row["cover_min_m"] = float(cover.min())
    rid = row["reach_id"]
    deep = depth > options.max_depth + 1e-9
    if np.any(deep):
        k = int(np.argmax(depth))
        violations.append(_violation(
            "too deep", rid, ch[k], xy[k],
            f"{depth[k]:.2f} m deep, more than the maximum {options.max_depth:.2f} m",
            "lay a sub-main or second outlet closer to this part, accept a deeper trench, "
            "or reduce the minimum grade", ))
        violations[-1]["summary"] = f"deeper than the maximum depth {options.max_depth:.2f} m"
        row["warnings"].append("deeper than the maximum depth")
    if row["cover_min_m"] < options.min_cover - 1e-9:
        k = int(np.argmin(cover))
        violations.append(_violation(
            "shallow cover", rid, ch[k], xy[k],
            f"cover {cover[k]:.2f} m is less than {options.min_cover:.2f} m",
            "the outlet or a joining pipe holds it up: lower the outlet, or protect the pipe "
            "(rigid pipe, no heavy traffic)"))
        violations[-1]["summary"] = f"cover less than {options.min_cover:.2f} m"
        row["warnings"].append("shallow cover")
    dch = np.diff(ch)
    seg = np.where(dch > 0.5, -np.diff(z) / np.maximum(dch, 1e-9), 0.0)
    if np.any(seg > options.max_grade + 1e-9):
        k = int(np.argmax(seg))
        violations.append(_violation(
            "steep", rid, ch[k], xy[k],
            f"grade {seg[k]:.2%} exceeds the maximum {options.max_grade:.2%}",
            "put a drop structure here, or lay the pipe deeper upstream"))
        violations[-1]["summary"] = f"grade above the maximum {options.max_grade:.2%}"
        row["warnings"].append("steeper than the maximum grade")


def _high_side(runs, lat_s, ground_lat, violations):
    """Fields whose laterals mostly rise towards their main: the main is on the high
    side. One problem per field."""
    by_field = {}
    for i, r in enumerate(runs):
        g = ground_lat[i]
        if g is None or len(g) < 2:
            continue
        L = max(float(r.line.length), 1e-9)
        by_field.setdefault(r.field_id, []).append((g[-1] - g[0]) / L)
    for fid, rises in by_field.items():
        rises = np.asarray(rises)
        if np.mean(rises > 5e-4) > 0.5:
            violations.append(_violation(
                "main on the high side", f"{fid}-M", 0.0, None,
                f"the ground rises {np.median(rises):.2%} along most laterals of field "
                f"{fid} towards its main: the main is on the high side",
                "re-run the layout with the survey (--survey) so the main goes on the low "
                "side, or choose it with --main-side"))
            violations[-1]["summary"] = "main on the high side of its field"


def design_pipes(runs, mains, options, *, surface=None, receiving_outlet=None):
    """Size and grade laterals and one main per field (each main drains to its own
    outlet): :func:`design_network` with the mains as the only carriers.

    Parameters
    ----------
    runs : list of LateralRun
    mains : dict field_id -> LineString
        Each main ordered from its upstream end to its outlet.
    options : PipeOptions
    surface : callable, optional
    receiving_outlet : (x, y), optional
        Point of the receiving ditch (for the report).
    """
    carriers = [Carrier(f"{fid}-M", "main", fid, line, None, f"{fid}-M")
                for fid, line in mains.items()]
    outlets = {"O1": receiving_outlet} if receiving_outlet is not None else None
    return design_network(runs, carriers, options, surface=surface, outlets=outlets)


def _size_index(row, series):
    return series.nominal.index(row["size"]) if row.get("size") in series.nominal else -1


def _size_rows(rows, series, options, violations, *, uniform_inflow, taper=False,
               min_index=None):
    """Smallest adequate size of each row; beyond the table: marked with the fix."""
    if not rows:
        return
    flow = np.array([r["flow_l_s"] / 1000.0 for r in rows])
    grade = np.array([max(r["grade"], 1e-9) for r in rows])
    idx, cap = select_size(flow, grade, series, method=options.method,
                           uniform_inflow=uniform_inflow,
                           capacity_factor=options.capacity_factor)
    top = len(series.nominal)
    if taper:
        # never a smaller pipe downstream, nor smaller than a pipe it receives
        if min_index is not None:
            idx = np.where(idx < 0, idx, np.maximum(idx, min_index))
        run_max = np.maximum.accumulate(np.where(idx < 0, top, idx))
        idx = np.where(run_max >= top, -1, run_max)
        d = series.inner_diameter[np.maximum(idx, 0)]
        cap = np.where(idx >= 0, _capacity(d, grade, series, options, uniform_inflow), np.nan)
    # full-flow capacity (velocity) and n of the chosen sizes, for all rows at once
    ok = idx >= 0
    d_all = series.inner_diameter[np.maximum(idx, 0)]
    full_all = _capacity(d_all, grade, series, options, False) / options.capacity_factor
    n_all = (np.atleast_1d(manning_n(series.material, d_all)) if options.method == "manning"
             else None)
    wall = "smooth" if series.material in ("smooth", "clay") else "corrugated"
    outside = power_law_outside(d_all, wall) if options.method != "manning" else \
        np.zeros(len(rows), bool)
    big_full = None
    for k, (r, i, c, s) in enumerate(zip(rows, idx, cap, grade)):
        r["material"] = series.material
        r["usable_capacity_pct"] = round(100.0 * options.capacity_factor, 1)
        if not ok[k]:
            biggest = series.nominal[-1]
            if big_full is None:
                big_full = _capacity(np.full(len(rows), series.inner_diameter[-1]), grade,
                                     series, options, uniform_inflow)
            full = float(big_full[k])
            n_par = int(np.ceil(r["flow_l_s"] / (full * 1000.0))) if full > 0 else 0
            r.update(size=f"larger than {biggest}", inner_diameter_mm=None,
                     capacity_l_s=None, capacity_used_pct=None, velocity_m_s=None)
            r["warnings"].append("needs a pipe larger than the size table")
            violations.append(_violation(
                "too large", r["reach_id"], 0.0, r.get("_start"),
                f"{r['flow_l_s']:.1f} L/s at a grade of {s:.2%} needs a pipe larger than "
                f"{biggest} ({series.series} {series.material})",
                f"use a larger series or material, {n_par} parallel {biggest} pipes, or "
                "split the area to a second outlet"))
            violations[-1]["summary"] = f"flow beyond the largest pipe ({biggest})"
            continue
        d = float(d_all[k])
        r["size"] = series.nominal[i]
        r["inner_diameter_mm"] = round(d * 1000.0, 1)
        r["capacity_l_s"] = float(c) * 1000.0
        r["capacity_used_pct"] = 100.0 * r["flow_l_s"] / (float(c) * 1000.0) if c > 0 else None
        r["velocity_m_s"] = float(full_all[k] / (np.pi * d * d / 4.0))
        if n_all is not None:
            r["manning_n"] = round(float(n_all[k]), 5)
        elif outside[k]:
            lo, hi = POWER_LAW_RANGE[wall]
            r["warnings"].append("power law outside its diameter range")
            violations.append(_violation(
                "power law range", r["reach_id"], 0.0, r.get("_start"),
                f"{r['size']} ({d * 1000:.0f} mm inside) lies outside the "
                f"{lo * 1000:.0f}-{hi * 1000:.0f} mm the drain-pipe power law was "
                "fitted to; its capacity may be overstated",
                "check these reaches with --capacity-method manning"))
            violations[-1]["summary"] = (f"power-law capacity used outside its "
                                         f"{lo * 1000:.0f}-{hi * 1000:.0f} mm range")


def _capacity(d, grade, series, options, uniform_inflow):
    cap = pipe_capacity(d, grade, series.material, method=options.method,
                        uniform_inflow=uniform_inflow)
    return np.asarray(cap, float) * options.capacity_factor


def _outside(row, series):
    """Outside diameter estimate of a reach's pipe [m]."""
    return float(outside_diameter((row.get("inner_diameter_mm") or 100.0) / 1000.0,
                                  series.material))


def _velocity_checks(row, options, violations):
    v = row.get("velocity_m_s")
    if v is None:
        return
    xy = row.get("_start")
    if v < options.min_velocity:
        row["warnings"].append(f"full-flow velocity {v:.3f} m/s below {options.min_velocity:.2f}")
        violations.append(_violation(
            "slow", row["reach_id"], 0.0, xy,
            f"full-flow velocity {v:.3f} m/s is below the self-cleaning minimum "
            f"{options.min_velocity:.2f} m/s",
            "steepen the grade or use a smaller pipe if capacity allows"))
        violations[-1]["summary"] = (f"full-flow velocity below the self-cleaning minimum "
                                     f"{options.min_velocity:.2f} m/s")
    if v > options.max_velocity:
        row["warnings"].append(f"full-flow velocity {v:.3f} m/s above {options.max_velocity:.2f}")
        violations.append(_violation(
            "fast", row["reach_id"], 0.0, xy,
            f"full-flow velocity {v:.2f} m/s exceeds {options.max_velocity:.2f} m/s for this "
            "soil", "flatten the grade (drop structure) or protect the envelope and joints"))
        violations[-1]["summary"] = (f"full-flow velocity above {options.max_velocity:.2f} "
                                     "m/s")
