"""Benchmark: lay out 10,000 irregular fields of 5-80 ha at 15 m spacing.

Times drainplan's vectorised scan line plus mains, connections and quantities
(`layout_fields`), and compares the lateral step with clipping every lateral
line with shapely's general `intersection` in the same run. Run on demand:

    python benchmarks/bench_layout.py [--fields N] [--write]
"""

from __future__ import annotations

import argparse
import os
import platform
import time

import numpy as np
import shapely

from drainplan.geometry.fields import long_axis_bearing
from drainplan.geometry.laterals import frame_axes, scan_laterals
from drainplan.geometry.layout import LayoutOptions, layout_fields


def irregular_fields(n, seed=11):
    """Star-shaped irregular polygons (7-12 vertices) of 5-80 ha, spread on a grid."""
    rng = np.random.default_rng(seed)
    out = []
    for i in range(n):
        k = rng.integers(7, 13)
        ang = np.sort(rng.uniform(0, 2 * np.pi, k))
        rad = rng.uniform(0.75, 1.0, k)
        stretch = rng.uniform(1.0, 2.5)
        pts = np.c_[np.cos(ang) * rad * stretch, np.sin(ang) * rad]
        theta = rng.uniform(0, np.pi)
        rot = np.array([[np.cos(theta), -np.sin(theta)], [np.sin(theta), np.cos(theta)]])
        pts = pts @ rot.T
        poly = shapely.Polygon(pts)
        target = rng.uniform(5e4, 8e5)
        poly = shapely.affinity.scale(poly, *(np.sqrt(target / poly.area),) * 2,
                                      origin=(0, 0))
        cx, cy = (i % 100) * 3000.0, (i // 100) * 3000.0
        out.append(shapely.affinity.translate(poly, cx, cy))
    return np.array(out, dtype=object)


def clip_with_intersection(fields, bearing, spacing):
    """Reference: build each scan line as a long LineString and clip it with shapely."""
    u, v = frame_axes(bearing)
    total = 0.0
    lines_all, owners = [], []
    for f, poly in enumerate(fields):
        c = shapely.get_coordinates(poly)
        s = c @ v[f]
        t = c @ u[f]
        n = max(1, int(np.ceil((s.max() - s.min()) / spacing - 1e-9)))
        s0 = s.min() + ((s.max() - s.min()) - (n - 1) * spacing) / 2
        sk = s0 + spacing * np.arange(n)
        p0 = sk[:, None] * v[f] + (t.min() - 1) * u[f]
        p1 = sk[:, None] * v[f] + (t.max() + 1) * u[f]
        lines_all.append(shapely.linestrings(np.stack([p0, p1], axis=1)))
        owners.append(np.full(n, f))
    lines = np.concatenate(lines_all)
    owner = np.concatenate(owners)
    clipped = shapely.intersection(lines, fields[owner])
    total = float(shapely.length(clipped).sum())
    return total


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--fields", type=int, default=10_000)
    ap.add_argument("--write", action="store_true")
    args = ap.parse_args()
    fields = irregular_fields(args.fields)
    area_ha = shapely.area(fields) / 1e4
    opts = LayoutOptions(spacing=15.0, direction="auto", setback=6.0, min_length=10.0)

    t0 = time.perf_counter()
    lay = layout_fields(fields, opts)
    per, tot = lay.quantities(shapely.area(fields))
    t_full = time.perf_counter() - t0

    insets = shapely.buffer(fields, -6.0, join_style="mitre")
    bearing = long_axis_bearing(fields)
    t0 = time.perf_counter()
    pieces, _ = scan_laterals(insets, bearing, 15.0)
    t_scan = time.perf_counter() - t0
    t0 = time.perf_counter()
    ref_len = clip_with_intersection(insets, bearing, 15.0)
    t_clip = time.perf_counter() - t0
    scan_len = float(pieces.length.sum())

    lines = [
        "## Field layout, 10,000 fields",
        "",
        f"Measured {time.strftime('%Y-%m-%d')} on {platform.machine()}, {os.cpu_count()} cores, "
        f"Python {platform.python_version()}, shapely {shapely.__version__} "
        "(`python benchmarks/bench_layout.py --write`).",
        "",
        "| what | figure |",
        "| --- | --- |",
        f"| fields (irregular, {area_ha.min():.0f}-{area_ha.max():.0f} ha) | {args.fields:,} |",
        f"| full layout (laterals, mains, connections, quantities) | {t_full:.2f} s |",
        f"| laterals laid | {tot['laterals']:,} runs, {tot['lateral_length_m'] / 1000:,.0f} km |",
        f"| scan line alone (laterals over the insets) | {t_scan:.2f} s |",
        f"| shapely `intersection` of every scan line | {t_clip:.2f} s |",
        f"| ratio (intersection / scan line) | {t_clip / t_scan:.1f}x |",
        f"| lateral length, scan line vs intersection | {scan_len:,.1f} m vs {ref_len:,.1f} m |",
        "",
        "Target: the full layout in at most 10 s; the scan line at least 3x faster than "
        "clipping with `intersection`.",
    ]
    text = "\n".join(lines)
    print(text)
    if args.write:
        from bench_spacing import write_section as _write_section

        _write_section(text, "## Field layout")


if __name__ == "__main__":
    main()
