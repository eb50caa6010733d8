"""Benchmark: the demo design end to end (imports included) and `drainplan --help`.

Each is timed as a fresh process, best of five. Run on demand:

    python benchmarks/bench_design.py [--write]
"""

from __future__ import annotations

import argparse
import os
import platform
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def best_of(cmd, n=5):
    best = float("inf")
    for _ in range(n):
        t0 = time.perf_counter()
        subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        best = min(best, time.perf_counter() - t0)
    return best


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--write", action="store_true")
    args = ap.parse_args()
    exe = [sys.executable, "-m", "drainplan"]
    t_help = best_of(exe + ["--help"])
    with tempfile.TemporaryDirectory() as tmp:
        t_design = best_of(exe + ["-q", "design", str(ROOT / "demo_fields" / "project.toml"),
                                  "-o", str(Path(tmp) / "out"), "--overwrite"])
    lines = [
        "## Demo design and start-up",
        "",
        f"Measured {time.strftime('%Y-%m-%d')} on {platform.machine()}, {os.cpu_count()} cores, "
        f"Python {platform.python_version()} (`python benchmarks/bench_design.py --write`; "
        "fresh process each time, best of 5).",
        "",
        "| what | figure | target |",
        "| --- | --- | --- |",
        f"| `drainplan design demo_fields/project.toml` (all outputs, imports included) | "
        f"{t_design:.2f} s | under 3 s |",
        f"| `drainplan --help` | {t_help:.3f} s | under 0.2 s |",
    ]
    text = "\n".join(lines)
    print(text)
    if args.write:
        sys.path.insert(0, str(Path(__file__).parent))
        from bench_spacing import write_section as _write_section

        _write_section(text, "## Demo design")


if __name__ == "__main__":
    main()
