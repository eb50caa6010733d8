"""One entry point from a practitioner's description of a site to a drain spacing.

Practitioners measure depths below the ground surface; the published formulas
use heights above drain level. :func:`drain_spacing` converts one into the other,
checks the relations between the depths (water table above the drains, barrier
below them...), calls the chosen method and returns a :class:`SpacingResult`
with the spacing, the equivalent depth and the method's notes. All values SI
(m, m/d, d); arrays broadcast, so a sweep over K is one call.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from .._validate import refuse_where, require_positive, scalar_or_array
from .equivalent_depth import EQUIVALENT_DEPTH_METHODS, _equivalent_depth_unchecked
from .ernst import ernst_layer_caution, ernst_profile_spacing, ernst_profile_terms
from .glover_dumm import (FLOW_DEPTHS, INITIAL_SHAPES, glover_dumm_flow_depth,
                          glover_dumm_head, glover_dumm_spacing, reaction_factor)
from .hooghoudt import hooghoudt_head, hooghoudt_recharge, hooghoudt_spacing
from .kirkham import kirkham_f, kirkham_spacing

__all__ = ["METHODS", "STEADY_METHODS", "SpacingResult", "drain_spacing", "check_spacing",
           "CHECK_SPACING_RANGE"]

#: Method names accepted by :func:`drain_spacing` (also the CLI choices).
METHODS = ("hooghoudt", "ernst", "kirkham", "glover-dumm")
STEADY_METHODS = ("hooghoudt", "ernst", "kirkham")

# parameter names used by the formula functions -> names of the site inputs
_PARAM_NAMES = {"head": "water_table_depth", "depth_to_barrier": "barrier_depth",
                "time": "days", "k_top": "k_above", "k_bottom": "k_below",
                "initial_head": "initial_depth", "final_head": "final_depth"}


@dataclass(frozen=True)
class SpacingResult:
    """Result of :func:`drain_spacing` (SI units; arrays where inputs were arrays).

    Attributes
    ----------
    method : str
    spacing : float or numpy.ndarray
        Drain spacing [m].
    equivalent_depth : float or numpy.ndarray
        Hooghoudt's equivalent depth at that spacing [m] (for Kirkham,
        ``L / (8 F_K)``; for Ernst, given for comparison).
    flow_depth : float, numpy.ndarray or None
        Depth of the flow region used by the falling-water-table method [m].
    head : float or numpy.ndarray
        Midway water-table height above drain level used in the design [m]
        (the initial height for the falling water table).
    depth_to_barrier : float or numpy.ndarray
        Barrier depth below drain level [m].
    extra : dict
        Method-specific values (reaction factor, Ernst head losses, ...).
    notes : tuple of str
        Assumptions and choices a reviewer should see.
    warnings : tuple of str
        Cautions: the method is used outside the case it was built for.
    """

    method: str
    spacing: object
    equivalent_depth: object
    flow_depth: object
    head: object
    depth_to_barrier: object
    extra: dict = field(default_factory=dict)
    notes: tuple = ()
    warnings: tuple = ()


def _arr(v):
    return None if v is None else np.asarray(v, dtype=float)


def _require(value, name, label):
    if value is None:
        raise InputError(f"{label} is required for this method", param=name)
    return value


def drain_spacing(*, method, drain_depth, barrier_depth, drain_radius, k=None,
                  k_above=None, k_below=None, interface_depth=None, k_vertical=None,
                  recharge=None, water_table_depth=None, initial_depth=None,
                  final_depth=None, days=None, drainable_porosity=None,
                  shape="parabolic", flow_depth="equivalent",
                  equivalent_depth_method="series", geometry_factor=None):
    """Drain spacing for a site described by depths below the ground surface.

    Parameters
    ----------
    method : {"hooghoudt", "ernst", "kirkham", "glover-dumm"}
    drain_depth : array_like
        Depth of the drains below the surface [m].
    barrier_depth : array_like
        Depth of the impermeable barrier below the surface [m] (at or below
        the drains; equal for drains on the barrier, Hooghoudt only).
    drain_radius : array_like
        Effective drain radius [m].
    k : array_like, optional
        Conductivity of a homogeneous profile [m/d].
    k_above, k_below : array_like, optional
        Conductivities above and below the layer interface [m/d] (the
        interface is at drain level unless ``interface_depth`` is given).
    interface_depth : array_like, optional
        Depth of the layer interface [m] (Ernst only; default drain depth).
    k_vertical : array_like, optional
        Vertical conductivity of the top layer [m/d] (Ernst only).
    recharge : array_like, optional
        Steady design recharge q [m/d] (steady methods).
    water_table_depth : array_like, optional
        Required depth of the water table midway between drains [m] (steady).
    initial_depth, final_depth : array_like, optional
        Midway water-table depth at the start and the end of the drawdown [m]
        (glover-dumm).
    days : array_like, optional
        Time allowed for the drawdown [d] (glover-dumm).
    drainable_porosity : array_like, optional
        Drainable porosity [-] (glover-dumm).
    shape : {"parabolic", "flat"}
        Initial water-table shape (glover-dumm).
    flow_depth : {"equivalent", "equivalent-plus-half-head"}
        Flow depth choice (glover-dumm).
    equivalent_depth_method : {"series", "moody"}
    geometry_factor : float, optional
        Ernst's a, overriding the table.

    Returns
    -------
    SpacingResult

    Raises
    ------
    drainplan.errors.InputError
        With ``param`` naming the site input at fault.

    Examples
    --------
    >>> r = drain_spacing(method="hooghoudt", drain_depth=1.2, barrier_depth=6.0,
    ...                   drain_radius=0.1, k=0.14, recharge=0.001, water_table_depth=0.2)
    >>> round(float(r.spacing), 1)
    64.0
    """
    if method not in METHODS:
        raise InputError(f"method {method!r} is unknown; choose one of " + ", ".join(METHODS),
                         param="method")
    if equivalent_depth_method not in EQUIVALENT_DEPTH_METHODS:
        raise InputError(f"equivalent-depth method {equivalent_depth_method!r} is unknown; "
                         "choose one of " + ", ".join(EQUIVALENT_DEPTH_METHODS),
                         param="equivalent_depth_method")
    try:
        return _drain_spacing(method, drain_depth, barrier_depth, drain_radius, k, k_above,
                              k_below, interface_depth, k_vertical, recharge,
                              water_table_depth, initial_depth, final_depth, days,
                              drainable_porosity, shape, flow_depth,
                              equivalent_depth_method, geometry_factor)
    except InputError as exc:
        if exc.param in _PARAM_NAMES:
            raise InputError(str(exc), param=_PARAM_NAMES[exc.param]) from None
        raise


def _conductivities(method, k, k_above, k_below):
    if k is not None and (k_above is not None or k_below is not None):
        raise InputError("give either k (one layer) or k_above and k_below (two layers), "
                         "not both", param="k")
    if k is not None:
        k = _arr(k)
        require_positive(k, "k", "hydraulic conductivity", "m/d")
        return k, k
    if k_above is None and k_below is None:
        raise InputError("hydraulic conductivity is required: give k, or k_above and k_below",
                         param="k")
    if k_above is None or k_below is None:
        missing = "k_above" if k_above is None else "k_below"
        raise InputError(f"{missing} is required with a two-layer profile", param=missing)
    ka, kb = _arr(k_above), _arr(k_below)
    if method in ("kirkham", "glover-dumm") and np.any(ka != kb):
        raise InputError(f"the {method} method assumes one homogeneous layer; give k "
                         "(use ernst or hooghoudt for two layers)", param="k_above")
    return ka, kb


def _drain_spacing(method, drain_depth, barrier_depth, drain_radius, k, k_above, k_below,
                   interface_depth, k_vertical, recharge, water_table_depth, initial_depth,
                   final_depth, days, drainable_porosity, shape, flow_depth, ed_method,
                   geometry_factor):
    ka, kb = _conductivities(method, k, k_above, k_below)
    zd, zb, r0 = _arr(drain_depth), _arr(barrier_depth), _arr(drain_radius)
    if np.any(~np.isfinite(zd)) or np.any(zd <= 0):
        raise InputError("drain depth must be greater than 0 m", param="drain_depth")
    if np.any(~np.isfinite(zb)):
        raise InputError("barrier depth must be a finite number", param="barrier_depth")
    refuse_where(zb < zd, zb, zd, "barrier_depth",
                 "barrier depth {:g} m must not be above the drain depth {:g} m")
    D = zb - zd
    notes = []
    if method == "kirkham":
        notes.append("equivalent depth shown is Kirkham's L / (8 F_K)")
    elif ed_method == "moody":
        notes.append("equivalent depth by Moody's (1966) approximation (0-4 % above the "
                     "exact series)")
    else:
        notes.append("equivalent depth by the van der Molen & Wesseling (1991) series")
    if interface_depth is not None and method != "ernst":
        if np.any(np.asarray(interface_depth, float) != zd):
            raise InputError(f"the {method} method takes the layer interface at drain level; "
                             "use the ernst method for drains inside a layer",
                             param="interface_depth")
    if method != "ernst" and (k_vertical is not None or geometry_factor is not None):
        name = "k_vertical" if k_vertical is not None else "geometry_factor"
        raise InputError(f"{name} applies to the ernst method only", param=name)

    if method in STEADY_METHODS:
        q = _arr(_require(recharge, "recharge", "recharge (design discharge)"))
        zw = _arr(_require(water_table_depth, "water_table_depth",
                           "water-table depth midway between drains"))
        if np.any(~np.isfinite(zw)) or np.any(zw < 0):
            raise InputError("water-table depth must be 0 m (surface) or deeper",
                             param="water_table_depth")
        refuse_where(zw >= zd, zw, zd, "water_table_depth",
                     "water-table depth {:g} m must be shallower than the drain depth {:g} m")
        h = zd - zw
        extra = {}
        if method == "hooghoudt":
            L = hooghoudt_spacing(recharge=q, head=h, k_above=ka, k_below=kb,
                                  depth_to_barrier=D, drain_radius=r0,
                                  equivalent_depth_method=ed_method)
            d = _eq_depth(L, D, r0, ed_method)
            if np.any(D == 0):
                notes.append("drains on the barrier: Donnan form q L^2 = 4 K h^2")
            notes.append("Hooghoudt steady state, layer interface at drain level")
            extra["drainage_intensity"] = _safe(lambda: hooghoudt_recharge(
                spacing=L, head=zd, k_above=ka, k_below=kb, depth_to_barrier=D,
                drain_radius=r0, equivalent_depth_method=ed_method))
        elif method == "kirkham":
            L = kirkham_spacing(head=h, recharge=q, k=kb, depth_to_barrier=D, drain_radius=r0)
            d = _safe(lambda: L / (8.0 * kirkham_f(L, D, r0)))
            notes.append("Kirkham (1958) steady rain series; homogeneous soil, linearised "
                         "water table (h small compared with the depth to the barrier)")
        else:
            L = ernst_profile_spacing(head=h, recharge=q, drain_depth=zd, barrier_depth=zb,
                                      k_top=ka, k_bottom=kb, interface_depth=interface_depth,
                                      k_vertical=k_vertical, drain_radius=r0,
                                      geometry_factor=geometry_factor)
            d = _eq_depth(L, D, r0, ed_method)
            terms = _safe(lambda: ernst_profile_terms(
                spacing=L, head=h, drain_depth=zd, barrier_depth=zb, k_top=ka, k_bottom=kb,
                interface_depth=interface_depth, k_vertical=k_vertical, drain_radius=r0,
                geometry_factor=geometry_factor))
            if terms is not None:
                extra.update({
                    "geometry_factor": terms["geometry_factor"],
                    "transmissivity_m2_per_d": terms["transmissivity"],
                    "radial_thickness_m": terms["radial_thickness"],
                    "head_loss_vertical_m": q * terms["vertical"],
                    "head_loss_horizontal_m": q * terms["horizontal"],
                    "head_loss_radial_m": q * terms["radial"],
                })
            notes.append("Ernst: vertical + horizontal + radial head losses; wet perimeter "
                         "pi r0; flow depths below the drains limited to L/4")
            if geometry_factor is None and interface_depth is not None and np.any(
                    np.asarray(interface_depth, float) > zd):
                notes.append("geometry factor a from the ILRI Table 8.2 values as recalled "
                             "(not verified against the book); give it directly to override")
        notes += _range_notes(L)
        cautions = ()
        if method == "ernst":
            c = ernst_layer_caution(drain_depth=zd, interface_depth=interface_depth,
                                    k_top=ka, k_bottom=kb)
            cautions = (c,) if c else ()
        return SpacingResult(method, L, d, None, scalar_or_array(h), scalar_or_array(D),
                             extra, tuple(notes), cautions)

    # falling water table
    z0 = _arr(_require(initial_depth, "initial_depth", "initial water-table depth"))
    z1 = _arr(_require(final_depth, "final_depth", "final water-table depth"))
    t = _arr(_require(days, "days", "time allowed for the drawdown"))
    mu = _arr(_require(drainable_porosity, "drainable_porosity", "drainable porosity"))
    if np.any(~np.isfinite(z0)) or np.any(z0 < 0):
        raise InputError("initial water-table depth must be 0 m (surface) or deeper",
                         param="initial_depth")
    if np.any(z0 >= zd):
        raise InputError("initial water-table depth must be shallower than the drain depth",
                         param="initial_depth")
    if np.any(~np.isfinite(z1)) or np.any(z1 <= z0):
        raise InputError("final water-table depth must be deeper than the initial depth "
                         "(the water table falls)", param="final_depth")
    if np.any(z1 >= zd):
        raise InputError("final water-table depth must be shallower than the drain depth "
                         "(the linearised formula never reaches drain level)",
                         param="final_depth")
    if shape not in INITIAL_SHAPES:
        raise InputError(f"initial shape {shape!r} is unknown; choose one of "
                         + ", ".join(INITIAL_SHAPES), param="shape")
    if flow_depth not in FLOW_DEPTHS:
        raise InputError(f"flow depth {flow_depth!r} is unknown; choose one of "
                         + ", ".join(FLOW_DEPTHS), param="flow_depth")
    y0, yt = zd - z0, zd - z1
    L = glover_dumm_spacing(initial_head=y0, final_head=yt, time=t, k=kb,
                            drainable_porosity=mu, depth_to_barrier=D, drain_radius=r0,
                            shape=shape, flow_depth=flow_depth,
                            equivalent_depth_method=ed_method)
    d = _eq_depth(L, D, r0, ed_method)
    fd = _safe(lambda: glover_dumm_flow_depth(spacing=L, initial_head=y0, depth_to_barrier=D,
                                              drain_radius=r0, flow_depth=flow_depth,
                                              equivalent_depth_method=ed_method))
    alpha = _safe(lambda: reaction_factor(k=kb, flow_depth=fd, drainable_porosity=mu,
                                          spacing=L))
    extra = {}
    if alpha is not None:
        at = alpha * t
        extra["reaction_factor_per_d"] = alpha
        extra["alpha_t"] = at
        extra["final_head_series_m"] = _safe(lambda: glover_dumm_head(
            time=t, initial_head=y0, reaction_factor=alpha, shape=shape))
        if np.any(np.asarray(at) < 0.2):
            notes.append("alpha t below 0.2: the one-term formula is outside its accurate "
                         "range; compare the series height at the end time")
    coef = "1.16 (Dumm, fourth-degree parabola)" if shape == "parabolic" else "4/pi (flat)"
    depth_note = ("flow depth = equivalent depth d (conservative: underestimates spacing "
                  "against the non-linear solution)" if flow_depth == "equivalent" else
                  "flow depth = d + h0/2 (not conservative: overestimates spacing against "
                  "the non-linear solution)")
    notes.append(f"Glover-Dumm falling water table, initial-shape coefficient {coef}")
    notes.append(depth_note)
    notes += _range_notes(L)
    return SpacingResult(method, L, d, fd, scalar_or_array(y0), scalar_or_array(D),
                         extra, tuple(notes))


#: Spacings outside this range are flagged in the notes [PRACTICE].
PRACTICAL_SPACING = (2.0, 300.0)


def _range_notes(L):
    L = np.asarray(L, float)
    notes = []
    if np.any(L < PRACTICAL_SPACING[0]):
        notes.append("spacing below 2 m: pipe drainage is hardly practical at this K and "
                     "recharge; consider surface drainage, mole drains or a deeper design")
    if np.any(L > PRACTICAL_SPACING[1]):
        notes.append("spacing above 300 m: outside the range where these methods are "
                     "usually applied; check that drainage is needed at all")
    return notes


def _eq_depth(L, D, r0, method):
    L = np.asarray(L, float)
    with np.errstate(all="ignore"):
        d = _equivalent_depth_unchecked(np.where(np.isfinite(L), L, 1.0), D, r0, method)
    return scalar_or_array(np.where(np.isfinite(L), d, np.nan))


def _safe(fn):
    """Evaluate a secondary quantity; NaN spacings give NaN, not an error."""
    with np.errstate(all="ignore"):
        try:
            return fn()
        except InputError:
            return None


#: Proposed spacings outside this range are refused by :func:`check_spacing` [m]:
#: below 1 m a pipe drain is closer to its neighbour than a trench is wide, above
#: 1000 m the water table midway stands metres above the ground under any design
#: recharge, and the linearised formulas have lost their meaning [PRACTICE].
CHECK_SPACING_RANGE = (1.0, 1000.0)


def _margin_at_most(proposed, allowed):
    """Share [%] by which ``proposed`` stays under ``allowed`` (negative: over it)."""
    if not (np.isfinite(allowed) and allowed > 0):
        return None
    return 100.0 * (allowed - proposed) / allowed


def check_spacing(*, spacing, **site):
    """Check a proposed spacing against the site's criterion.

    Parameters
    ----------
    spacing : float
        Proposed drain spacing [m], 1-1000 m (:data:`CHECK_SPACING_RANGE`).
    **site
        The keyword arguments of :func:`drain_spacing` (method, depths, soil,
        criterion).

    Returns
    -------
    dict
        ``proposed_spacing_m``, ``required_spacing_m`` (the widest spacing that
        meets the criterion), ``meets`` (bool), ``margin_pct`` (how much
        narrower than the widest allowed spacing the proposal is, in % of that
        spacing; negative when it is wider), and for steady methods
        ``midway_water_table_depth_m`` (under the design recharge; 0 when the
        water table would reach the surface), ``ponding`` (bool) and
        ``height_above_surface_m`` (how far above the surface the steady
        formula puts the water table when it ponds; 0 otherwise) and
        ``drainage_rate_m_per_d`` (what the spacing removes with the water
        table at the required depth); for the falling water table
        ``midway_depth_after_days_m`` (full series).

    Raises
    ------
    drainplan.errors.InputError
        A spacing outside 1-1000 m, or any input :func:`drain_spacing` refuses.

    Notes
    -----
    The water table cannot stand above the ground: where the steady formula
    puts it higher, the recharge it cannot carry ponds or runs off. The check
    then reports ``ponding`` and by how much the formula overshoots, never a
    negative depth.

    Examples
    --------
    >>> c = check_spacing(spacing=50.0, method="hooghoudt", drain_depth=1.2,
    ...                   barrier_depth=6.0, drain_radius=0.1, k=0.14, recharge=0.001,
    ...                   water_table_depth=0.2)
    >>> c["meets"], round(c["midway_water_table_depth_m"], 2), round(c["margin_pct"])
    (True, 0.51, 22)
    """
    L = float(spacing)
    if not (np.isfinite(L) and L > 0):
        raise InputError("proposed spacing must be greater than 0 m", param="check_spacing")
    lo, hi = CHECK_SPACING_RANGE
    if not lo <= L <= hi:
        raise InputError(f"proposed spacing {L:g} m is outside {lo:g}-{hi:g} m, the range "
                         "where pipe drains are laid and these formulas mean anything "
                         "(practical spacings are 2-300 m)", param="check_spacing")
    req = drain_spacing(**site)
    method = site["method"]
    L_req = float(req.spacing)
    out = {"method": method, "proposed_spacing_m": L, "required_spacing_m": L_req,
           "meets": bool(np.isfinite(L_req) and L <= L_req * (1 + 1e-9)),
           "margin_pct": _margin_at_most(L, L_req)}
    zd = float(site["drain_depth"])
    D = float(req.depth_to_barrier)
    r0 = float(site["drain_radius"])
    ka, kb = _conductivities(method, site.get("k"), site.get("k_above"), site.get("k_below"))
    ka, kb = float(ka), float(kb)
    edm = site.get("equivalent_depth_method", "series")
    if method in STEADY_METHODS:
        q, h_req = float(site["recharge"]), float(req.head)
        if method == "hooghoudt":
            kw = dict(k_above=ka, k_below=kb, depth_to_barrier=D, drain_radius=r0,
                      equivalent_depth_method=edm)
            h = float(hooghoudt_head(spacing=L, recharge=q, **kw))
            rate = float(hooghoudt_recharge(spacing=L, head=h_req, **kw))
        elif method == "kirkham":
            f = float(kirkham_f(L, D, r0))
            h = q * L * f / kb
            rate = h_req * kb / (L * f)
        else:
            t = ernst_profile_terms(spacing=L, head=h_req, drain_depth=zd,
                                    barrier_depth=site["barrier_depth"], k_top=ka,
                                    k_bottom=kb, interface_depth=site.get("interface_depth"),
                                    k_vertical=site.get("k_vertical"), drain_radius=r0,
                                    geometry_factor=site.get("geometry_factor"))
            resistance = float(t["vertical"] + t["horizontal"] + t["radial"])
            h = q * resistance
            rate = h_req / resistance
        depth = zd - h
        out["midway_water_table_depth_m"] = max(depth, 0.0)
        out["ponding"] = bool(depth < 0)
        out["height_above_surface_m"] = max(-depth, 0.0)
        out["drainage_rate_m_per_d"] = rate
    else:
        y0 = float(req.head)
        fd = float(glover_dumm_flow_depth(spacing=L, initial_head=y0, depth_to_barrier=D,
                                          drain_radius=r0,
                                          flow_depth=site.get("flow_depth", "equivalent"),
                                          equivalent_depth_method=edm))
        a = float(reaction_factor(k=kb, flow_depth=fd,
                                  drainable_porosity=site["drainable_porosity"], spacing=L))
        y = float(glover_dumm_head(time=site["days"], initial_head=y0, reaction_factor=a,
                                   shape=site.get("shape", "parabolic")))
        out["midway_depth_after_days_m"] = zd - y
        out["flow_depth_m"] = fd
    return out
