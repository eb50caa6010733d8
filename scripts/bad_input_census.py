"""Census of bad inputs: try many odd values on every checked option and project key.

Run from the repository root::

    .venv/bin/python scripts/bad_input_census.py [-v]

(``-v`` lists the accepted values too).

Each case is run in-process through the command line. A case is *clean* when it
ends with exit code 2 (or 1 for a domain failure) and exactly one line on stderr
starting ``drainplan: error:``, without a traceback and without writing an
output; *accepted* when the command ran (exit 0: the value was within range).
Anything else is *dirty* and printed. The counts close the output.
"""

from __future__ import annotations

import math
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))

from click.testing import CliRunner  # noqa: E402

from drainplan.cli import cli  # noqa: E402
from drainplan.cli.options import Number, Quantity  # noqa: E402
from drainplan.errors import InputError  # noqa: E402
from drainplan.project import SCHEMA, load_project  # noqa: E402

DEMO = ROOT / "demo_fields"
BAD_TEXT = ["", " ", "nan", "inf", "-inf", "-1", "-0.5", "1e300", "-1e300", "1e400", "abc",
            "9**9**9", "9**9**9 m/d", "1 kg", "m", "cm", "mm/d", "3/0", "1/2/3", "nan m",
            "inf m", "--", "1,2", "0x10", "1e-320", "½", "1 m m", "(2) m", "2 m/d", "2 d",
            "200 %", "-5 %", "1e9 km"]
BAD_VALUES = [math.nan, math.inf, -math.inf, -1, -1e300, 1e300, 0, True, [1, 2], "abc",
              "1 kg", "m", "-1 m", "9**9**9 m/d", "1e400", "nan", ""]


def classify(r, out_paths):
    err = r.stderr.strip().splitlines()
    wrote = [p for p in out_paths if Path(p).exists()]
    if r.exit_code == 0:
        return "accepted"
    if r.exc_info and r.exc_info[0] not in (SystemExit,) and not isinstance(
            r.exception, SystemExit):
        return "dirty"
    if r.exit_code in (1, 2) and len(err) == 1 and err[0].startswith("drainplan: error:") \
            and "Traceback" not in r.output and not wrote:
        return "clean"
    return "dirty"


def main():
    runner = CliRunner()
    counts = {"tried": 0, "clean": 0, "accepted": 0, "dirty": 0}
    t0 = time.perf_counter()
    with tempfile.TemporaryDirectory() as td:
        tmp = Path(td)
        lay = tmp / "layout.gpkg"
        r = runner.invoke(cli, ["layout", str(DEMO / "fields.geojson"), "--spacing", "18 m",
                                "-o", str(lay)])
        assert r.exit_code == 0, r.output
        from drainplan.cli.layout import layout
        from drainplan.cli.pipes import pipes
        from drainplan.cli.spacing import spacing

        bases = {
            "layout": (["layout", str(DEMO / "fields.geojson"), "--spacing", "18 m"], "o.gpkg"),
            "pipes": (["pipes", str(lay), "--coefficient", "10 mm/d"], "s.csv"),
            "spacing": (["spacing", "--k", "0.5", "--drain-depth", "1", "--barrier-depth",
                         "3", "--drain-radius", "0.05", "--recharge", "0.01",
                         "--water-table-depth", "0.5"], None),
        }
        cases = []
        for cmd in (layout, pipes, spacing):
            base, out = bases[cmd.name]
            for p in cmd.params:
                opt = next((o for o in getattr(p, "opts", []) if o.startswith("--")), None)
                if opt is None or not (isinstance(p.type, (Quantity, Number)) or opt in (
                        "--direction", "--outlet")):
                    continue
                for text in BAD_TEXT:
                    cases.append((cmd.name, base, out, [opt, text]))
        for cmd_name, base, out, extra in cases:
            argv = list(base) + extra
            outs = []
            if out:
                argv += ["-o", str(tmp / out), "--overwrite"]
                outs = [tmp / out]
                for o in outs:
                    o.unlink(missing_ok=True)
            r = runner.invoke(cli, argv)
            kind = classify(r, outs if r.exit_code else [])
            counts["tried"] += 1
            counts[kind] += 1
            if kind == "dirty":
                print("DIRTY", cmd_name, extra, r.exit_code, r.stderr.strip()[:200])
            elif kind == "accepted" and "-v" in sys.argv:
                print("accepted", cmd_name, extra)
        # project keys, each through the loader and (when refused) the design command
        import tomllib

        sys.path.insert(0, str(ROOT / "tests"))
        from test_bad_input import _toml

        base = tomllib.loads((DEMO / "project.toml").read_text())
        for name in ("fields.geojson", "exclusions.geojson", "outlet.geojson", "survey.csv"):
            (tmp / name).symlink_to(DEMO / name)
        for section, keys in SCHEMA.items():
            for key, (kind, _) in keys.items():
                if kind in ("text", "layers"):
                    continue
                for value in BAD_VALUES:
                    data = {s: dict(v) for s, v in base.items()}
                    data.setdefault(section, {})[key] = value
                    path = tmp / "project.toml"
                    path.write_text(_toml(data))
                    counts["tried"] += 1
                    try:
                        load_project(path)
                    except InputError:
                        r = runner.invoke(cli, ["design", str(path), "-o", str(tmp / "d")])
                        kind_ = classify(r, [tmp / "d"])
                        counts[kind_] += 1
                        if kind_ == "dirty":
                            print("DIRTY", f"{section}.{key}", value, r.stderr.strip()[:200])
                        continue
                    except Exception as exc:                  # noqa: BLE001
                        counts["dirty"] += 1
                        print("DIRTY", f"{section}.{key}", value, type(exc).__name__, exc)
                        continue
                    counts["accepted"] += 1
                    if "-v" in sys.argv:
                        print("accepted", f"{section}.{key}", repr(value))
    dt = time.perf_counter() - t0
    print(f"tried {counts['tried']}, clean refusals {counts['clean']}, accepted (in range) "
          f"{counts['accepted']}, dirty {counts['dirty']} ({dt:.0f} s)")
    return 1 if counts["dirty"] else 0


if __name__ == "__main__":
    sys.exit(main())
