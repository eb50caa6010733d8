"""Season simulation job: a site and a weather record -> per-spacing results and a target spacing.

Runs the Boussinesq model (or the de Zeeuw-Hellinga reservoir) for many
spacings at once, the other model beside it, and summarises each spacing:
SEW30 per season, wet days, the water balance, drain discharge statistics and
how often the pipes would run full. :func:`widest_spacing_for_target` finds the
widest spacing whose SEW30 stays within a target. All values SI inside; the
summary keys carry their unit (``_mm``, ``_cm_d``, ``_m``).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .errors import InputError
from .spacing.reservoir import de_zeeuw_hellinga_simulation
from .spacing.simulation import boussinesq_simulation, sew30
from .weather import season_years

__all__ = ["MODELS", "TARGET_BASES", "SimulationSite", "SimulationRun", "simulate_site",
           "summarise", "widest_spacing_for_target", "ASSUMPTIONS"]

#: Model names (also the CLI choices).
MODELS = ("boussinesq", "reservoir")
#: How the SEW30 target is read: mean of the season-years, or the worst one.
TARGET_BASES = ("mean", "worst-year")

#: The model's assumptions, printed with every simulation.
ASSUMPTIONS = (
    "two-dimensional flow to parallel drains (Dupuit-Forchheimer), transmissivity "
    "K2 d + K1 h with Hooghoudt's equivalent depth d (so steady recharge gives Hooghoudt's "
    "head exactly)",
    "recharge = rain - actual ET the same day (no unsaturated-zone store, no snow or frost)",
    "ET is met from the day's rain first; the rest of PET comes from the water table, in full "
    "while it is in the root zone, falling linearly to zero at drain level",
    "water that reaches a water table at the surface runs off the same day (no ponding)",
    "the water table does not fall below drain level (no seepage, no upward flux from "
    "below the drains)",
    "the first year of the record is run once first to set the starting water table",
)


@dataclass(frozen=True)
class SimulationSite:
    """Site inputs shared by both models (SI)."""

    drain_depth: float
    barrier_depth: float
    drain_radius: float
    k_below: float
    k_above: float
    drainable_porosity: float | None = None
    porosity_profile: tuple | None = None
    root_zone_depth: float = 0.5
    equivalent_depth_method: str = "series"

    def check(self):
        if not (self.drain_depth > 0):
            raise InputError("drain depth must be greater than 0 m", param="drain_depth")
        if self.barrier_depth < self.drain_depth:
            raise InputError(f"barrier depth {self.barrier_depth:g} m must not be above the "
                             f"drain depth {self.drain_depth:g} m", param="barrier_depth")
        if self.drainable_porosity is None and self.porosity_profile is None:
            raise InputError("the simulation needs the drainable porosity",
                             param="drainable_porosity")
        if not (self.root_zone_depth > 0):
            raise InputError("root-zone depth must be greater than 0 m",
                             param="root_zone_depth")


@dataclass
class SimulationRun:
    """Results of :func:`simulate_site`."""

    weather: object
    site: SimulationSite
    model: str
    result: object                 # SimulationResult of the chosen model
    other: object                  # SimulationResult of the other model
    season: tuple | None
    coefficient: float | None
    rows: list = field(default_factory=list)


def _mean_porosity(site):
    if site.drainable_porosity is not None:
        return site.drainable_porosity
    # reservoir: thickness-weighted mean of the profile over the root zone to drain level
    from .spacing.simulation import porosity_storage

    return float(porosity_storage(site.drain_depth, profile=site.porosity_profile)
                 / site.drain_depth)


def _run_model(model, site, weather, spacings, substeps=1, cells=24):
    common = dict(spacing=spacings, rain=weather.rain, pet=weather.pet, k_below=site.k_below,
                  k_above=site.k_above, depth_to_barrier=site.barrier_depth - site.drain_depth,
                  drain_radius=site.drain_radius, drain_depth=site.drain_depth,
                  root_zone_depth=site.root_zone_depth, spin_up=min(365, weather.rain.size),
                  equivalent_depth_method=site.equivalent_depth_method)
    if model == "boussinesq":
        return boussinesq_simulation(drainable_porosity=site.drainable_porosity,
                                     porosity_profile=site.porosity_profile,
                                     substeps=substeps, cells=cells, **common)
    return de_zeeuw_hellinga_simulation(drainable_porosity=_mean_porosity(site), **common)


def simulate_site(site, weather, spacings, *, model="boussinesq", season=None,
                  coefficient=None, other_model=True):
    """Simulate a weather record for several spacings.

    Parameters
    ----------
    site : SimulationSite
    weather : drainplan.weather.Weather
    spacings : array_like
        Drain spacings [m].
    model : {"boussinesq", "reservoir"}
    season : tuple, optional
        From :func:`drainplan.weather.parse_season`; None: the whole record.
    coefficient : float, optional
        Pipe drainage coefficient [m/d]: days above it are counted.
    other_model : bool
        Also run the other model, reported beside.

    Returns
    -------
    SimulationRun
    """
    if model not in MODELS:
        raise InputError(f"model {model!r} is unknown; choose one of " + ", ".join(MODELS),
                         param="model")
    site.check()
    L = np.atleast_1d(np.asarray(spacings, float))
    if L.ndim != 1 or L.size == 0 or np.any(~np.isfinite(L)) or np.any(L <= 0):
        raise InputError("spacings must be lengths greater than 0 m", param="spacing")
    if coefficient is not None and not (coefficient > 0):
        raise InputError("drainage coefficient must be greater than 0 m/d", param="coefficient")
    res = _run_model(model, site, weather, L)
    other = None
    if other_model:
        other = _run_model("reservoir" if model == "boussinesq" else "boussinesq",
                           site, weather, L)
    run = SimulationRun(weather, site, model, res, other, season, coefficient)
    run.rows = summarise(run)
    return run


def _stats(res, weather, season, coefficient):
    mask, year = season_years(weather.dates, season)
    seasons = np.unique(year[mask])
    z = res.water_table_depth
    s_all = np.where(mask, np.maximum(0.0, 100.0 * (0.30 - z)), 0.0)   # SEW30 per day
    per_year = np.stack([s_all[:, year == y].sum(axis=1) for y in seasons], axis=1) \
        if seasons.size else np.zeros((z.shape[0], 0))
    wet = ((z < 0.30) & mask).sum(axis=1)
    q = res.drain / res.time_step                           # daily drain discharge [m/d]
    n_years = max(seasons.size, 1)
    out = {
        "sew30": sew30(np.where(mask, z, np.inf)),
        "sew30_per_year": per_year,
        "sew30_mean": per_year.mean(axis=1) if seasons.size else np.zeros(z.shape[0]),
        "sew30_worst": per_year.max(axis=1) if seasons.size else np.zeros(z.shape[0]),
        "worst_year": seasons[per_year.argmax(axis=1)] if seasons.size else None,
        "wet_days": wet,
        "wet_days_per_year": wet / n_years,
        "rain": np.full(z.shape[0], res.rain.sum()),
        "et": res.et.sum(axis=1), "drain": res.drain.sum(axis=1),
        "runoff": res.runoff.sum(axis=1),
        "storage_change": res.storage[:, -1] - res.storage[:, 0],
        "balance": res.balance_error(),
        "peak": q.max(axis=1), "p99": np.percentile(q, 99, axis=1),
        "seasons": seasons,
    }
    if coefficient is not None:
        full = (q > coefficient).sum(axis=1)
        out["full_days"] = full
        out["full_days_per_year"] = full / (weather.dates.size / 365.25)
    return out


def summarise(run):
    """Per-spacing summary rows (JSON-ready, units in the keys)."""
    w = run.weather
    st = _stats(run.result, w, run.season, run.coefficient)
    ot = _stats(run.other, w, run.season, run.coefficient) if run.other is not None else None
    rows = []
    for i, L in enumerate(run.result.spacing):
        row = {
            "spacing_m": float(L),
            "equivalent_depth_m": float(run.result.equivalent_depth[i]),
            "sew30_cm_d": float(st["sew30_mean"][i]),
            "sew30_worst_year_cm_d": float(st["sew30_worst"][i]),
            "sew30_worst_year": int(st["worst_year"][i]) if st["worst_year"] is not None
            else None,
            "sew30_total_cm_d": float(st["sew30"][i]),
            "wet_days": int(st["wet_days"][i]),
            "wet_days_per_year": float(st["wet_days_per_year"][i]),
            "rain_mm": float(st["rain"][i] * 1000), "et_mm": float(st["et"][i] * 1000),
            "drain_mm": float(st["drain"][i] * 1000),
            "runoff_mm": float(st["runoff"][i] * 1000),
            "storage_change_mm": float(st["storage_change"][i] * 1000),
            "balance_error_mm": float(st["balance"][i] * 1000),
            "peak_drain_mm_d": float(st["peak"][i] * 1000),
            "p99_drain_mm_d": float(st["p99"][i] * 1000),
        }
        if run.coefficient is not None:
            row["pipe_full_days"] = int(st["full_days"][i])
            row["pipe_full_days_per_year"] = float(st["full_days_per_year"][i])
        if ot is not None:
            row["other_model"] = {
                "model": run.other.model,
                "sew30_cm_d": float(ot["sew30_mean"][i]),
                "sew30_worst_year_cm_d": float(ot["sew30_worst"][i]),
                "drain_mm": float(ot["drain"][i] * 1000),
                "runoff_mm": float(ot["runoff"][i] * 1000),
                "peak_drain_mm_d": float(ot["peak"][i] * 1000),
                "p99_drain_mm_d": float(ot["p99"][i] * 1000),
            }
        rows.append(row)
    return rows


def _criterion(run, basis):
    st = _stats(run.result, run.weather, run.season, None)
    return st["sew30_mean"] if basis == "mean" else st["sew30_worst"]


def widest_spacing_for_target(site, weather, spacings, *, target, basis="mean",
                              model="boussinesq", season=None, refine=2, points=8,
                              tolerance=0.1, run=None):
    """Widest spacing whose SEW30 (mean or worst season) stays within ``target``.

    The spacings given are simulated at once; the bracket where SEW30 crosses
    the target is then refined ``refine`` times with ``points`` spacings each
    (SEW30 grows with the spacing).

    Parameters
    ----------
    target : float
        SEW30 limit [cm d] per season.
    basis : {"mean", "worst-year"}
    run : SimulationRun, optional
        An earlier run of the same site, weather, model and spacings (reused for
        the first pass).

    Returns
    -------
    dict
        ``spacing_m`` (None when even the narrowest spacing fails),
        ``sew30_cm_d`` at that spacing, ``bounded`` (False when the widest spacing
        given still meets the target: the answer is at least that), ``basis``,
        ``target_cm_d``, ``evaluated`` (spacings simulated in the search and their
        SEW30, [m] and [cm d]).
    """
    if basis not in TARGET_BASES:
        raise InputError(f"target basis {basis!r} is unknown; choose one of "
                         + ", ".join(TARGET_BASES), param="target_basis")
    if not (np.isfinite(target) and target >= 0):
        raise InputError("SEW30 target must be 0 cm d or more", param="target_sew30")
    L = np.unique(np.asarray(spacings, float))
    evaluated = []
    out = {"target_cm_d": float(target), "basis": basis, "model": model, "season": season,
           "evaluated": evaluated}

    def crit(Ls):
        run = SimulationRun(weather, site, model, _run_model(model, site, weather, Ls), None,
                            season, None)
        c = _criterion(run, basis)
        evaluated.extend(zip(np.atleast_1d(Ls).tolist(), np.asarray(c).tolist()))
        return c

    if run is not None and run.model == model and np.array_equal(run.result.spacing, L):
        c = _criterion(SimulationRun(weather, site, model, run.result, None, season, None),
                       basis)
    else:
        c = crit(L)
    ok = c <= target
    if not ok[0]:
        return {**out, "spacing_m": None, "sew30_cm_d": float(c[0]), "bounded": True,
                "note": f"even the narrowest spacing simulated ({L[0]:g} m) exceeds the target"}
    if ok[-1]:
        return {**out, "spacing_m": float(L[-1]), "sew30_cm_d": float(c[-1]), "bounded": False,
                "note": f"the widest spacing simulated ({L[-1]:g} m) meets the target; a "
                        "wider one may too"}
    i = int(np.flatnonzero(~ok)[0])           # first failing spacing
    lo, hi, c_lo = L[i - 1], L[i], c[i - 1]
    for _ in range(refine):
        if hi - lo <= tolerance:
            break
        grid = np.linspace(lo, hi, points + 2)[1:-1]
        cg = crit(grid)
        good = cg <= target
        if good.all():
            lo, c_lo = grid[-1], cg[-1]
        elif not good[0]:
            hi = grid[0]
        else:
            j = int(np.flatnonzero(~good)[0])
            lo, hi, c_lo = grid[j - 1], grid[j], cg[j - 1]
    return {**out, "spacing_m": float(lo), "sew30_cm_d": float(c_lo), "bounded": True,
            "next_failing_spacing_m": float(hi), "note": None}


def wettest_season(weather, season):
    """The season-year with the most rain: (year, boolean day mask)."""
    mask, year = season_years(weather.dates, season)
    years = np.unique(year[mask])
    totals = np.array([weather.rain[mask & (year == y)].sum() for y in years])
    y = int(years[int(np.argmax(totals))])
    return y, mask & (year == y)


def daily_csv(run):
    """The daily series as CSV text: date, spacing_m, water_table_depth_m, drain_mm,
    runoff_mm, et_mm (one block of rows per spacing)."""
    r = run.result
    dates = run.weather.dates.astype(str)
    out = ["date,spacing_m,water_table_depth_m,drain_mm,runoff_mm,et_mm"]
    for i, L in enumerate(r.spacing):
        z, dr, ro, et = (r.water_table_depth[i], r.drain[i] * 1000, r.runoff[i] * 1000,
                         r.et[i] * 1000)
        out.extend(f"{d},{L:g},{a:.4f},{b:.3f},{c:.3f},{e:.3f}"
                   for d, a, b, c, e in zip(dates, z, dr, ro, et))
    return "\n".join(out) + "\n"


def design_simulation(site, weather, *, spacing, analytic_spacing=None, coefficient=None,
                      season=None, target=None, basis="mean", model="boussinesq",
                      season_text="all"):
    """The season simulation for a design: a spacing grid around the design spacing,
    a narrower and a wider spacing, the SEW30 target, and the method agreement.

    Parameters
    ----------
    site : SimulationSite
    weather : drainplan.weather.Weather
    spacing : float
        The design spacing [m] (rounded).
    analytic_spacing : float, optional
        The analytic (steady or falling) spacing before rounding [m].
    coefficient : float, optional
        Pipe drainage coefficient [m/d].
    season : tuple, optional
    target : float, optional
        SEW30 limit per season [cm d].
    basis : {"mean", "worst-year"}
    model : {"boussinesq", "reservoir"}

    Returns
    -------
    summary : dict
        JSON-ready (units in the keys).
    figures : dict
        Arrays for the sheet's figures.
    """
    L = float(spacing)
    narrow, wide = round(L * 2.0 / 3.0, 1), round(L * 1.5, 1)
    # one call covers 0.4 L to 5 L (a time step costs about the same for 3 or 30 spacings)
    grid = np.unique(np.round(np.r_[np.linspace(0.4, 2.6, 12) * L, np.linspace(3.0, 5.0, 5) * L,
                                    narrow, L, wide], 2))
    run = simulate_site(site, weather, grid, model=model, season=season,
                        coefficient=coefficient)
    key = [int(np.argmin(np.abs(grid - v))) for v in (narrow, L, wide)]
    tgt = None
    if target is not None:
        tgt = widest_spacing_for_target(site, weather, grid, target=target, basis=basis,
                                        model=model, season=season, run=run, refine=1,
                                        points=16)
    year, mask = wettest_season(weather, season)
    r = run.result
    sew_key = "sew30_cm_d" if basis == "mean" else "sew30_worst_year_cm_d"
    rows = {name: run.rows[i] for name, i in zip(("narrower", "design", "wider"), key)}
    agreement = _agreement(analytic_spacing, L, tgt, rows["design"], sew_key, basis)
    # the curve shown: up to 2.6 L, or to just past the target spacing
    reach = max(2.6 * L, 1.15 * ((tgt or {}).get("next_failing_spacing_m") or 0.0)) + 1e-9
    (tgt or {}).pop("evaluated", None)
    shown = [i for i in range(grid.size) if grid[i] <= reach]
    summary = {
        "model": model,
        "other_model": run.other.model if run.other is not None else None,
        "weather": {"file": weather.name, "first_day": str(weather.dates[0]),
                    "last_day": str(weather.dates[-1]), "days": int(weather.dates.size),
                    "pet_source": weather.pet_source, "latitude_deg": weather.latitude},
        "season": season_text,
        "target_basis": basis,
        "wettest_season": year,
        "porosity": ("layered" if site.porosity_profile is not None
                     else site.drainable_porosity),
        "root_zone_depth_m": site.root_zone_depth,
        "drainage_coefficient_m_per_d": coefficient,
        "key_spacings": rows,
        "curve": [{"spacing_m": row["spacing_m"], "sew30_cm_d": row["sew30_cm_d"],
                   "sew30_worst_year_cm_d": row["sew30_worst_year_cm_d"],
                   "other_sew30_cm_d": row.get("other_model", {}).get("sew30_cm_d")}
                  for row in (run.rows[i] for i in shown)],
        "target": tgt,
        "agreement": agreement,
        "assumptions": list(ASSUMPTIONS),
    }
    figures = {
        "dates": weather.dates[mask], "year": year,
        "depths": {float(grid[i]): r.water_table_depth[i, mask] for i in key},
        "spacings": grid[shown],
        "sew30": [run.rows[i][sew_key] for i in shown],
        "other": (("de Zeeuw-Hellinga" if run.other.model == "reservoir" else "Boussinesq"),
                  [run.rows[i]["other_model"][sew_key] for i in shown])
        if run.other is not None else None,
        "target": target, "basis": basis,
        "label": "Boussinesq" if model == "boussinesq" else "de Zeeuw-Hellinga",
        "marks": {"design spacing": L,
                  "widest within target": tgt["spacing_m"] if tgt else None},
        "discharges": {float(grid[i]): r.drain[i] / r.time_step for i in key},
        "coefficient": coefficient, "drain_depth": site.drain_depth,
    }
    return summary, figures


def _agreement(analytic, design, tgt, row, sew_key, basis):
    """Analytic against simulated spacing, with a sentence on why they differ."""
    which = "mean season" if basis == "mean" else "worst season"
    out = {"analytic_spacing_m": analytic, "design_spacing_m": design,
           "design_sew30_cm_d": row[sew_key], "simulated_spacing_m": None, "ratio": None,
           "reason": None}
    if tgt is None or tgt.get("spacing_m") is None:
        out["sentence"] = (
            f"At the design spacing the simulated SEW30 is {row[sew_key]:.0f} cm·d in the "
            f"{which}" + ("; no SEW30 target was given, so no simulated spacing is derived."
                          if tgt is None else f"; {tgt['note']}."))
        return out
    Ls = tgt["spacing_m"]
    out["simulated_spacing_m"] = Ls
    ref = analytic if analytic else design
    ratio = Ls / ref
    out["ratio"] = ratio
    bound = "" if tgt["bounded"] else " at least"
    if abs(ratio - 1.0) <= 0.10:
        why = ("the two agree within 10 %: the analytic criterion's design event represents "
               "this record's wet spells about as well as the SEW30 target does.")
    elif ratio > 1.0:
        why = ("the simulation allows wider drains. The analytic criterion is one design "
               "event held to a fixed depth (a steady recharge that never stops, or a "
               "drawdown from the surface in a set time), while on this record wet spells are "
               "short, rain is partly used by ET, and the drainable pore space stores part of "
               "each spell, so the water table seldom stays within 30 cm for long. SEW30 "
               "also tolerates brief high water that the analytic criterion does not.")
    else:
        why = ("the simulation needs closer drains: on this record wet spells are longer or "
               "wetter than the analytic design event represents, or the SEW30 target is "
               "stricter than the analytic criterion.")
    out["reason"] = why
    out["sentence"] = (f"The widest spacing whose SEW30 ({which}) stays within "
                       f"{tgt['target_cm_d']:g} cm·d is{bound} {Ls:.1f} m, against {ref:.1f} m "
                       f"from the analytic method ({ratio:.2f}×); " + why)
    return out
