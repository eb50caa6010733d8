"""Quantity take-off of a network design: what a contractor orders.

Pipe by kind, material and size, perforated (laterals) or not (connectors,
sub-mains, mains, trunk, outlet pipe); envelope or sock length where the drains
have one; fittings: a tee or wye for every junction by size pair, a reducer at
every size change along a carrier, an end cap at every upstream end, and an
outlet pipe with an animal guard at every outlet. Rows per field and for the
whole job (``field_id`` "all"); every row says whether it is perforated.
"""

from __future__ import annotations

__all__ = ["takeoff_rows", "ENVELOPES"]

#: Envelopes the take-off knows: sock (synthetic filter wrapped on the pipe, ordered
#: as pre-wrapped pipe) or gravel (granular envelope placed around the pipe).
ENVELOPES = ("sock", "gravel")


def _add(items, field_id, kind, perforated, material, size, length=0.0, count=0, note=""):
    key = (field_id, kind, perforated, material, size, note)
    it = items.setdefault(key, {"field_id": field_id, "kind": kind, "perforated": perforated,
                                "material": material, "size": size, "length_m": 0.0,
                                "count": 0, "note": note})
    it["length_m"] += float(length)
    it["count"] += int(count)


def _add_runs(items, runs, sizes, mat, options):
    """The laterals' rows (pipe, connector, envelope, end cap) summed per field and size
    with array operations: the same rows, sums and order as adding run by run."""
    import numpy as np

    n = len(runs)
    if not n:
        return
    groups, g = {}, np.empty(n, np.int64)
    for i, (run, size) in enumerate(zip(runs, sizes)):
        g[i] = groups.setdefault((run.field_id, size), len(groups))
    ng = len(groups)
    perf = np.array([run.perforated_length for run in runs], float)
    conn = np.array([run.connector_length for run in runs], float)
    has = conn > 0
    # sums in run order (np.bincount adds each bin's values in the order given)
    perf_sum = np.bincount(g, weights=perf, minlength=ng)
    count = np.bincount(g, minlength=ng)
    con_sum = np.bincount(g[has], weights=conn[has], minlength=ng)
    con_count = np.bincount(g[has], minlength=ng)
    first = np.full(ng, n)
    np.minimum.at(first, g, np.arange(n))
    con_first = np.full(ng, n)
    np.minimum.at(con_first, g[has], np.flatnonzero(has))
    envelope = options.envelope in ENVELOPES
    events = []                          # (first run, order within a run, row)
    for (fid, size), k in groups.items():
        f = int(first[k])
        events.append((f, 0, (fid, "lateral", True, mat, size, ""), perf_sum[k], count[k]))
        if con_count[k]:
            events.append((int(con_first[k]), 1, (fid, "connector", False, mat, size, ""),
                           con_sum[k], con_count[k]))
        if envelope:
            events.append((f, 2, (fid, "envelope", False, options.envelope, size,
                                  "around the perforated laterals"), perf_sum[k], 0))
        events.append((f, 3, (fid, "fitting", False, "", f"end cap {size}", ""), 0.0,
                       count[k]))
    events.sort(key=lambda e: (e[0], e[1]))
    for _, _, key, length, cnt in events:
        fid, kind, perforated, material, size, note = key
        _add(items, fid, kind, perforated, material, size, float(length), int(cnt), note=note)


def takeoff_rows(reaches, runs, car_rows, junctions, outlets, options):
    """Take-off rows per field and for the job.

    Parameters
    ----------
    reaches : list of dict
        Reach rows of the design (laterals and carriers, with sizes).
    runs : list of LateralRun
    car_rows : dict carrier id -> list of its reach rows, upstream first
    junctions : list of (field_id, joining size, receiving size, at_upstream_end)
    outlets : list of dict
        One per outlet (``outlet_id``, ``field_id``, ``size``).
    options : PipeOptions

    Returns
    -------
    list of dict
        ``field_id``, ``kind``, ``perforated``, ``material``, ``size``,
        ``length_m``, ``count``, ``note``.
    """
    items = {}
    mat = options.material
    lat_by_id = {r["reach_id"]: r for r in reaches if r["kind"] == "lateral"}
    _add_runs(items, runs, [lat_by_id[run.run_id].get("size") or "no size" for run in runs],
              mat, options)
    for cid, rows in car_rows.items():
        first = rows[0]
        kind = first["kind"]
        fid = first["field_id"] or "shared"
        for r in rows:
            _add(items, fid, kind, False, mat, r.get("size") or "no size", r["length_m"], 1)
        for a, b in zip(rows[:-1], rows[1:]):
            if a.get("size") != b.get("size"):
                _add(items, fid, "fitting", False, "",
                     f"reducer {b.get('size')} x {a.get('size')}", 0, 1)
    ends_fed = {}
    for fid, join, recv, at_end in junctions:
        fid = fid or "shared"
        if at_end:
            ends_fed[fid] = ends_fed.get(fid, 0) + 1
        name = (f"coupling {recv} x {join}" if at_end else f"tee or wye {recv} x {join}")
        _add(items, fid, "fitting", False, "", name, 0, 1)
    # an end cap at the upstream end of every carrier that nothing enters at its end
    capped = {}
    for cid, rows in car_rows.items():
        fid = rows[0]["field_id"] or "shared"
        capped[fid] = capped.get(fid, 0) + 1
    for fid, n in capped.items():
        n_caps = max(n - ends_fed.get(fid, 0), 0)
        if n_caps:
            _add(items, fid, "fitting", False, "", "end cap (carrier upstream end)", 0, n_caps)
    for o in outlets:
        fid = o.get("field_id") or "shared"
        size = o.get("size") or "no size"
        _add(items, fid, "outlet", False, "rigid, non-perforated", size,
             options.outlet_pipe_length, 1, note="outlet pipe with animal guard")
        _add(items, fid, "fitting", False, "", f"animal guard {size}", 0, 1)
    rows = list(items.values())
    job = {}
    for r in rows:
        key = (r["kind"], r["perforated"], r["material"], r["size"], r["note"])
        j = job.setdefault(key, dict(r, field_id="all", length_m=0.0, count=0))
        j["length_m"] += r["length_m"]
        j["count"] += r["count"]
    order = {"lateral": 0, "connector": 1, "envelope": 2, "submain": 3, "main": 4,
             "trunk": 5, "outlet": 6, "fitting": 7}
    out = sorted(job.values(), key=lambda r: (order.get(r["kind"], 9), str(r["size"])))
    out += sorted(rows, key=lambda r: (r["field_id"], order.get(r["kind"], 9), str(r["size"])))
    for r in out:
        r["length_m"] = round(r["length_m"], 2)
    return out
