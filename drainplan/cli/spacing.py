"""``drainplan spacing``: drain spacing for one site by one published method."""

from __future__ import annotations

import json
import warnings

import click
import numpy as np

from ..errors import ConvergenceWarning, DrainplanError, InputError
from ..spacing import METHODS, drain_spacing
from ..spacing.drain_radius import drain_radius_table, effective_radius
from ..units import display_unit, parse_quantity, show, to_display
from .options import LENGTH, checked, json_option, units_option
from .uncertainty_options import (run_uncertainty, uncertainty_json, uncertainty_options,
                                  uncertainty_text)


class DrainRadius(click.ParamType):
    """A length ('5 cm') or a pipe type from the effective-radius table."""

    name = "RADIUS|TYPE"

    def convert(self, value, param, ctx):
        if isinstance(value, float):
            return value
        names = [r["name"] for r in drain_radius_table()]
        if str(value).strip() in names:
            return effective_radius(str(value).strip())
        try:
            return parse_quantity(value, "length", name="--drain-radius")
        except InputError:
            raise click.BadParameter(
                f"expected a length such as '5 cm' or a pipe type ({', '.join(names)}), "
                f"got {value!r}", ctx=ctx, param=param) from None


def _parse_sweep(text):
    parts = str(text).split(":")
    if len(parts) != 3:
        raise click.BadParameter("expected FROM:TO:STEPS, e.g. '0.1:2:8' or '0.1 m/d:2 m/d:8'",
                                 param_hint="'--sweep-k'")
    try:
        lo = parse_quantity(parts[0], "rate", name="--sweep-k")
        hi = parse_quantity(parts[1], "rate", name="--sweep-k")
        steps = int(parts[2])
    except (InputError, ValueError):
        raise click.BadParameter("expected FROM:TO:STEPS with conductivities and a whole "
                                 "number of steps, e.g. '0.1:2:8'",
                                 param_hint="'--sweep-k'") from None
    if not (lo > 0 and hi > lo and 2 <= steps <= 200):
        raise click.BadParameter("needs 0 < FROM < TO and 2 to 200 steps",
                                 param_hint="'--sweep-k'")
    return np.geomspace(lo, hi, steps)


@click.command(short_help="Drain spacing by Hooghoudt, Ernst, Kirkham or Glover-Dumm.")
@click.option("--method", type=click.Choice(METHODS), default="hooghoudt", show_default=True,
              help="Design method.")
@click.option("--k", type=checked("rate", "k"),
              help="Saturated hydraulic conductivity, one layer.")
@click.option("--k-above", type=checked("rate", "k_above"),
              help="Conductivity above the layer interface "
              "(at drain level unless --interface-depth).")
@click.option("--k-below", type=checked("rate", "k_below"),
              help="Conductivity below the layer interface.")
@click.option("--interface-depth", type=checked("length", "interface_depth"),
              help="Depth of the layer interface (ernst; default: drain depth).")
@click.option("--k-vertical", type=checked("rate", "k_vertical"),
              help="Vertical conductivity of the top layer (ernst).")
@click.option("--geometry-factor", type=float,
              help="Ernst's radial geometry factor a, instead of the table.")
@click.option("--drain-depth", type=checked("length", "drain_depth"),
              help="Depth of the drains (required).")
@click.option("--barrier-depth", type=checked("length", "barrier_depth"),
              help="Depth of the impermeable barrier (required).")
@click.option("--drain-radius", type=DrainRadius(),
              help="Effective drain radius, or a pipe type (see --list-radii) (required).")
@click.option("--list-radii", is_flag=True,
              help="List the pipe types with their effective radius and source, and exit.")
@click.option("--recharge", type=checked("rate", "recharge"),
              help="Steady design recharge (drainage coefficient), e.g. '10 mm/d'.")
@click.option("--water-table-depth", type=checked("length", "water_table_depth"),
              help="Required water-table depth midway between drains (steady methods).")
@click.option("--initial-depth", type=checked("length", "initial_depth"),
              help="Midway water-table depth at the start of the drawdown (glover-dumm).")
@click.option("--final-depth", type=checked("length", "final_depth"),
              help="Required midway water-table depth at the end (glover-dumm).")
@click.option("--days", type=checked("time", "days"),
              help="Time allowed for the drawdown (glover-dumm).")
@click.option("--drainable-porosity", type=checked("fraction", "drainable_porosity"),
              help="Drainable porosity, e.g. 0.06.")
@click.option("--initial-shape", type=click.Choice(["parabolic", "flat"]), default="parabolic",
              show_default=True, help="Initial water-table shape (glover-dumm).")
@click.option("--flow-depth", type=click.Choice(["equivalent", "equivalent-plus-half-head"]),
              default="equivalent", show_default=True,
              help="Flow depth for glover-dumm: d (conservative) or d + h0/2.")
@click.option("--equivalent-depth", "equivalent_depth_method",
              type=click.Choice(["series", "moody"]), default="series", show_default=True,
              help="Equivalent depth: exact series or Moody's approximation.")
@click.option("--sweep-k", help="Also print spacing for K from FROM to TO in STEPS "
              "(geometric), e.g. '0.1:2:8'.")
@click.option("--check-spacing", type=LENGTH,
              help="Check a proposed spacing (e.g. a contractor's) against the criterion: "
                   "midway water-table depth it gives and whether it meets the design.")
@click.option("--plot", "plot_path", type=click.Path(dir_okay=False),
              help="With --sweep-k: also write the spacing-against-K curve as a PNG.")
@click.option("--overwrite", is_flag=True, help="Replace an existing --plot file.")
@units_option
@json_option
@uncertainty_options
def spacing(method, k, k_above, k_below, interface_depth, k_vertical, geometry_factor,
            drain_depth, barrier_depth, drain_radius, list_radii, recharge, water_table_depth,
            initial_depth, final_depth, days, drainable_porosity, initial_shape, flow_depth,
            equivalent_depth_method, sweep_k, check_spacing, plot_path, overwrite, units,
            as_json, uncertainty):
    """Drain spacing for one site.

    Steady methods (hooghoudt, ernst, kirkham) need --recharge and
    --water-table-depth; the falling water table (glover-dumm) needs
    --initial-depth, --final-depth, --days and --drainable-porosity.

    Example:

        drainplan spacing --method hooghoudt --k 0.5 --drain-depth 1.2
        --barrier-depth 4 --drain-radius "5 cm" --recharge "10 mm/d"
        --water-table-depth 0.6

    With --k-cv (K lognormal, the given K its median) it also gives the
    spacing met with --confidence and the probability curve.

    Pipe types for --drain-radius: drainplan spacing --list-radii
    """
    if list_radii:
        click.echo(_radii_listing(units, as_json))
        return
    _require_site(drain_depth=drain_depth, barrier_depth=barrier_depth,
                  drain_radius=drain_radius)
    inputs = dict(method=method, drain_depth=drain_depth, barrier_depth=barrier_depth,
                  drain_radius=drain_radius, k=k, k_above=k_above, k_below=k_below,
                  interface_depth=interface_depth, k_vertical=k_vertical,
                  recharge=recharge, water_table_depth=water_table_depth,
                  initial_depth=initial_depth, final_depth=final_depth, days=days,
                  drainable_porosity=drainable_porosity, shape=initial_shape,
                  flow_depth=flow_depth, equivalent_depth_method=equivalent_depth_method,
                  geometry_factor=geometry_factor)
    _check_method_options(inputs)
    sweep = _parse_sweep(sweep_k) if sweep_k is not None else None
    if plot_path and sweep is None:
        raise InputError("--plot draws the --sweep-k curve; give --sweep-k too", param="plot")
    result = _solve(inputs)
    if not np.isfinite(result.spacing):
        raise DrainplanError("no drain spacing satisfies these inputs (the required spacing "
                             "would be narrower than the drains themselves); check K, the "
                             "recharge and the depths")
    sweep_rows = _sweep(inputs, sweep) if sweep is not None else None
    check = None
    if check_spacing is not None:
        from ..spacing import check_spacing as run_check

        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            check = run_check(spacing=check_spacing, **inputs)
    # uncertainty (--k-cv, --confidence, ranges): sampled through the vectorised core
    unc = run_uncertainty(inputs, uncertainty, check_spacing)
    if unc is not None and check is not None:
        check["probability_meets"] = unc.probability_proposed
    if plot_path:
        _write_plot(plot_path, sweep_rows, units, method, overwrite)
    if as_json:
        out = _as_json(inputs, result, sweep_rows)
        if check is not None:
            out["check"] = check
        if unc is not None:
            out.update(uncertainty_json(unc, uncertainty["k_cv"]))
        click.echo(json.dumps(out, indent=2))
    else:
        text = _as_text(inputs, result, sweep_rows, units, check)
        if unc is not None:
            text += "\n" + "\n".join(uncertainty_text(unc, units))
        click.echo(text)


def _require_site(**values):
    """The options every spacing needs (optional only with --list-radii)."""
    ctx = click.get_current_context()
    for name, value in values.items():
        if value is None:
            param = next(p for p in ctx.command.params if p.name == name)
            raise click.MissingParameter(ctx=ctx, param=param)


def _radii_listing(units, as_json):
    """The effective-radius table: pipe type, radius, description, source, confidence."""
    rows = drain_radius_table()
    if as_json:
        return json.dumps({"drain_radii": [
            {"name": r["name"], "radius_m": r["radius_m"], "description": r["description"],
             "source": r["source"], "confidence": r["confidence"]} for r in rows]}, indent=2)
    digits = 2 if units == "us" else 1
    ru = display_unit("radius", units)
    width = max(len(r["name"]) for r in rows)
    lines = ["Effective drain radius by pipe type (give the type or a length to "
             "--drain-radius)", f"  {'type':<{width}}  {'radius (' + ru + ')':>12}  description"]
    for r in rows:
        lines.append(f"  {r['name']:<{width}}  "
                     f"{float(to_display(r['radius_m'], 'radius', units)):>12.{digits}f}  "
                     f"{r['description']}")
        lines.append(f"  {'':<{width}}  {'':>12}  source ({r['confidence']}): {r['source']}")
    return "\n".join(lines)


def _write_plot(path, rows, units, method, overwrite):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from ..gisio import write_atomic
    from ..plots import save_figure, spacing_against_k

    fig, ax = plt.subplots(figsize=(6, 4))
    spacing_against_k([(r[0], r[1]) for r in rows], ax=ax, units=units,
                      title=f"{_TITLES[method]}: spacing against K",
                      k_label=_sweep_label(rows, units))
    write_atomic(path, lambda tmp: save_figure(fig, tmp), overwrite=overwrite)
    plt.close(fig)


def _check_method_options(inputs):
    steady = inputs["method"] != "glover-dumm"
    wrong = (("initial_depth", "final_depth", "days") if steady
             else ("recharge", "water_table_depth"))
    for name in wrong:
        if inputs[name] is not None:
            raise InputError(f"does not apply to the {inputs['method']} method", param=name)


def _solve(inputs):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        return drain_spacing(**inputs)


def _sweep(inputs, ks):
    varied = dict(inputs)
    if inputs["k"] is not None:
        varied["k"] = ks
    else:
        # two layers: scale both, keeping their ratio; the sweep gives K below
        ratio = inputs["k_above"] / inputs["k_below"]
        varied["k_below"] = ks
        varied["k_above"] = ks * ratio
    res = _solve(varied)
    ratio = None if inputs["k"] is not None else inputs["k_above"] / inputs["k_below"]
    return [(float(kv), float(L), ratio)
            for kv, L in zip(ks, np.broadcast_to(res.spacing, ks.shape))]


def _sweep_label(rows, units):
    """What the swept K is: one K, or K below with K above scaled with it."""
    ku = display_unit("conductivity", units)
    ratio = rows[0][2] if rows else None
    if ratio is None:
        return f"hydraulic conductivity K ({ku})"
    return f"K below drains ({ku}); K above = {ratio:.3g} × K below, scaled together"


def _num(v):
    if v is None:
        return None
    v = float(v)
    return v if np.isfinite(v) else None


def _as_json(inputs, r, sweep_rows):
    out = {
        "method": r.method,
        "spacing_m": _num(r.spacing),
        "equivalent_depth_m": _num(r.equivalent_depth),
        "flow_depth_m": _num(r.flow_depth),
        "head_m": _num(r.head),
        "depth_to_barrier_m": _num(r.depth_to_barrier),
        "inputs": {_json_key(k): (v if isinstance(v, str) or v is None else float(v))
                   for k, v in inputs.items()},
        "details": {k: _num(v) for k, v in r.extra.items()},
        "notes": list(r.notes),
        "warnings": list(r.warnings),
    }
    if sweep_rows is not None:
        out["sweep"] = [
            {"k_m_per_d": kv, "spacing_m": _num(L)} if ratio is None else
            {"k_below_m_per_d": kv, "k_above_m_per_d": kv * ratio, "spacing_m": _num(L)}
            for kv, L, ratio in sweep_rows]
    return out


_SI_SUFFIX = {"drain_depth": "_m", "barrier_depth": "_m", "drain_radius": "_m", "k": "_m_per_d",
              "k_above": "_m_per_d", "k_below": "_m_per_d", "interface_depth": "_m",
              "k_vertical": "_m_per_d", "recharge": "_m_per_d", "water_table_depth": "_m",
              "initial_depth": "_m", "final_depth": "_m", "days": "_d"}


def _json_key(name):
    return name + _SI_SUFFIX.get(name, "")


_TITLES = {"hooghoudt": "Hooghoudt steady state", "ernst": "Ernst, layered soil",
           "kirkham": "Kirkham steady rain", "glover-dumm": "Glover-Dumm falling water table"}


def _as_text(inputs, r, sweep_rows, units, check=None):
    rows = [("method", _TITLES[r.method])]
    labels = [("drain_depth", "drain depth", "length", 2),
              ("barrier_depth", "barrier depth", "length", 2),
              ("interface_depth", "layer interface depth", "length", 2),
              ("drain_radius", "effective drain radius", "radius", 1),
              ("k", "hydraulic conductivity K", "conductivity", 3),
              ("k_above", "K above interface", "conductivity", 3),
              ("k_below", "K below interface", "conductivity", 3),
              ("k_vertical", "vertical K (top layer)", "conductivity", 3),
              ("recharge", "design recharge q", "recharge", 2),
              ("water_table_depth", "water-table depth midway", "length", 2),
              ("initial_depth", "initial water-table depth", "length", 2),
              ("final_depth", "final water-table depth", "length", 2),
              ("days", "time allowed", "time", 2)]
    for key, label, role, digits in labels:
        if inputs.get(key) is not None:
            rows.append((label, show(inputs[key], role, units, digits)))
    if inputs.get("drainable_porosity") is not None:
        rows.append(("drainable porosity", f"{inputs['drainable_porosity']:.3f}"))
    if inputs["method"] == "glover-dumm":
        rows.append(("initial shape", inputs["shape"]))
    lines = ["Inputs"] + [f"  {a:<30} {b}" for a, b in rows]
    res = [("drain spacing", show(r.spacing, "spacing", units, 1)),
           ("equivalent depth d", show(r.equivalent_depth, "length", units, 2))
           if r.equivalent_depth is not None else None,
           ("depth to barrier below drains", show(r.depth_to_barrier, "length", units, 2)),
           ("initial midway head above drains" if r.method == "glover-dumm"
            else "midway head above drains", show(r.head, "length", units, 2))]
    if r.flow_depth is not None:
        res.append(("flow depth used", show(r.flow_depth, "length", units, 2)))
    ex = r.extra
    if ex.get("drainage_intensity") is not None:
        res.append(("drainage intensity (wt at surface)",
                    show(ex["drainage_intensity"], "recharge", units, 1)))
    if ex.get("reaction_factor_per_d") is not None:
        res.append(("reaction factor alpha", f"{float(ex['reaction_factor_per_d']):.3f} 1/d"))
        res.append(("alpha t", f"{float(ex['alpha_t']):.2f}"))
        res.append(("series midway height at end", show(ex["final_head_series_m"], "length",
                                                        units, 3)))
    if ex.get("geometry_factor") is not None:
        res.append(("geometry factor a", f"{float(ex['geometry_factor']):.2f}"))
        for part in ("vertical", "horizontal", "radial"):
            res.append((f"head loss, {part}", show(ex[f"head_loss_{part}_m"], "length",
                                                   units, 3)))
    lines += ["Result"] + [f"  {a:<34} {b}" for a, b in (x for x in res if x)]
    if sweep_rows is not None:
        ku, su = display_unit("conductivity", units), display_unit("spacing", units)
        ratio = sweep_rows[0][2] if sweep_rows else None
        if ratio is None:
            lines += ["Spacing against K",
                      f"  {'K (' + ku + ')':>14} {'spacing (' + su + ')':>16}"]
        else:
            lines += [f"Spacing against K (K above and below scaled together, K above = "
                      f"{ratio:.3g} × K below)",
                      f"  {'K below (' + ku + ')':>14} {'spacing (' + su + ')':>16}"]
        for kv, L, _ in sweep_rows:
            ks = float(to_display(kv, "conductivity", units))
            ls = "no solution" if not np.isfinite(L) else \
                f"{float(to_display(L, 'spacing', units)):.1f}"
            lines.append(f"  {ks:>14.3f} {ls:>16}")
    if check is not None:
        lines += ["Check of the proposed spacing", "  " + check_verdict_text(check, units)]
        if "midway_water_table_depth_m" in check:
            if check.get("ponding"):
                lines.append(f"  {'midway water table':<34} at the surface: ponding (the "
                             "steady formula would put it "
                             f"{show(check['height_above_surface_m'], 'length', units, 2)} "
                             "above the ground; the excess ponds or runs off)")
            else:
                lines.append(f"  {'midway water-table depth':<34} "
                             f"{show(check['midway_water_table_depth_m'], 'length', units, 2)} "
                             "under the design recharge")
            lines.append(f"  {'drainage rate at required depth':<34} "
                         f"{show(check['drainage_rate_m_per_d'], 'recharge', units, 2)}")
        else:
            lines.append(f"  {'midway depth after the time allowed':<34} "
                         f"{show(check['midway_depth_after_days_m'], 'length', units, 2)}")
    if r.warnings:
        lines += ["Warnings"] + [f"  ! {w}" for w in r.warnings]
    lines += ["Notes"] + [f"  - {n}" for n in r.notes]
    lines.append("  - Check the design against local codes and have it reviewed by a "
                 "qualified professional before construction.")
    return "\n".join(lines)


def check_verdict_text(check, units="metric"):
    """'spacing 21.3 m, allowed 24.6 m: meets with 13 % to spare' (or 'fails by ...')."""
    prop = show(check["proposed_spacing_m"], "spacing", units, 1)
    if check["required_spacing_m"] is None or not np.isfinite(check["required_spacing_m"]):
        return f"spacing {prop}: no spacing meets the criterion: fails"
    req = show(check["required_spacing_m"], "spacing", units, 1)
    m = check.get("margin_pct")
    if check["meets"]:
        return f"spacing {prop}, allowed {req}: MEETS the criterion with {m:.0f} % to spare"
    return f"spacing {prop}, allowed {req}: does NOT meet the criterion ({-m:.0f} % too wide)"
