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
Arrays
    All pipes' samples live in one array (a pipe is a slice of it); the ground is
    sampled once per sample point, the laterals are graded, sized and checked
    together, and the carriers one tree level at a time (a level needs only what
    the level above it, upstream, has settled). The cost grows linearly with the
    number of pipes and reaches; the results are those of a pipe-by-pipe loop.
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


# ---------------------------------------------------------------- ragged arrays
# Many pipes' samples live in one array; pipe i holds start[i]:start[i] + count[i].
# Per-pipe running operations (cumulative sums, running minima) run on padded 2-D
# blocks of pipes of similar length, one numpy call per block: the same sequence of
# operations per pipe as a loop over pipes, so the same numbers.

_BLOCK_ROWS = 2048


def _blocks(counts):
    """Pipes grouped into blocks of similar sample counts: (pipe indices, width)."""
    order = np.argsort(counts, kind="stable")
    for s in range(0, len(order), _BLOCK_ROWS):
        idx = order[s:s + _BLOCK_ROWS]
        if idx.size:
            yield idx, int(counts[idx].max())


def _padded(values, start, counts, idx, width, fill):
    """Block of the pipes ``idx`` as rows padded with ``fill``; also the mask of real
    entries and their positions in ``values``."""
    col = np.arange(width)[None, :]
    n = counts[idx][:, None]
    valid = col < n
    pos = np.minimum(start[idx][:, None] + np.minimum(col, np.maximum(n - 1, 0)),
                     max(len(values) - 1, 0))
    if not len(values):
        return np.full(pos.shape, fill, float), valid & False, pos
    return np.where(valid, values[pos], fill), valid, pos


def _ranges(lo, hi):
    """Concatenated ``arange(lo[i], hi[i])`` for all i."""
    lo, hi = np.asarray(lo, np.int64), np.asarray(hi, np.int64)
    n = np.maximum(hi - lo, 0)
    if n.sum() == 0:
        return np.zeros(0, np.int64)
    rep = np.repeat(lo - np.r_[0, np.cumsum(n)[:-1]], n)
    return np.arange(int(n.sum()), dtype=np.int64) + rep


def _line_vertices(lines):
    """Vertices of many lines: (xy, start, count, cumulative chainage at each vertex)."""
    import shapely

    xy, which = shapely.get_coordinates(np.asarray(lines, dtype=object), return_index=True)
    counts = np.bincount(which, minlength=len(lines)).astype(np.int64)
    start = np.r_[0, np.cumsum(counts)[:-1]].astype(np.int64) if len(lines) else \
        np.zeros(0, np.int64)
    step = np.zeros(len(xy))
    if len(xy) > 1:
        step[1:] = np.hypot(*np.diff(xy, axis=0).T)
    step[start[counts > 0]] = 0.0
    cum = np.empty(len(xy))
    for idx, width in _blocks(counts):
        block, valid, pos = _padded(step, start, counts, idx, width, 0.0)
        cum[pos[valid]] = np.cumsum(block, axis=1)[valid]
    return xy, start, counts, cum


def _interp_along(owner, ch, xy, start, counts, cum):
    """Points at chainages ``ch`` along the lines ``owner`` (as ``np.interp`` over each
    line's vertex chainages, for all samples at once)."""
    s = start[owner]
    last = s + counts[owner] - 1
    j = s.copy()
    bent = counts[owner] > 2                       # lines of more than one segment
    if np.any(bent):
        # segment of each sample: searched on chainages made increasing across lines
        span = float(cum.max(initial=0.0)) + 10.0
        line_of_vertex = np.repeat(np.arange(len(start)), counts)
        jb = np.searchsorted(cum + span * line_of_vertex, ch[bent] + span * owner[bent],
                             side="right") - 1
        j[bent] = np.clip(jb, s[bent], np.maximum(last[bent] - 1, s[bent]))
    j1 = np.minimum(j + 1, last)
    out = np.empty((len(ch), 2))
    at_end = ch >= cum[last]
    with np.errstate(divide="ignore", invalid="ignore"):
        dx = cum[j1] - cum[j]
        off = ch - cum[j]
        for d in range(2):
            f0 = xy[j, d]
            slope = (xy[j1, d] - f0) / dx
            v = slope * off + f0
            bad = np.flatnonzero(np.isnan(v))
            if bad.size:
                f1 = xy[j1[bad], d]
                w = slope[bad] * (ch[bad] - cum[j1[bad]]) + f1
                v[bad] = np.where(np.isnan(w) & (f0[bad] == f1), f0[bad], w)
            v[at_end] = xy[last[at_end], d]
            out[:, d] = v
    return out


def _sample_lines(lines, extra_owner=None, extra_ch=None, chunk=200_000):
    """Samples of many lines: chainages every ``_STEP`` m (ends included; for
    carriers also the junction chainages, dropping regular samples within 1 m of
    one), and their points.

    Returns ``(ch, xy, start, count, length)`` with the samples of line i at
    ``start[i]:start[i] + count[i]``. Worked in chunks of about ``chunk`` samples.
    """
    m = len(lines)
    vxy, vstart, vcount, cum = _line_vertices(lines)
    length = np.where(vcount > 0, cum[np.maximum(vstart + vcount - 1, 0)], 0.0)
    n = np.maximum(2, np.ceil(length / _STEP).astype(np.int64) + 1)
    eo = ev = None
    if extra_owner is not None and len(extra_owner):
        eo = np.asarray(extra_owner, np.int64)
        ev = np.clip(np.asarray(extra_ch, float), 0.0, length[eo])
        o = np.lexsort((ev, eo))
        eo, ev = eo[o], ev[o]
        keep = np.r_[True, (np.diff(eo) != 0) | (np.diff(ev) != 0)]
        eo, ev = eo[keep], ev[keep]
    # chunks of whole lines
    edges = np.searchsorted(np.cumsum(n), np.arange(chunk, int(n.sum()), chunk))
    edges = np.unique(np.r_[0, edges + 1, m]) if m else np.array([0])
    edges = edges[edges <= m]
    chs, xys, counts = [], [], np.zeros(m, np.int64)
    for a, b in zip(edges[:-1], edges[1:]):
        nn = n[a:b]
        owner = np.repeat(np.arange(a, b), nn)
        k = np.arange(int(nn.sum())) - np.repeat(np.r_[0, np.cumsum(nn)[:-1]], nn)
        ch = k * np.repeat(length[a:b] / (nn - 1), nn)      # as np.linspace(0, L, n)
        is_last = k == np.repeat(nn - 1, nn)
        ch[is_last] = length[a:b]
        if eo is not None:
            ea, eb = np.searchsorted(eo, [a, b])
            if eb > ea:
                co, cv = eo[ea:eb], ev[ea:eb]
                has = np.zeros(m, bool)
                has[co] = True
                # the nearest junction chainage on the same line, for every sample
                span = float(length[a:b].max(initial=0.0)) + 10.0
                pos = np.searchsorted(cv + span * (co - a), ch + span * (owner - a))
                near = np.zeros(len(ch), bool)
                for p in (pos - 1, pos):
                    pc = np.clip(p, 0, len(cv) - 1)
                    near |= (p >= 0) & (p < len(cv)) & (co[pc] == owner) & \
                        (np.abs(ch - cv[pc]) < 1.0)
                near &= (k != 0) & ~is_last & has[owner]
                owner = np.r_[owner[~near], co]
                ch = np.r_[ch[~near], cv]
                o = np.lexsort((ch, owner))
                owner, ch = owner[o], ch[o]
                keep = np.r_[True, (np.diff(owner) != 0) | (np.diff(ch) != 0)]
                owner, ch = owner[keep], ch[keep]
        counts[a:b] = np.bincount(owner - a, minlength=b - a)
        chs.append(ch)
        xys.append(_interp_along(owner, ch, vxy, vstart, vcount, cum))
    start = np.r_[0, np.cumsum(counts)[:-1]].astype(np.int64) if m else np.zeros(0, np.int64)
    ch = np.concatenate(chs) if chs else np.zeros(0)
    xy = np.concatenate(xys) if xys else np.zeros((0, 2))
    return ch, xy, start, counts, length


def _highest_invert_many(ch, cap, start, counts, min_grade, max_grade=None):
    """Highest invert z(ch) of many pipes at once (padded blocks), each with z <= cap
    everywhere and z falling at least ``min_grade`` towards increasing chainage:
    z_i = min_{j<=i} (cap_j + g c_j) - g c_i; then, where the ground falls faster than
    ``max_grade``, the pipe is laid deeper upstream so that it falls no faster:
    z_i <= min_{j>=i} (z_j + G c_j) - G c_i."""
    out = np.empty(len(ch))
    for idx, width in _blocks(counts):
        c, valid, pos = _padded(ch, start, counts, idx, width, 0.0)
        k, _, _ = _padded(cap, start, counts, idx, width, np.inf)
        z = np.minimum.accumulate(k + min_grade * c, axis=1) - min_grade * c
        if max_grade is not None:
            w = np.where(valid, z + max_grade * c, np.inf)[:, ::-1]
            z = np.minimum(z, np.minimum.accumulate(w, axis=1)[:, ::-1] - max_grade * c)
        out[pos[valid]] = z[valid]
    return out


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

    Notes
    -----
    The work is done on arrays: every pipe's samples in one array, the ground
    sampled once for all of them, the laterals graded and checked together, the
    carriers graded in one pass from the leaves (each needs the inverts of the pipes
    it receives) and sized one tree level at a time (each needs the sizes it
    receives). The cost grows linearly with the number of pipes.
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
    pos_of = {cid: k for k, cid in enumerate(order)}
    nc, nr = len(order), len(runs)
    c_line = np.array([car[c].line for c in order], dtype=object)
    c_to = np.array([pos_of[car[c].to] if car[c].to is not None else -1 for c in order],
                    np.int64)

    # junction chainages on the receiving carriers
    run_to = [r.target() for r in runs]
    r_line = np.array([r.line for r in runs], dtype=object)
    r_to = np.array([pos_of[t] if t is not None else -1 for t in run_to], np.int64)
    if nr:
        rxy, rwhich = shapely.get_coordinates(r_line, return_index=True)
        run_end = rxy[np.r_[np.flatnonzero(np.diff(rwhich)), len(rwhich) - 1]]
    else:
        run_end = np.empty((0, 2))
    run_jch = np.full(nr, np.nan)
    joined = np.flatnonzero(r_to >= 0)
    if joined.size:
        run_jch[joined] = shapely.line_locate_point(c_line[r_to[joined]],
                                                    shapely.points(run_end[joined]))
    # carriers entering another: where, in the order of the carriers list
    inflow_order = np.array([pos_of[c.carrier_id] for c in carriers if c.to is not None],
                            np.int64)
    car_jch = np.full(nc, np.nan)
    if inflow_order.size:
        cxy, cwhich = shapely.get_coordinates(c_line[inflow_order], return_index=True)
        ends = cxy[np.r_[np.flatnonzero(np.diff(cwhich)), len(cwhich) - 1]]
        car_jch[inflow_order] = shapely.line_locate_point(c_line[c_to[inflow_order]],
                                                     shapely.points(ends))
    # what enters each carrier: runs (in run order), then carriers (in list order)
    runs_into = _group(r_to[joined], joined, nc)
    cars_into = _group(c_to[inflow_order], inflow_order, nc)

    # samples of every pipe; the ground sampled once at each (laterals, then carriers)
    lat_ch, lat_xy, lat_start, lat_n, r_len = _sample_lines(r_line)
    ex_owner = np.r_[r_to[joined], c_to[inflow_order]]
    ex_ch = np.r_[run_jch[joined], car_jch[inflow_order]]
    car_ch, car_xy, car_start, car_n, c_len = _sample_lines(c_line, ex_owner, ex_ch)
    lat_ground = car_ground = None
    if surface is not None:
        lat_ground = np.asarray(surface(lat_xy), float) if len(lat_xy) else np.zeros(0)
        car_ground = np.asarray(surface(car_xy), float) if len(car_xy) else np.zeros(0)
    lat_last = lat_start + lat_n - 1
    car_last = car_start + car_n - 1

    # flows are known from the tree alone: the size each carrier needs at the minimum
    # grade sets how deep it must lie for its cover (outside diameter)
    areas_lat = np.array([r.perforated_length * r.spacing for r in runs], float)
    od_jch, od_val = _outside_by_chainage(order, runs_into, cars_into, run_jch, car_jch,
                                          areas_lat, series, options)

    # ---- pass 1, leaves to outlet: highest inverts within the design depth
    lat_z = car_z = None
    end_z = np.full(nc, np.nan)                      # carrier invert at its end
    if surface is not None:
        lat_z = _highest_invert_many(lat_ch, lat_ground - options.drain_depth, lat_start,
                                     lat_n, gmin, options.max_grade)
        lat_end_z = lat_z[lat_last] if nr else np.zeros(0)
        car_z = np.empty(len(car_ch))
        od_own = np.repeat(np.arange(nc), [len(j) for j in od_jch])
        od_j = np.concatenate(od_jch) if nc else np.zeros(0)
        od_v = np.concatenate(od_val) if nc else np.zeros(0)
        od_start = np.searchsorted(od_own, np.arange(nc + 1))
        rj = joined[np.argsort(r_to[joined], kind="stable")]
        rj_to = r_to[rj]
        cj = inflow_order[np.argsort(c_to[inflow_order], kind="stable")]
        cj_to = c_to[cj]
        lv = np.array([depth[c] for c in order], np.int64)
        blocks = np.r_[0, np.flatnonzero(np.diff(lv)) + 1, nc] if nc else np.zeros(1, int)
        for la, lb in zip(blocks[:-1], blocks[1:]):           # leaves first
            s0, s1 = car_start[la], car_start[lb - 1] + car_n[lb - 1]
            ch = car_ch[s0:s1]
            cnt = car_n[la:lb]
            st = car_start[la:lb] - s0
            own = np.repeat(np.arange(lb - la), cnt)
            span = float(ch.max(initial=0.0)) + 10.0
            key = ch + span * own                  # increasing across the level's pipes
            # outside diameter of the size each stretch needs (from its junctions on)
            e0, e1 = od_start[la], od_start[lb]
            eo = od_own[e0:e1] - la
            pos = np.searchsorted(od_j[e0:e1] + span * eo, key + 1e-6, side="right") - 1
            pc = np.maximum(pos, 0)
            hit = (pos >= 0) & (eo[pc] == own) if e1 > e0 else np.zeros(len(ch), bool)
            od = np.where(hit, od_v[e0:e1][pc] if e1 > e0 else 0.0, 0.0)
            # deep enough for the main depth and for the cover over the pipe its flow needs
            cap = car_ground[s0:s1] - np.maximum(main_depth, options.min_cover + od)
            # inflows: the receiving invert at or below the joining invert
            for who, to, jch, zend in ((rj, rj_to, run_jch, lat_end_z if nr else None),
                                       (cj, cj_to, car_jch, end_z)):
                a, b = np.searchsorted(to, [la, lb])
                if b > a:
                    o = to[a:b] - la
                    x = jch[who[a:b]]
                    p = np.searchsorted(key, x + span * o)
                    p = np.clip(p, st[o] + 1, st[o] + cnt[o] - 1)
                    near = np.where(np.abs(ch[p - 1] - x) <= np.abs(ch[p] - x), p - 1, p)
                    np.minimum.at(cap, near, zend[who[a:b]])
            zz = _highest_invert_many(ch, cap, st, cnt, gmin, options.max_grade)
            car_z[s0:s1] = zz
            end_z[la:lb] = zz[st + cnt - 1]

    # ---- the outlets, then pass 2, outlet up: raised where the receiving water needs it
    outlet_rows = []
    roots = [order[k] for k in range(nc) if c_to[k] < 0]
    root_runs = [i for i, t in enumerate(run_to) if t is None]
    if surface is not None:
        need = (options.ditch_water_level + options.outfall_margin
                if options.ditch_water_level is not None else None)
        lv = np.array([depth[c] for c in order], np.int64)
        blocks = np.r_[0, np.flatnonzero(np.diff(lv)) + 1, nc] if nc else np.zeros(1, int)
        for la, lb in list(zip(blocks[:-1], blocks[1:]))[::-1]:     # outlet first
            ks = np.arange(la, lb)
            floor_end = np.empty(lb - la)
            root = c_to[ks] < 0
            for k in ks[root][::-1]:
                floor_end[k - la] = need if need is not None else -np.inf
                if need is not None and end_z[k] < need:
                    e = car_last[k]
                    violations.append(_violation(
                        "outlet", order[k], car_ch[e], car_xy[e],
                        f"outlet invert {end_z[k]:.2f} m is below the receiving water "
                        f"level {options.ditch_water_level:.2f} m + {options.outfall_margin:.2f}"
                        f" m; raised to {need:.2f} m (the pipes above lose depth)",
                        "lower the ditch, use a pumped outlet, or a shallower design depth",
                        ))
            if np.any(~root):
                # where each joins its receiving carrier (the level below, done already)
                par = c_to[ks[~root]]
                pa, pb = int(par.min()), int(par.max()) + 1
                s0, s1 = car_start[pa], car_start[pb - 1] + car_n[pb - 1]
                zl = car_z[s0:s1]
                floor_end[~root] = _interp_along(
                    par - pa, car_jch[ks[~root]], np.stack([zl, zl], axis=1),
                    car_start[pa:pb] - s0, car_n[pa:pb], car_ch[s0:s1])[:, 0]
            s0, s1 = car_start[la], car_start[lb - 1] + car_n[lb - 1]
            own = np.repeat(np.arange(lb - la), car_n[la:lb])
            ch = car_ch[s0:s1]
            car_z[s0:s1] = np.maximum(car_z[s0:s1], floor_end[own] + gmin *
                                      (car_ch[car_last[la:lb]][own] - ch))
            end_z[la:lb] = car_z[car_last[la:lb]]
        floor = np.full(nr, need if need is not None else -np.inf)
        if joined.size:
            floor[joined] = _interp_along(r_to[joined], run_jch[joined],
                                          np.stack([car_z, car_z], axis=1), car_start,
                                          car_n, car_ch)[:, 0]
        if nr:
            owner = np.repeat(np.arange(nr), lat_n)
            lat_z = np.maximum(lat_z, floor[owner] + gmin * (lat_ch[lat_last][owner] - lat_ch))
        if options.ditch_water_level is None:
            notes.append("outlet not checked: no receiving water level given "
                         "(--ditch-water-level); the outlet invert follows the design "
                         "depth")
    else:
        notes.append("outlet not checked: no elevations given")

    # ---- reaches: laterals, then carriers split at their junctions
    lat_rows = []
    lat_area = areas_lat / 1e4
    lat_flow = (np.asarray(design_flow(q, areas_lat), float) * 1e3 if nr
                else np.zeros(0))
    length = shapely.length(r_line) if nr else np.zeros(0)
    for i, r in enumerate(runs):
        a = lat_start[i]
        row = {"reach_id": r.run_id, "kind": "lateral", "field_id": r.field_id,
               "from": "end", "to": run_to[i] or "outlet", "length_m": float(length[i]),
               "perforated_length_m": r.perforated_length,
               "connector_length_m": r.connector_length,
               "drained_area_ha": float(lat_area[i]), "flow_l_s": float(lat_flow[i]),
               "warnings": [], "_start": lat_xy[a], "_end": lat_xy[lat_last[i]]}
        if surface is None:
            row.update(grade=options.assumed_grade, invert_up_m=None, invert_down_m=None,
                       cover_min_m=None)
        else:
            z0, z1 = float(lat_z[a]), float(lat_z[lat_last[i]])
            row.update(grade=float((z0 - z1) / length[i]) if length[i] > 0 else gmin,
                       invert_up_m=z0, invert_down_m=z1)
            sl = slice(a, lat_last[i] + 1)
            profiles[r.run_id] = {"chainage": lat_ch[sl], "ground": lat_ground[sl],
                                  "invert": lat_z[sl]}
        lat_rows.append(row)
    _size_rows(lat_rows, series, options, violations, uniform_inflow=True)
    lat_size = np.array([_size_index(r, series) for r in lat_rows], np.int64)
    lat_area_back = lat_area * 1e4

    car_rows = {}
    area_in = np.zeros(nc)                         # total area each carrier delivers
    size_out = np.full(nc, -1, np.int64)           # size index at each carrier's end
    # what enters each carrier, grouped by carrier: runs (in run order), then carriers
    ev_own = np.concatenate((r_to[joined], c_to[inflow_order]))
    ev_ref = np.concatenate((joined, inflow_order))
    ev_run = np.concatenate((np.ones(joined.size, bool), np.zeros(inflow_order.size, bool)))
    o = np.argsort(ev_own, kind="stable")
    ev_own, ev_ref, ev_run = ev_own[o], ev_ref[o], ev_run[o]
    ev_jch = np.where(ev_run, run_jch[np.where(ev_run, ev_ref, 0)] if nr else 0.0,
                      car_jch[np.where(ev_run, 0, ev_ref)] if nc else 0.0)
    lv = np.array([depth[c] for c in order], np.int64)
    level_start = np.r_[0, np.flatnonzero(np.diff(lv)) + 1, nc] if nc else np.zeros(1, int)
    for la, lb in zip(level_start[:-1], level_start[1:]):
        rows_of, lv_rows = _level_reaches(
            la, lb, order, car, c_len, ev_own, ev_ref, ev_run, ev_jch, lat_area_back,
            lat_size, area_in, size_out, q, surface, options,
            (car_ch, car_z, car_start, car_n) if surface is not None else None)
        if not lv_rows:
            continue
        group = np.array([r.pop("_k") for r in lv_rows], np.int64)
        ln = c_line[group]
        ab = np.array([r["chainage_m"] for r in lv_rows], float)
        p0 = shapely.get_coordinates(shapely.line_interpolate_point(ln, ab[:, 0]))
        p1 = shapely.get_coordinates(shapely.line_interpolate_point(ln, ab[:, 1]))
        floors = np.array([r.pop("_floor") for r in lv_rows], np.int64)
        for m, row in enumerate(lv_rows):
            row["_start"], row["_end"] = p0[m], p1[m]
        _size_rows(lv_rows, series, options, violations, uniform_inflow=False, taper=True,
                   min_index=floors, groups=group)
        for k, (first, cnt) in rows_of.items():
            rows = lv_rows[first:first + cnt]
            car_rows[order[k]] = rows
            size_out[k] = _size_index(rows[-1], series)
            if surface is not None:
                a, b = car_start[k], car_start[k] + car_n[k]
                profiles[order[k]] = {"chainage": car_ch[a:b], "ground": car_ground[a:b],
                                      "invert": car_z[a:b]}

    # ---- checks along every pipe: depth, cover, grade
    if surface is not None:
        car_k = [(pos_of[cid], rows) for cid, rows in car_rows.items()]
        c_rows = [row for _, rows in car_k for row in rows]
        lo_hi = []
        for k, rows in car_k:
            a, b = car_start[k], car_start[k] + car_n[k]
            ch = car_ch[a:b]
            ab = np.array([r["chainage_m"] for r in rows], float)
            # the reaches' chainages are rounded to the micrometre: samples within 1e-6 m
            # of a reach's ends belong to it (both ends are checked)
            lo_hi.append(np.stack([a + np.searchsorted(ch, ab[:, 0] - 1e-6, side="left"),
                                   a + np.searchsorted(ch, ab[:, 1] + 1e-6, side="right")],
                                  axis=1))
        lo_hi = np.vstack(lo_hi) if lo_hi else np.zeros((0, 2), np.int64)
        _profile_checks(lat_rows, lat_start, lat_start + lat_n, lat_ch, lat_xy, lat_ground,
                        lat_z, series, options, violations)
        _profile_checks(c_rows, lo_hi[:, 0], lo_hi[:, 1], car_ch, car_xy, car_ground, car_z,
                        series, options, violations)
        _high_side(runs, lat_ground, lat_start, lat_last, length, violations)
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
    for cid in roots:
        k = pos_of[cid]
        last = car_rows.get(cid, [None])[-1]
        c_end = car_xy[car_last[k]] if car_n[k] else \
            np.asarray(car[cid].line.coords)[-1]
        outlet_rows.append({"outlet_id": car[cid].outlet, "carrier_id": cid,
                            "field_id": car[cid].field_id if car[cid].kind != "trunk" else "",
                            "flow_l_s": area_in[k] * q / 86400.0 * 1e3,
                            "drained_area_ha": area_in[k] / 1e4,
                            "invert_m": float(end_z[k]) if surface is not None else None,
                            "size": last["size"] if last else None,
                            "x": float(c_end[0]), "y": float(c_end[1])})
    for i in root_runs:
        r = lat_rows[i]
        outlet_rows.append({"outlet_id": f"{runs[i].field_id} (lateral end)",
                            "carrier_id": runs[i].run_id, "field_id": runs[i].field_id,
                            "flow_l_s": r["flow_l_s"], "drained_area_ha": r["drained_area_ha"],
                            "invert_m": r["invert_down_m"], "size": r.get("size"),
                            "x": float(r["_end"][0]), "y": float(r["_end"][1])})
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
        row.pop("_start", None)
        row.pop("_end", None)
        row["warnings"] = "; ".join(row["warnings"])

    from .takeoff import takeoff_rows

    junctions = _junctions(runs, run_to, run_jch, lat_rows, r_to, order, car, inflow_order,
                           car_jch, car_rows)
    takeoff = takeoff_rows(reaches, runs, car_rows, junctions, outlet_rows, options)
    lat_area_total = sum(r["drained_area_ha"] for r in lat_rows)
    totals = {
        "drained_area_ha": lat_area_total,
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
    path = _main_path(order, c_to, area_in)
    design = PipeDesign(reaches, violations, takeoff, profiles, notes, totals, outlet_rows,
                        group_problems(violations), path)
    if surface is not None and path:
        parts, offset = [], 0.0
        for k, cid in enumerate(path):
            p = pos_of[cid]
            a, b = car_start[p], car_start[p] + car_n[p]
            ch = car_ch[a:b]
            L = float(car[cid].line.length)
            if k:
                offset += float(car[path[k - 1]].line.length) - car_jch[p]
            # this carrier as far up as where the next one on the path joins it
            keep = ch >= (car_jch[pos_of[path[k + 1]]] - 1e-9 if k + 1 < len(path)
                          else -1.0)
            parts.append((offset + L - ch[keep], car_ground[a:b][keep], car_z[a:b][keep]))
        d = np.concatenate([p[0] for p in parts])
        o = np.argsort(d, kind="stable")
        profiles["outlet up"] = {"chainage": d[o],
                                 "ground": np.concatenate([p[1] for p in parts])[o],
                                 "invert": np.concatenate([p[2] for p in parts])[o],
                                 "carriers": path}
    return design


def _cat(a, b):
    """Two arrays one after the other (without a copy where one is empty)."""
    return b if not a.size else a if not b.size else np.concatenate((a, b))


def _level_reaches(la, lb, order, car, c_len, ev_own, ev_ref, ev_run, ev_jch,
                   lat_area, lat_size, area_in, size_out, q, surface, options, prof):
    """Reach rows of the carriers ``order[la:lb]`` (one tree level: all they receive is
    sized already): each carrier split at its junctions, with the area and flow from
    upstream, the inverts at both ends and the smallest size allowed (the largest it
    receives upstream). Fills ``area_in`` and, for carriers of no length, ``size_out``.

    Returns ``({carrier position: (first row, rows)}, rows)``."""
    ea, eb = np.searchsorted(ev_own, [la, lb])
    own, ref, isrun, jch = ev_own[ea:eb], ev_ref[ea:eb], ev_run[ea:eb], ev_jch[ea:eb]
    areas = np.where(isrun, lat_area[np.where(isrun, ref, 0)] if len(lat_area) else 0.0,
                     area_in[np.where(isrun, 0, ref)])
    sizes = np.where(isrun, lat_size[np.where(isrun, ref, 0)] if len(lat_size) else -1,
                     size_out[np.where(isrun, 0, ref)]).astype(np.int64)
    nl = lb - la
    owners = np.arange(la, lb)
    L = c_len[la:lb]
    ne = np.bincount(own - la, minlength=nl)
    estart = np.concatenate(([0], np.cumsum(ne)[:-1])).astype(np.int64)
    area_in[la:lb] = np.bincount(own - la, weights=areas, minlength=nl)
    # cuts: ends and junction chainages (rounded to the micrometre), once each
    vals = np.concatenate((np.zeros(nl), np.clip(jch, 0.0, L[own - la]), L)).round(6)
    vown = np.concatenate((owners, own, owners))
    o = np.lexsort((vals, vown))
    vals, vown = vals[o], vown[o]
    keep = np.concatenate(([True], (np.diff(vown) != 0) | (np.diff(vals) != 0)))
    vals, vown = vals[keep], vown[keep]
    new = np.concatenate(([True], vown[1:] != vown[:-1]))
    end = np.concatenate((vown[1:] != vown[:-1], [True]))
    vals[new] = 0.0
    vals[end] = L[vown[end] - la]
    lo, hi, iown = vals[:-1][~end[:-1]], vals[1:][~end[:-1]], vown[:-1][~end[:-1]]
    ok = hi - lo >= 1e-6
    lo, hi, iown = lo[ok], hi[ok], iown[ok]
    has = np.zeros(nl, bool)
    has[iown - la] = True
    for k in np.flatnonzero(~has):               # no length: passes everything on
        size_out[la + k] = int(sizes[estart[k]:estart[k] + ne[k]].max(initial=-1))
    if not lo.size:
        return {}, []
    # what enters upstream of each reach's start: jch <= start + 1e-6 (events sorted
    # by chainage within their carrier, ties in their given order)
    so = np.lexsort((jch, own))
    sj, sa, ss = jch[so], areas[so], sizes[so]
    cum_area = np.empty(sa.size)
    cnt = ne
    for idx, width in _blocks(cnt):
        if not width:
            continue
        blk, valid, pos = _padded(sa, estart, cnt, idx, width, 0.0)
        cum_area[pos[valid]] = np.cumsum(blk, axis=1)[valid]
    top = int(max(ss.max(initial=0), 0)) + 2
    lift = (own - la).astype(np.int64) * top
    cum_size = np.maximum.accumulate(ss + 1 + lift) - lift - 1 if ss.size else ss
    qv = lo + 1e-6
    allv = np.concatenate((sj, qv))
    allo = np.concatenate((own, iown))
    typ = np.concatenate((np.zeros(sj.size, np.int8), np.ones(qv.size, np.int8)))
    o2 = np.lexsort((typ, allv, allo))
    before = np.cumsum(o2 < sj.size)
    where_q = np.empty(o2.size, np.int64)
    where_q[o2] = np.arange(o2.size)
    n_up = before[where_q[sj.size:]] - estart[iown - la]      # events upstream, per reach
    last_ev = estart[iown - la] + n_up - 1
    up_area = np.where(n_up > 0, cum_area[np.maximum(last_ev, 0)] if sa.size else 0.0, 0.0)
    floor = np.where(n_up > 0, cum_size[np.maximum(last_ev, 0)] if ss.size else -1, -1)
    flow = np.zeros(lo.size)
    pos_area = up_area > 0
    if np.any(pos_area):
        flow[pos_area] = np.asarray(design_flow(q, up_area[pos_area]), float) * 1e3
    if prof is not None:
        ch, z, cst, cn = prof
        s0 = cst[la]
        s1 = cst[lb - 1] + cn[lb - 1]
        zl = z[s0:s1]
        inv = _interp_along(np.concatenate((iown, iown)) - la, np.concatenate((lo, hi)),
                            np.stack([zl, zl], axis=1), cst[la:lb] - s0, cn[la:lb],
                            ch[s0:s1])[:, 0]
        iu, idn = inv[:lo.size], inv[lo.size:]
    first = np.concatenate(([True], iown[1:] != iown[:-1]))
    rank = np.arange(lo.size) - np.maximum.accumulate(np.where(first, np.arange(lo.size), 0))
    n_rows = np.bincount(iown - la, minlength=nl)
    rows, rows_of = [], {}
    lo_l, hi_l, up_l, fl_l = lo.tolist(), hi.tolist(), up_area.tolist(), flow.tolist()
    fo_l, own_l, rk_l = floor.tolist(), iown.tolist(), rank.tolist()
    if prof is not None:
        iu_l, id_l = iu.tolist(), idn.tolist()
    for m in range(lo.size):
        k = own_l[m]
        cid = order[k]
        c = car[cid]
        Lk = float(L[k - la])
        if rk_l[m] == 0:
            rows_of[k] = (m, int(n_rows[k - la]))
        aa, bb = lo_l[m], hi_l[m]
        row = {"reach_id": f"{cid}{rk_l[m] + 1:02d}", "kind": c.kind,
               "field_id": c.field_id, "carrier_id": cid,
               "from": f"{aa:.1f} m", "to": f"{bb:.1f} m" if bb < Lk - 1e-6 else
               (c.to or f"outlet {c.outlet}"), "length_m": bb - aa,
               "drained_area_ha": up_l[m] / 1e4, "flow_l_s": fl_l[m],
               "warnings": [], "chainage_m": [aa, bb], "_floor": fo_l[m], "_k": k}
        if prof is None:
            row.update(grade=options.assumed_grade, invert_up_m=None,
                       invert_down_m=None, cover_min_m=None)
        else:
            row.update(grade=(iu_l[m] - id_l[m]) / (bb - aa), invert_up_m=iu_l[m],
                       invert_down_m=id_l[m])
        rows.append(row)
    return rows_of, rows


def _group(key, value, n):
    """``value`` split by ``key`` into n arrays (the values' order kept)."""
    key = np.asarray(key, np.int64)
    value = np.asarray(value, np.int64)
    o = np.argsort(key, kind="stable")
    cuts = np.searchsorted(key[o], np.arange(n + 1))
    v = value[o]
    return [v[cuts[k]:cuts[k + 1]] for k in range(n)]


def _junctions(runs, run_to, run_jch, lat_rows, r_to, order, car, inflow_order, car_jch,
               car_rows):
    """Every junction: (field, joining size, receiving size, at the receiving pipe's
    upstream end)."""
    bounds = {}

    def receiving(cid, ch):
        """The receiving reach: the first whose chainages hold ``ch``, else the last."""
        rows = car_rows.get(cid)
        if not rows:
            return [None] * len(ch)
        if cid not in bounds:
            ab = np.array([r["chainage_m"] for r in rows], float)
            bounds[cid] = ab
        ab = bounds[cid]
        j = np.searchsorted(ab[:, 1] + 1e-6, ch, side="left")
        out = []
        for x, jj in zip(ch, j):
            if jj < len(rows) and ab[jj, 0] - 1e-6 <= x <= ab[jj, 1] + 1e-6:
                out.append(rows[jj])
            else:
                # not in the first row that reaches that far: none holds it
                hit = next((r for r in rows[jj:] if r["chainage_m"][0] - 1e-6 <= x <=
                            r["chainage_m"][1] + 1e-6), None)
                out.append(hit if hit is not None else rows[-1])
        return out

    rr_run = [None] * len(runs)
    by = {}
    for i, t in enumerate(run_to):
        if t is not None:
            by.setdefault(t, []).append(i)
    for t, idx in by.items():
        for i, rr in zip(idx, receiving(t, run_jch[idx])):
            rr_run[i] = rr
    out = []
    for i, t in enumerate(run_to):
        if t is None:
            continue
        rr = rr_run[i]
        out.append((runs[i].field_id, lat_rows[i].get("size"), rr["size"] if rr else None,
                    bool(rr and run_jch[i] <= rr["chainage_m"][0] + 1e-6 and
                         rr["chainage_m"][0] < 1e-6)))
    for k in inflow_order:
        cid = order[k]
        ch = float(car_jch[k])
        rows = car_rows.get(cid)
        rr = receiving(car[cid].to, [ch])[0]
        out.append((car[cid].field_id, rows[-1]["size"] if rows else None,
                    rr["size"] if rr else None,
                    bool(rr and ch < 1e-6 and rr["chainage_m"][0] < 1e-6)))
    return out


def _outside_by_chainage(order, runs_into, cars_into, run_jch, car_jch, areas_lat, series,
                         options):
    """Per carrier, the junction chainages (sorted) and the outside diameter [m] from each
    on of the size its flow needs at the minimum grade (the largest size where none is
    enough); one size selection for all junctions."""
    nc = len(order)
    total = np.zeros(nc)
    jchs, cums = [], []
    for k in range(nc):
        ri, ci = runs_into[k], cars_into[k]
        jch = _cat(run_jch[ri], car_jch[ci])
        ar = _cat(areas_lat[ri], total[ci])
        total[k] = float(np.sum(ar)) if ar.size else 0.0
        o = np.argsort(jch)
        jchs.append(jch[o])
        cums.append(np.cumsum(ar[o]))
    counts = np.array([len(j) for j in jchs], np.int64)
    cum = np.concatenate(cums) if nc else np.zeros(0)
    od = np.zeros(0)
    if cum.size:
        flow = design_flow(options.coefficient, np.maximum(cum, 1e-9))
        idx, _ = select_size(np.atleast_1d(flow), np.full(cum.size, options.min_grade),
                             series, method=options.method,
                             capacity_factor=options.capacity_factor)
        idx = np.where(np.atleast_1d(idx) < 0, len(series.nominal) - 1, idx)
        od = series.inner_diameter[idx] * (1.15 if series.material == "corrugated" else 1.1)
    starts = np.r_[0, np.cumsum(counts)]
    return jchs, [od[starts[k]:starts[k + 1]] for k in range(nc)]


def _main_path(order, c_to, area_in):
    """Carrier ids from the outlet up along the largest flow (trunk, then main...)."""
    roots = [k for k in range(len(order)) if c_to[k] < 0]
    if not roots:
        return []
    ups = {}
    for k in range(len(order)):                   # in the carriers' order
        if c_to[k] >= 0:
            ups.setdefault(int(c_to[k]), []).append(k)
    node = max(roots, key=lambda k: area_in[k])
    path = [order[node]]
    while True:
        u = ups.get(node)
        if not u:
            return path
        node = max(u, key=lambda k: area_in[k])
        path.append(order[node])


def _profile_checks(rows, lo, hi, ch, xy, ground, z, series, options, violations):
    """Depth, cover and grade of many pipes against the limits: one problem per pipe.

    Row i covers the samples ``lo[i]:hi[i]``; rows with fewer than 2 samples are not
    checked. The tests run on all samples at once; the place of a problem (the
    deepest point, the least cover, the steepest stretch) is looked up only in the
    pipes that have one."""
    lo, hi = np.asarray(lo, np.int64), np.asarray(hi, np.int64)
    sel = np.flatnonzero(hi - lo >= 2)
    # in chunks of about 250,000 samples (small temporaries), in order
    ends = np.searchsorted(np.cumsum(hi[sel] - lo[sel]),
                           np.arange(250_000, int((hi[sel] - lo[sel]).sum()), 250_000))
    for part in np.split(sel, np.unique(ends + 1)):
        if part.size:
            _profile_checks_block(rows, part, lo, hi, ch, xy, ground, z, series, options,
                                  violations)


def _profile_checks_block(rows, sel, lo, hi, ch, xy, ground, z, series, options,
                          violations):
    """:func:`_profile_checks` of the rows ``sel``."""
    cnt = hi[sel] - lo[sel]
    seg0 = np.concatenate(([0], np.cumsum(cnt)[:-1]))
    if np.array_equal(lo[sel[1:]], hi[sel[:-1]]):
        base = int(lo[sel[0]])                    # the rows' samples follow each other
        take = None
        c, g, zz = (v[base:int(hi[sel[-1]])] for v in (ch, ground, z))
    else:
        take = _ranges(lo[sel], hi[sel])
        c, g, zz = ch[take], ground[take], z[take]
    depth = g - zz
    inner = np.array([(rows[i].get("inner_diameter_mm") or 100.0) for i in sel], float)
    od = np.asarray(outside_diameter(inner / 1000.0, series.material), float)
    cover = depth - np.repeat(od, cnt)
    cmin = np.minimum.reduceat(cover, seg0)
    deep_any = np.logical_or.reduceat(depth > options.max_depth + 1e-9, seg0)
    # grades between consecutive samples; the pair across two pipes counts as flat
    dch = np.diff(c)
    with np.errstate(divide="ignore", invalid="ignore"):
        seg = np.where(dch > 0.5, -np.diff(zz) / np.maximum(dch, 1e-9), 0.0)
    steep = np.concatenate((seg > options.max_grade + 1e-9, [False]))
    steep[seg0[1:] - 1] = False
    steep_any = np.logical_or.reduceat(steep, seg0)
    low_cover = cmin < options.min_cover - 1e-9
    cmin_l = cmin.tolist()
    for m, i in enumerate(sel.tolist()):
        rows[i]["cover_min_m"] = cmin_l[m]
    for m in np.flatnonzero(deep_any | low_cover | steep_any).tolist():
        row = rows[sel[m]]
        rid = row["reach_id"]
        a, b = int(seg0[m]), int(seg0[m] + cnt[m])
        pt = (lambda k: xy[base + k + a] if take is None else xy[take[k + a]])
        cc = c[a:b]
        found = []          # (kind, sample, problem, fix, summary, the reach's warning)
        if deep_any[m]:
            k = int(np.argmax(depth[a:b]))
            found.append((
                "too deep", k,
                f"{depth[a + k]:.2f} m deep, more than the maximum {options.max_depth:.2f} m",
                "lay a sub-main or second outlet closer to this part, accept a deeper "
                "trench, or reduce the minimum grade",
                f"deeper than the maximum depth {options.max_depth:.2f} m",
                "deeper than the maximum depth"))
        if low_cover[m]:
            k = int(np.argmin(cover[a:b]))
            found.append((
                "shallow cover", k,
                f"cover {cover[a + k]:.2f} m is less than {options.min_cover:.2f} m",
                "the outlet or a joining pipe holds it up: lower the outlet, or protect the "
                "pipe (rigid pipe, no heavy traffic)",
                f"cover less than {options.min_cover:.2f} m", "shallow cover"))
        if steep_any[m]:
            k = int(np.argmax(seg[a:b - 1]))
            found.append((
                "steep", k,
                f"grade {seg[a + k]:.2%} exceeds the maximum {options.max_grade:.2%}",
                "put a drop structure here, or lay the pipe deeper upstream",
                f"grade above the maximum {options.max_grade:.2%}",
                "steeper than the maximum grade"))
        for kind, k, problem, fix, summary, warning in found:
            violations.append(_violation(kind, rid, cc[k], pt(k), problem, fix))
            violations[-1]["summary"] = summary
            row["warnings"].append(warning)

def _high_side(runs, ground, start, last, length, violations):
    """Fields whose laterals mostly rise towards their main: the main is on the high
    side. One problem per field."""
    if not len(runs) or ground is None:
        return
    rise = (ground[last] - ground[start]) / np.maximum(length, 1e-9)
    fid = [r.field_id for r in runs]
    first, inv = {}, np.empty(len(runs), np.int64)
    for i, f in enumerate(fid):
        inv[i] = first.setdefault(f, len(first))
    n = np.bincount(inv, minlength=len(first))
    up = np.bincount(inv, weights=(rise > 5e-4), minlength=len(first))
    names = list(first)
    for g in np.flatnonzero(up / n > 0.5):
        f = names[g]
        violations.append(_violation(
            "main on the high side", f"{f}-M", 0.0, None,
            f"the ground rises {np.median(rise[inv == g]):.2%} along most laterals of field "
            f"{f} towards its main: the main is on the high side",
            "put the main on the low side with the layout's --main-side (a layout made "
            "with --survey does so where the ground along the laterals decides it; without "
            "one, re-run it with --survey)"))
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
               min_index=None, groups=None):
    """Smallest adequate size of each row; beyond the table: marked with the fix.

    With ``taper`` the rows are the reaches of carriers, upstream first; ``groups``
    (non-decreasing, one value per carrier) keeps each carrier's taper to itself."""
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
        capped = np.where(idx < 0, top, idx)
        if groups is not None and len(groups):
            # a running maximum per carrier: each carrier's values lifted above all
            # earlier carriers' (exact in integers)
            g = np.cumsum(np.r_[0, np.diff(np.asarray(groups)) != 0]).astype(np.int64)
            lift = g * (top + 1)
            run_max = np.maximum.accumulate(capped + lift) - lift
        else:
            run_max = np.maximum.accumulate(capped)
        idx = np.where(run_max >= top, -1, run_max)
        d = series.inner_diameter[np.maximum(idx, 0)]
        cap = np.where(idx >= 0, _capacity(d, grade, series, options, uniform_inflow), np.nan)
    # full-flow capacity (velocity) and n of the chosen sizes, for all rows at once
    ok = idx >= 0
    d_all = series.inner_diameter[np.maximum(idx, 0)]
    full_all = _capacity(d_all, grade, series, options, False) / options.capacity_factor
    wall = "smooth" if series.material in ("smooth", "clay") else "corrugated"
    outside = power_law_outside(d_all, wall) if options.method != "manning" else \
        np.zeros(len(rows), bool)
    big_full = None
    # per size: inside diameter [mm] and Manning's n as shown (rounded once per size)
    inner_mm = [round(float(d) * 1000.0, 1) for d in series.inner_diameter]
    n_size = ([round(float(v), 5) for v in np.atleast_1d(
        manning_n(series.material, series.inner_diameter))]
        if options.method == "manning" else None)
    usable = round(100.0 * options.capacity_factor, 1)
    cap_l = (np.asarray(cap, float) * 1000.0).tolist()
    vel = (full_all / (np.pi * d_all * d_all / 4.0)).tolist()
    idx_l, ok_l = np.asarray(idx).tolist(), ok.tolist()
    for k, r in enumerate(rows):
        i, s = idx_l[k], grade[k]
        r["material"] = series.material
        r["usable_capacity_pct"] = usable
        if not ok_l[k]:
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
        c = cap_l[k]
        r["size"] = series.nominal[i]
        r["inner_diameter_mm"] = inner_mm[i]
        r["capacity_l_s"] = c
        r["capacity_used_pct"] = 100.0 * r["flow_l_s"] / c if c > 0 else None
        r["velocity_m_s"] = vel[k]
        if n_size is not None:
            r["manning_n"] = n_size[i]
        elif outside[k]:
            lo, hi = POWER_LAW_RANGE[wall]
            r["warnings"].append("power law outside its diameter range")
            violations.append(_violation(
                "power law range", r["reach_id"], 0.0, r.get("_start"),
                f"{r['size']} ({float(d_all[k]) * 1000:.0f} mm inside) lies outside the "
                f"{lo * 1000:.0f}-{hi * 1000:.0f} mm the drain-pipe power law was "
                "fitted to; its capacity may be overstated",
                "check these reaches with --capacity-method manning"))
            violations[-1]["summary"] = (f"power-law capacity used outside its "
                                         f"{lo * 1000:.0f}-{hi * 1000:.0f} mm range")


def _capacity(d, grade, series, options, uniform_inflow):
    cap = pipe_capacity(d, grade, series.material, method=options.method,
                        uniform_inflow=uniform_inflow)
    return np.asarray(cap, float) * options.capacity_factor


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
