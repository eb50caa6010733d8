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
    for run in runs:
        row = lat_by_id[run.run_id]
        size = row.get("size") or "no size"
        _add(items, run.field_id, "lateral", True, mat, size, run.perforated_length, 1)
        if run.connector_length > 0:
            _add(items, run.field_id, "connector", False, mat, size, run.connector_length, 1)
        if options.envelope in ENVELOPES:
            _add(items, run.field_id, "envelope", False, options.envelope, size,
                 run.perforated_length, 0, note="around the perforated laterals")
        _add(items, run.field_id, "fitting", False, "", f"end cap {size}", 0, 1)
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
