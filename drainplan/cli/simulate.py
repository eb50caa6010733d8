"""``drainplan simulate``: the water table between drains over a daily weather record."""

from __future__ import annotations

import json

import click
import numpy as np

from ..errors import InputError
from ..units import display_unit, parse_quantity, show, text_in_units, to_display
from .options import FRACTION, LENGTH, RATE, json_option, units_option
from .spacing import DrainRadius


def _parse_spacings(text):
    """One spacing, a comma list ('10,25,50') or FROM:TO:STEPS (linear)."""
    s = str(text).strip()
    hint = "'--spacing'"
    try:
        if ":" in s:
            parts = s.split(":")
            if len(parts) != 3:
                raise ValueError
            lo = parse_quantity(parts[0], "length", name="--spacing")
            hi = parse_quantity(parts[1], "length", name="--spacing")
            steps = int(parts[2])
            if not (0 < lo < hi and 2 <= steps <= 200):
                raise click.BadParameter("FROM:TO:STEPS needs 0 < FROM < TO and 2 to 200 "
                                         "steps", param_hint=hint)
            return np.linspace(lo, hi, steps)
        values = [parse_quantity(v, "length", name="--spacing") for v in s.split(",")]
    except (InputError, ValueError):
        raise click.BadParameter("expected a spacing ('30'), a list ('10,25,50') or "
                                 "FROM:TO:STEPS ('10:60:11'), lengths in m unless a unit "
                                 "is given", param_hint=hint) from None
    L = np.unique(np.asarray(values, float))
    if L.size > 200 or np.any(L <= 0):
        raise click.BadParameter("spacings must be greater than 0 m (at most 200 of them)",
                                 param_hint=hint)
    return L


@click.command(short_help="Simulate the water table between drains over a weather record.")
@click.option("--weather", "weather_path", type=click.Path(dir_okay=False), required=True,
              help="Daily weather CSV: date, rain_mm|rain_in, pet_mm|pet_in (or tmin/tmax "
                   "for Hargreaves-Samani PET).")
@click.option("--spacing", "spacing_text", required=True,
              help="Drain spacing(s): '30', '10,25,50' or FROM:TO:STEPS, e.g. '10:60:11'.")
@click.option("--k", type=RATE, help="Saturated hydraulic conductivity, one layer.")
@click.option("--k-above", type=RATE, help="Conductivity above drain level.")
@click.option("--k-below", type=RATE, help="Conductivity below drain level.")
@click.option("--drain-depth", type=LENGTH, required=True, help="Depth of the drains.")
@click.option("--barrier-depth", type=LENGTH, required=True,
              help="Depth of the impermeable barrier.")
@click.option("--drain-radius", type=DrainRadius(), required=True,
              help="Effective drain radius, or a pipe type (as for 'drainplan spacing').")
@click.option("--drainable-porosity", type=FRACTION, required=True,
              help="Drainable porosity, e.g. 0.06.")
@click.option("--equivalent-depth", "equivalent_depth_method",
              type=click.Choice(["series", "moody"]), default="series", show_default=True,
              help="Equivalent depth: exact series or Moody's approximation.")
@click.option("--root-zone-depth", type=LENGTH, default="0.5", show_default=True,
              help="ET is not reduced while the water table is above this depth.")
@click.option("--latitude", type=float,
              help="Latitude in degrees (Hargreaves-Samani PET from temperatures).")
@click.option("--season", default="all", show_default=True,
              help="Growing season MM-DD:MM-DD (e.g. 03-15:06-30) or 'all'.")
@click.option("--coefficient", type=RATE,
              help="Pipe drainage coefficient: count the days the drains carry more.")
@click.option("--model", type=click.Choice(["boussinesq", "reservoir"]),
              default="boussinesq", show_default=True,
              help="Model (the other one is reported beside).")
@click.option("--target-sew30", type=float,
              help="SEW30 limit per season in cm·d (its unit, also with --units us): "
                   "report the widest spacing within it.")
@click.option("--target-basis", type=click.Choice(["mean", "worst-year"]), default="mean",
              show_default=True, help="Read the target against the mean season or the "
                                      "worst one.")
@click.option("--daily", "daily_path", type=click.Path(dir_okay=False),
              help="Write the daily series (CSV) to this file.")
@click.option("--plot", "plot_path", type=click.Path(dir_okay=False),
              help="Write the water table, SEW30 and discharge figures (PNG).")
@click.option("--overwrite", is_flag=True, help="Replace existing --daily/--plot files.")
@units_option
@json_option
def simulate(weather_path, spacing_text, k, k_above, k_below, drain_depth, barrier_depth,
             drain_radius, drainable_porosity, equivalent_depth_method, root_zone_depth,
             latitude, season, coefficient, model, target_sew30, target_basis, daily_path,
             plot_path, overwrite, units, as_json):
    """Simulate the water table midway between drains over a daily weather record.

    Non-linear Boussinesq flow between the drains with Hooghoudt's equivalent
    depth (or the de Zeeuw-Hellinga reservoir with --model reservoir), for one
    or many spacings at once. Reports per spacing SEW30 (cm·d per season),
    wet days, the water balance, peak and 99th-percentile drain discharge and,
    with --coefficient, how often the pipes would run full.

    Example:

        drainplan simulate --weather demo_fields/weather.csv --spacing 10:40:7
        --k 0.5 --drain-depth 1.0 --barrier-depth 3 --drain-radius 0.05
        --drainable-porosity 0.06 --season 03-01:06-30 --target-sew30 100
    """
    from pathlib import Path

    from ..simulation_plan import SimulationSite, simulate_site, widest_spacing_for_target
    from ..weather import parse_season, read_weather

    spacings = _parse_spacings(spacing_text)
    if k is not None and (k_above is not None or k_below is not None):
        raise InputError("give either --k (one layer) or --k-above and --k-below, not both",
                         param="k")
    if k is None and (k_above is None or k_below is None):
        raise InputError("hydraulic conductivity is required: give --k, or --k-above and "
                         "--k-below", param="k")
    kb = k if k is not None else k_below
    ka = k if k is not None else k_above
    if not (0 < drainable_porosity < 1):
        raise InputError("drainable porosity must lie between 0 and 1",
                         param="drainable_porosity")
    if target_sew30 is not None and not (np.isfinite(target_sew30) and target_sew30 >= 0):
        raise InputError("SEW30 target must be 0 cm·d or more", param="target_sew30")
    season_t = parse_season(season)
    site = SimulationSite(drain_depth=drain_depth, barrier_depth=barrier_depth,
                          drain_radius=drain_radius, k_below=kb, k_above=ka,
                          drainable_porosity=drainable_porosity,
                          root_zone_depth=root_zone_depth,
                          equivalent_depth_method=equivalent_depth_method)
    site.check()
    for path in (daily_path, plot_path):
        if path and Path(path).exists() and not overwrite:
            raise InputError(f"{path} exists; use --overwrite to replace it", param="output")
        if path and not Path(path).resolve().parent.exists():
            raise InputError(f"folder {Path(path).resolve().parent} does not exist",
                             param="output")
    weather = read_weather(weather_path, latitude=latitude)
    if season_t is not None:
        from ..weather import season_years

        if not season_years(weather.dates, season_t)[0].any():
            raise InputError(f"no day of the record falls in the season {season}",
                             param="season")
    run = simulate_site(site, weather, spacings, model=model, season=season_t,
                        coefficient=coefficient)
    target = None
    if target_sew30 is not None:
        target = widest_spacing_for_target(site, weather, spacings, target=target_sew30,
                                           basis=target_basis, model=model, season=season_t,
                                           run=run)
    if daily_path:
        from ..gisio import write_atomic
        from ..simulation_plan import daily_csv

        text = daily_csv(run)
        write_atomic(daily_path, lambda tmp: Path(tmp).write_text(text, encoding="utf-8"),
                     overwrite=overwrite)
    if plot_path:
        _write_plot(plot_path, run, target, units, overwrite)
    if as_json:
        click.echo(json.dumps(_as_json(run, target, season), indent=2, sort_keys=True))
    else:
        click.echo(_as_text(run, target, season, units))


def _write_plot(path, run, target, units, overwrite):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from ..gisio import write_atomic
    from ..plots import save_figure, season_simulation_panels
    from ..simulation_plan import wettest_season

    r = run.result
    year, mask = wettest_season(run.weather, run.season)
    idx = sorted({0, r.spacing.size // 2, r.spacing.size - 1})
    basis = target["basis"] if target else "mean"
    key = "sew30_cm_d" if basis == "mean" else "sew30_worst_year_cm_d"
    other = None
    if run.other is not None:
        other = ("de Zeeuw-Hellinga" if run.other.model == "reservoir" else "Boussinesq",
                 [row["other_model"][key] for row in run.rows])
    data = {"dates": run.weather.dates[mask], "year": year,
            "depths": {float(r.spacing[i]): r.water_table_depth[i, mask] for i in idx},
            "spacings": r.spacing, "sew30": [row[key] for row in run.rows],
            "other": other, "target": target["target_cm_d"] if target else None,
            "basis": basis,
            "label": "Boussinesq" if run.model == "boussinesq" else "de Zeeuw-Hellinga",
            "marks": {"widest within target": target["spacing_m"]}
            if target and target.get("spacing_m") else None,
            "discharges": {float(r.spacing[i]): r.drain[i] / r.time_step for i in idx},
            "coefficient": run.coefficient, "drain_depth": run.site.drain_depth}
    fig = plt.figure(figsize=(8, 6.4))
    season_simulation_panels(data, fig=fig, units=units)
    write_atomic(path, lambda tmp: save_figure(fig, tmp), overwrite=overwrite)
    plt.close(fig)


def _as_json(run, target, season):
    w = run.weather
    s = run.site
    return {
        "model": run.model,
        "other_model": run.other.model if run.other is not None else None,
        "weather": {"file": w.name, "first_day": str(w.dates[0]), "last_day": str(w.dates[-1]),
                    "days": int(w.dates.size), "pet_source": w.pet_source,
                    "latitude_deg": w.latitude},
        "season": season,
        "site": {"drain_depth_m": s.drain_depth, "barrier_depth_m": s.barrier_depth,
                 "drain_radius_m": s.drain_radius, "k_below_m_per_d": s.k_below,
                 "k_above_m_per_d": s.k_above, "drainable_porosity": s.drainable_porosity,
                 "root_zone_depth_m": s.root_zone_depth,
                 "equivalent_depth": s.equivalent_depth_method},
        "drainage_coefficient_m_per_d": run.coefficient,
        "results": run.rows,
        "target": target,
        "assumptions": list(_assumptions()),
    }


def _assumptions():
    from ..simulation_plan import ASSUMPTIONS

    return ASSUMPTIONS


def _as_text(run, target, season, units):
    w = run.weather
    yrs = w.dates.size / 365.25
    su = display_unit("spacing", units)
    qu = display_unit("recharge", units)
    au = qu.replace("/d", "/yr")

    nd_amount, nd_rate = (1, 2) if units == "us" else (0, 1)

    def amount(v_mm):
        return f"{float(to_display(v_mm / 1000.0 / yrs, 'recharge', units)):.{nd_amount}f}"

    def rate(v_mm_d):
        return f"{float(to_display(v_mm_d / 1000.0, 'recharge', units)):.{nd_rate}f}"

    k_sew, sew_u = (1 / 2.54, "in·d") if units == "us" else (1.0, "cm·d")

    def sew(v):
        return f"{v * k_sew:.0f}"

    model = {"boussinesq": "Boussinesq (non-linear, equivalent depth)",
             "reservoir": "de Zeeuw-Hellinga linear reservoir"}
    lines = [f"Season simulation: {model[run.model]}",
             f"  weather {w.name}: {w.dates[0]} to {w.dates[-1]} ({w.dates.size} days, "
             f"PET from {w.pet_source})",
             f"  season: {season}; SEW30 in {sew_u} per season (mean and worst season); amounts "
             f"per year"]
    head = (f"  {'spacing':>8} {'SEW30':>7} {'worst':>7} {'wet d/yr':>8} {'drain':>7} "
            f"{'runoff':>7} {'ET':>7} {'peak':>6} {'p99':>6}")
    if run.coefficient is not None:
        head += f" {'full d/yr':>9}"
    if run.other is not None:
        head += f" {'SEW30 ' + ('res.' if run.other.model == 'reservoir' else 'Bq.'):>10}"
    lines += ["", f"  {'(' + su + ')':>8} {sew_u:>7} {sew_u:>7} {'':>8} {'(' + au + ')':>7} "
              f"{'':>7} {'':>7} {'(' + qu + ')':>6} {'':>6}", head]
    lines[-2], lines[-1] = lines[-1], lines[-2]
    for row in run.rows:
        line = (f"  {float(to_display(row['spacing_m'], 'spacing', units)):8.1f} "
                f"{sew(row['sew30_cm_d']):>7} {sew(row['sew30_worst_year_cm_d']):>7} "
                f"{row['wet_days_per_year']:8.1f} {amount(row['drain_mm']):>7} "
                f"{amount(row['runoff_mm']):>7} {amount(row['et_mm']):>7} "
                f"{rate(row['peak_drain_mm_d']):>6} {rate(row['p99_drain_mm_d']):>6}")
        if run.coefficient is not None:
            line += f" {row['pipe_full_days_per_year']:9.1f}"
        if run.other is not None:
            line += f" {sew(row['other_model']['sew30_cm_d']):>10}"
        lines.append(line)
    lines.append(f"  rain {amount(run.rows[0]['rain_mm'])} {au}; largest water-balance error "
                 f"{max(abs(r['balance_error_mm']) for r in run.rows):.1e} mm")
    if run.coefficient is not None:
        lines.append(f"  pipe drainage coefficient {show(run.coefficient, 'recharge', units, 1)}"
                     ": 'full d/yr' counts the days the drains carry more")
    if target is not None:
        basis = "mean season" if target["basis"] == "mean" else "worst season"
        if target["spacing_m"] is None:
            lines.append(f"Target SEW30 <= {sew(target['target_cm_d'])} {sew_u} ({basis}): "
                         f"{text_in_units(target['note'], units)}")
        else:
            lines.append(f"Target SEW30 <= {sew(target['target_cm_d'])} {sew_u} ({basis}): "
                         f"widest spacing {show(target['spacing_m'], 'spacing', units, 1)} "
                         f"(SEW30 {sew(target['sew30_cm_d'])} {sew_u})"
                         + (f"; {text_in_units(target['note'], units)}"
                            if target.get("note") else ""))
    lines.append("Assumptions")
    lines += [f"  - {a}" for a in _assumptions()]
    lines.append("  - A design aid: check against local codes and have it reviewed by a "
                 "qualified professional.")
    return "\n".join(lines)
