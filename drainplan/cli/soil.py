"""``drainplan soil ...``: field tests and texture reduced to design inputs."""

from __future__ import annotations

import json

import click

from ..errors import InputError
from ..units import show
from .options import LENGTH, json_option, units_option

__all__ = ["soil"]

_CAUTION = ("Check the design against local codes and have it reviewed by a qualified "
            "professional; keep open holes covered and fenced.")


@click.group(short_help="Soil inputs: auger-hole tests, texture estimates, drainable porosity.")
def soil():
    """Soil inputs for drain spacing: K from field tests (auger hole below the water
    table, inverse auger hole above it), K and water contents estimated from texture,
    and drainable porosity from a retention curve."""


def _readings(readings, readings_file):
    from ..field_tests import parse_readings, read_readings_csv

    if (readings is None) == (readings_file is None):
        raise InputError("give the readings with --readings or --readings-file (one of them)",
                         param="readings")
    if readings is not None:
        return parse_readings(readings)
    return read_readings_csv(readings_file)


def _test_json(r, inputs):
    return {"method": r.method, "k_m_per_d": r.k, "readings_used": r.readings_used,
            "readings_total": r.readings_total, "interval_k_m_per_d": list(r.interval_k),
            "details": r.details, "notes": list(r.notes), "inputs": inputs}


def _test_text(title, r, rows, units, source):
    lines = [title, "Inputs"] + [f"  {a:<34} {b}" for a, b in rows]
    lines += ["Result",
              f"  {'hydraulic conductivity K':<34} {show(r.k, 'conductivity', units, 3)}",
              f"  {'readings used':<34} {r.readings_used} of {r.readings_total}",
              f"  {'K by interval':<34} " + ", ".join(
                  show(v, 'conductivity', units, 3) for v in r.interval_k)]
    lines += ["Notes"] + [f"  - {n}" for n in r.notes]
    lines.append(f"  - {source}")
    lines.append(f"  - {_CAUTION}")
    return "\n".join(lines)


_READINGS_HELP = ("Readings SECONDS:METRES (depth to the water in the hole below the surface), "
                  "e.g. '0:1.40,40:1.34,80:1.285'.")
_FILE_HELP = ("CSV with a time_<s|min|h> and a water_depth_<m|cm|mm|ft|in> column, e.g. "
              "time_s,water_depth_m.")


@soil.command("auger-hole")
@click.option("--hole-radius", type=LENGTH, required=True, help="Radius of the hole, e.g. '4 cm'.")
@click.option("--hole-depth", type=LENGTH, required=True, help="Depth of the hole bottom.")
@click.option("--water-table-depth", type=LENGTH, required=True,
              help="Depth of the static water table (before bailing).")
@click.option("--barrier-depth", type=LENGTH,
              help="Depth of the impermeable layer (default: at least H/2 below the hole).")
@click.option("--readings", help=_READINGS_HELP)
@click.option("--readings-file", type=click.Path(dir_okay=False), help=_FILE_HELP)
@click.option("--intermediate-barrier", type=click.Choice(["refuse", "interpolate"]),
              default="refuse", show_default=True,
              help="Barrier between the hole bottom and H/2 below it: refuse, or interpolate "
                   "between Ernst's two cases (approximate).")
@units_option
@json_option
def auger_hole(hole_radius, hole_depth, water_table_depth, barrier_depth, readings,
               readings_file, intermediate_barrier, units, as_json):
    """K from an auger-hole test below the water table (Ernst's formula).

    Bore below the water table, let the level settle, bail the hole, then
    read the depth to the water as it rises. Readings after the water has
    refilled a quarter of the initial drawdown are left out.

    Example:

        drainplan soil auger-hole --hole-radius "4 cm" --hole-depth 1.7
        --water-table-depth 0.9 --readings "0:1.40,40:1.34,80:1.285"
    """
    from ..auger_hole import auger_hole_test

    t, z = _readings(readings, readings_file)
    r = auger_hole_test(hole_radius=hole_radius, hole_depth=hole_depth,
                        water_table_depth=water_table_depth, barrier_depth=barrier_depth,
                        times=t, water_depths=z, intermediate_barrier=intermediate_barrier)
    inputs = {"hole_radius_m": hole_radius, "hole_depth_m": hole_depth,
              "water_table_depth_m": water_table_depth, "barrier_depth_m": barrier_depth,
              "times_s": t.tolist(), "water_depths_m": z.tolist()}
    if as_json:
        click.echo(json.dumps(_test_json(r, inputs), indent=2, sort_keys=True))
        return
    d = r.details
    rows = [("hole radius", show(hole_radius, "radius", units, 1)),
            ("hole depth", show(hole_depth, "length", units, 2)),
            ("static water-table depth", show(water_table_depth, "length", units, 2)),
            ("hole depth below water table H", show(d["depth_below_water_table_m"],
                                                    "length", units, 2)),
            ("barrier below the hole S", "deep (assumed)" if d["barrier_below_hole_m"] is None
             else show(d["barrier_below_hole_m"], "length", units, 2)),
            ("initial drawdown y0", show(d["initial_drawdown_m"], "length", units, 3)),
            ("mean drawdown y", show(d["mean_drawdown_m"], "length", units, 3)),
            ("rise used", f"{show(d['rise_m'], 'length', units, 3)} in {d['elapsed_s']:g} s")]
    click.echo(_test_text("Auger-hole method (Ernst)", r, rows, units,
                          "Ernst (1950); van Beers (1983) ILRI Bull. 1; ILRI Publ. 16 ch. 12 "
                          "(constants as recalled)"))


@soil.command("inverse-auger-hole")
@click.option("--hole-radius", type=LENGTH, required=True, help="Radius of the hole.")
@click.option("--hole-depth", type=LENGTH, required=True, help="Depth of the hole bottom.")
@click.option("--water-table-depth", type=LENGTH,
              help="Depth of the water table, if known (must be below the hole).")
@click.option("--readings", help=_READINGS_HELP.replace("1.40,40:1.34,80:1.285",
                                                        "0.40,300:0.45,600:0.50"))
@click.option("--readings-file", type=click.Path(dir_okay=False), help=_FILE_HELP)
@units_option
@json_option
def inverse_auger_hole(hole_radius, hole_depth, water_table_depth, readings, readings_file,
                       units, as_json):
    """K from an inverse auger-hole (Porchet) test above the water table.

    Fill the hole and keep it filled until the soil round it is wet, then
    read the depth to the water as it falls.

    Example:

        drainplan soil inverse-auger-hole --hole-radius "4 cm" --hole-depth 1.0
        --readings "0:0.40,300:0.452,600:0.50"
    """
    from ..auger_hole import inverse_auger_hole_test

    t, z = _readings(readings, readings_file)
    r = inverse_auger_hole_test(hole_radius=hole_radius, hole_depth=hole_depth,
                                water_table_depth=water_table_depth, times=t, water_depths=z)
    inputs = {"hole_radius_m": hole_radius, "hole_depth_m": hole_depth,
              "water_table_depth_m": water_table_depth, "times_s": t.tolist(),
              "water_depths_m": z.tolist()}
    if as_json:
        click.echo(json.dumps(_test_json(r, inputs), indent=2, sort_keys=True))
        return
    d = r.details
    rows = [("hole radius", show(hole_radius, "radius", units, 1)),
            ("hole depth", show(hole_depth, "length", units, 2)),
            ("water height at start h0", show(d["initial_height_m"], "length", units, 3)),
            ("water height at end", show(d["final_height_m"], "length", units, 3)),
            ("time", f"{d['elapsed_s']:g} s")]
    click.echo(_test_text("Inverse auger-hole method (Porchet)", r, rows, units,
                          "Porchet's formula, ILRI Publ. 16 ch. 12 (as recalled)"))


@soil.command("texture")
@click.option("--sand", type=float, required=True, help="Sand content, % by mass.")
@click.option("--clay", type=float, required=True, help="Clay content, % by mass.")
@click.option("--organic-matter", type=float, default=2.5, show_default=True,
              help="Organic matter, % by mass (0-8).")
@click.option("--density-factor", type=float, default=1.0, show_default=True,
              help="Compaction: actual / normal bulk density (0.9-1.3).")
@units_option
@json_option
def texture(sand, clay, organic_matter, density_factor, units, as_json):
    """Estimate K, water contents and drainable porosity from texture (Saxton & Rawls 2006).

    An estimate for screening when no field test was made: K from texture
    can be off several-fold for a given field; field tests should govern.

    Example:

        drainplan soil texture --sand 40 --clay 20 --organic-matter 2.5
    """
    from ..pedotransfer import saxton_rawls

    r = {k: float(v) for k, v in saxton_rawls(sand=sand, clay=clay,
                                               organic_matter=organic_matter,
                                               density_factor=density_factor).items()}
    note = ("estimate by the Saxton & Rawls (2006) pedotransfer equations (SSSA J. 70: "
            "1569-1578); drainable porosity taken as saturation minus field capacity")
    if as_json:
        out = dict(r, method="saxton-rawls-2006", estimate=True, note=note,
                   inputs={"sand_percent": sand, "clay_percent": clay,
                           "organic_matter_percent": organic_matter,
                           "density_factor": density_factor})
        click.echo(json.dumps(out, indent=2, sort_keys=True))
        return
    rows = [("saturated K (estimate)", show(r["ksat_m_per_d"], "conductivity", units, 3)),
            ("water content at saturation", f"{r['theta_saturation']:.3f} m³/m³"),
            ("water content at field capacity", f"{r['theta_field_capacity']:.3f} m³/m³"),
            ("water content at wilting point", f"{r['theta_wilting_point']:.3f} m³/m³"),
            ("drainable porosity (estimate)", f"{r['drainable_porosity']:.3f}"),
            ("bulk density", f"{r['bulk_density_g_cm3']:.2f} g/cm³"),
            ("air-entry tension", f"{r['air_entry_kpa']:.1f} kPa")]
    lines = [f"Texture estimate: sand {sand:g} %, clay {clay:g} %, organic matter "
             f"{organic_matter:g} %", "Result"] + [f"  {a:<34} {b}" for a, b in rows]
    lines += ["Notes", f"  - {note}",
              "  - a screening value: field tests (auger hole) should govern the design"]
    click.echo("\n".join(lines))


@soil.command("van-genuchten")
@click.option("--theta-r", type=float, required=True, help="Residual water content, m³/m³.")
@click.option("--theta-s", type=float, required=True, help="Saturated water content, m³/m³.")
@click.option("--alpha", type=float, required=True, help="van Genuchten alpha, 1/m.")
@click.option("--n", "n_vg", type=float, required=True, help="van Genuchten n (> 1).")
@click.option("--from-depth", type=LENGTH, default=0.0, show_default=True,
              help="Water-table depth before the fall.")
@click.option("--to-depth", type=LENGTH, required=True,
              help="Water-table depth after the fall (e.g. the design water-table depth).")
@json_option
def van_genuchten(theta_r, theta_s, alpha, n_vg, from_depth, to_depth, as_json):
    """Drainable porosity for a fall of the water table, from a retention curve.

    Assumes equilibrium above the water table (slow drainage) and one soil.

    Example:

        drainplan soil van-genuchten --theta-r 0.078 --theta-s 0.43 --alpha 3.6
        --n 1.56 --to-depth 0.5
    """
    from ..pedotransfer import van_genuchten_drainable_porosity

    mu = float(van_genuchten_drainable_porosity(theta_r=theta_r, theta_s=theta_s, alpha=alpha,
                                                n=n_vg, from_depth=from_depth,
                                                to_depth=to_depth))
    if as_json:
        click.echo(json.dumps({"drainable_porosity": mu, "from_depth_m": from_depth,
                               "to_depth_m": to_depth, "method": "van-genuchten-equilibrium"},
                              indent=2, sort_keys=True))
        return
    click.echo(f"Drainable porosity for a water-table fall from {from_depth:g} m to "
               f"{to_depth:g} m: {mu:.4f}\n"
               "  - hydrostatic equilibrium above the water table, van Genuchten (1980) curve")

