"""Ernst's drain-spacing equation for layered soils.

The equation itself (:func:`ernst_head`, :func:`ernst_spacing`) takes the
flow parameters directly. :func:`ernst_profile_spacing` derives them from a
two-layer soil profile given as depths below the surface, following the usual
textbook cases (drains in the bottom layer, drains in the top layer with the
geometry factor a).
"""

from __future__ import annotations

import numpy as np

from .._solve import bracketed_root
from .._validate import as_float_arrays, require_positive, require_nonnegative, scalar_or_array
from ..errors import InputError

__all__ = ["ernst_head", "ernst_spacing", "ernst_geometry_factor", "ernst_profile_spacing",
           "ernst_profile_terms", "ERNST_GEOMETRY_TABLE", "ernst_layer_caution"]

#: Geometry factor a for radial flow when the drains lie in the top layer of a
#: two-layer profile, by K_bottom / K_top (rows) and D_bottom / D_top
#: (columns). Values as recalled from Ritzema (1994), ILRI Publication 16,
#: Table 8.2 [MEMORY -- not verified against the book]. The row K_b/K_t = 1 is
#: the exact homogeneous value 1 + D_b/D_t (the radial term of the deep-series
#: Hooghoudt solution for total depth D_t + D_b), which equals the recalled
#: values up to D_b/D_t = 8.
ERNST_GEOMETRY_TABLE = {
    "k_ratio": np.array([1.0, 2.0, 3.0, 5.0, 10.0, 20.0, 50.0]),
    "thickness_ratio": np.array([1.0, 2.0, 4.0, 8.0, 16.0, 32.0]),
    "a": np.array([
        [2.0, 3.0, 5.0, 9.0, 17.0, 33.0],
        [2.4, 3.2, 4.6, 6.2, 8.0, 10.0],
        [2.6, 3.3, 4.5, 5.5, 6.8, 8.0],
        [2.8, 3.5, 4.4, 4.8, 5.3, 5.6],
        [3.2, 3.6, 4.2, 4.5, 4.7, 4.8],
        [3.6, 3.7, 4.0, 4.2, 4.4, 4.5],
        [3.8, 4.0, 4.0, 4.0, 4.0, 4.0],
    ]),
}


def ernst_head(*, spacing, recharge, transmissivity, k_radial, radial_thickness,
               wet_perimeter, geometry_factor=1.0, k_vertical=None, vertical_thickness=0.0):
    """Midway head above drain level from Ernst's equation.

    Parameters
    ----------
    spacing : array_like
        Drain spacing L [m].
    recharge : array_like
        Steady recharge q [m/d].
    transmissivity : array_like
        Sum of K D over the layers carrying horizontal flow [m2/d].
    k_radial : array_like
        Conductivity K_r of the layer where radial flow occurs [m/d].
    radial_thickness : array_like
        Thickness D_r of the radial-flow zone [m].
    wet_perimeter : array_like
        Wet perimeter u of the drain [m]; ``pi r0`` for a pipe of radius r0.
    geometry_factor : array_like
        Radial-flow geometry factor a [-]; 1 for a homogeneous zone.
    k_vertical : array_like, optional
        Vertical conductivity K_v of the vertical-flow zone [m/d].
    vertical_thickness : array_like
        Thickness D_v of the vertical-flow zone [m]; 0 drops the term.

    Returns
    -------
    numpy.ndarray or float
        h [m], the sum of the vertical, horizontal and radial head losses.

    Notes
    -----
    Ernst's equation (Eq. 8.13 in [2]; Eq. 3.1 of the method notes)::

        h = q D_v / K_v + q L^2 / (8 sum(K D)) + (q L / (pi K_r)) ln(a D_r / u)

    References
    ----------
    .. [1] Ernst, L.F. (1956). Calculation of the steady flow of groundwater in
       vertical cross-sections. Netherlands Journal of Agricultural Science 4,
       126-131.
    .. [2] Ritzema, H.P. (1994). Subsurface flow to drains. Chapter 8 in
       Drainage Principles and Applications, ILRI Publication 16, 2nd ed.

    Examples
    --------
    >>> round(float(ernst_head(spacing=400.0, recharge=0.000822, transmissivity=200.0,
    ...     k_radial=3.0, radial_thickness=4.0, wet_perimeter=2.5, geometry_factor=5.0,
    ...     k_vertical=3.0, vertical_thickness=2.0)), 4)
    0.1553
    """
    L, q, kd, kr, dr, u, a, dv = as_float_arrays(
        spacing, recharge, transmissivity, k_radial, radial_thickness, wet_perimeter,
        geometry_factor, vertical_thickness)
    kv = kr if k_vertical is None else np.broadcast_to(np.asarray(k_vertical, float), L.shape)
    _check_ernst(q, kd, kr, dr, u, a, kv, dv)
    h = (q * dv / kv                                                  # vertical
         + q * L * L / (8.0 * kd)                                     # horizontal
         + q * L / (np.pi * kr) * np.log(a * dr / u))                 # radial, Eq. (3.1)
    return scalar_or_array(h)


def _check_ernst(q, kd, kr, dr, u, a, kv, dv):
    require_positive(q, "recharge", "recharge", "m/d")
    require_positive(kd, "transmissivity", "transmissivity", "m2/d")
    require_positive(kr, "k_radial", "radial-zone conductivity", "m/d")
    require_positive(dr, "radial_thickness", "radial-zone thickness", "m")
    require_positive(u, "wet_perimeter", "wet perimeter", "m")
    require_positive(a, "geometry_factor", "geometry factor", "-")
    require_positive(kv, "k_vertical", "vertical conductivity", "m/d")
    require_nonnegative(dv, "vertical_thickness", "vertical-zone thickness", "m")


def ernst_spacing(*, head, recharge, transmissivity, k_radial, radial_thickness,
                  wet_perimeter, geometry_factor=1.0, k_vertical=None, vertical_thickness=0.0):
    """Drain spacing from Ernst's equation with fixed flow parameters.

    Parameters are those of :func:`ernst_head`, with ``head`` h [m] given
    instead of ``spacing``.

    Returns
    -------
    numpy.ndarray or float
        L [m], the positive root of ``q L^2 / (8 KD) + (q ln(a D_r/u) / (pi K_r)) L
        + q D_v / K_v - h = 0``; NaN where the vertical loss alone exceeds h.

    References
    ----------
    .. [1] Ritzema, H.P. (1994). Subsurface flow to drains. Chapter 8 in
       Drainage Principles and Applications, ILRI Publication 16, 2nd ed.

    Examples
    --------
    >>> round(float(ernst_spacing(head=0.15528, recharge=0.000822, transmissivity=200.0,
    ...     k_radial=3.0, radial_thickness=4.0, wet_perimeter=2.5, geometry_factor=5.0,
    ...     k_vertical=3.0, vertical_thickness=2.0)), 1)
    400.0
    """
    h, q, kd, kr, dr, u, a, dv = as_float_arrays(
        head, recharge, transmissivity, k_radial, radial_thickness, wet_perimeter,
        geometry_factor, vertical_thickness)
    kv = kr if k_vertical is None else np.broadcast_to(np.asarray(k_vertical, float), h.shape)
    require_positive(h, "head", "water-table height midway above drain level", "m")
    _check_ernst(q, kd, kr, dr, u, a, kv, dv)
    A = q / (8.0 * kd)
    B = q * np.log(a * dr / u) / (np.pi * kr)
    C = h - q * dv / kv
    with np.errstate(invalid="ignore"):
        L = 2.0 * C / (B + np.sqrt(B * B + 4.0 * A * C))
    return scalar_or_array(np.where(C > 0, L, np.nan))


def ernst_geometry_factor(k_ratio, thickness_ratio):
    """Geometry factor a for drains in the top layer of a two-layer soil.

    Parameters
    ----------
    k_ratio : array_like
        K_bottom / K_top [-].
    thickness_ratio : array_like
        D_bottom / D_top [-]: thickness of the bottom layer over the thickness
        of the top layer below drain level.

    Returns
    -------
    numpy.ndarray or float
        a [-].

    Notes
    -----
    Rules as given in ILRI Publication 16, section 8.2 [MEMORY]:
    K_b/K_t < 0.1: the bottom layer counts as impermeable and a = 1;
    K_b/K_t > 50: a = 4; in between, Table 8.2 (here
    :data:`ERNST_GEOMETRY_TABLE`), interpolated bilinearly in
    log(K ratio) and log(thickness ratio). Outside the table, drainplan
    extends it in two documented ways of its own: for 0.1 <= K_b/K_t < 1,
    linear in log(K ratio) from a = 1 at 0.1 to the homogeneous row at 1;
    for D_b/D_t < 1, linear from a = 1 at 0 to the first column; above 32 the
    last column is used.

    References
    ----------
    .. [1] Ritzema, H.P. (1994). Subsurface flow to drains. Chapter 8 in
       Drainage Principles and Applications, ILRI Publication 16, 2nd ed.,
       Table 8.2.

    Examples
    --------
    >>> float(ernst_geometry_factor(1.0, 4.0))
    5.0
    >>> float(ernst_geometry_factor(100.0, 4.0))
    4.0
    """
    kr, tr = as_float_arrays(k_ratio, thickness_ratio)
    require_positive(kr, "k_ratio", "conductivity ratio bottom/top", "-")
    require_nonnegative(tr, "thickness_ratio", "thickness ratio bottom/top", "-")
    tab = ERNST_GEOMETRY_TABLE
    lk = np.log(tab["k_ratio"])
    lt = np.log(tab["thickness_ratio"])
    lkr = np.clip(np.log(np.maximum(kr, 1.0)), lk[0], lk[-1])
    ltr = np.clip(np.log(np.maximum(tr, 1.0)), lt[0], lt[-1])
    # bilinear interpolation on the log-log grid
    i = np.clip(np.searchsorted(lk, lkr) - 1, 0, lk.size - 2)
    j = np.clip(np.searchsorted(lt, ltr) - 1, 0, lt.size - 2)
    wk = (lkr - lk[i]) / (lk[i + 1] - lk[i])
    wt = (ltr - lt[j]) / (lt[j + 1] - lt[j])
    g = tab["a"]
    a = ((1 - wk) * (1 - wt) * g[i, j] + wk * (1 - wt) * g[i + 1, j]
         + (1 - wk) * wt * g[i, j + 1] + wk * wt * g[i + 1, j + 1])
    # thin bottom layer: from a = 1 at D_b/D_t = 0 to the first column
    a = np.where(tr < 1.0, 1.0 + tr * (a - 1.0), a)
    # 0.1 <= K ratio < 1: from a = 1 at 0.1 to the value at K ratio 1
    w_low = np.clip(np.log(kr / 0.1) / np.log(10.0), 0.0, 1.0)
    a = np.where(kr < 1.0, 1.0 + w_low * (a - 1.0), a)
    a = np.where(kr > 50.0, 4.0, a)
    a = np.where(kr < 0.1, 1.0, a)
    return scalar_or_array(a)


#: Range of Ernst's geometry factor a accepted from a user: 1 for a homogeneous
#: radial zone, up to about 33 in ILRI Table 8.2 (as recalled); 100 leaves room.
GEOMETRY_FACTOR_RANGE = (1.0, 100.0)


def _check_geometry_factor(a, radial_thickness, wet_perimeter):
    """Refuse a user geometry factor outside its physical range.

    The radial head loss (q L / (pi K_r)) ln(a D_r / u) is a loss only while
    a D_r > u; a below 1 has no counterpart in Ernst's cases (a = 1 for a
    homogeneous radial zone, larger when a more permeable layer lies below).
    """
    a = np.asarray(a, float)
    lo, hi = GEOMETRY_FACTOR_RANGE
    bad = ~np.isnan(a) & ~((a >= lo) & (a <= hi))
    if np.any(bad):
        v = float(a[bad].flat[0])
        raise InputError(f"geometry factor a = {v:g} is outside {lo:g}-{hi:g}: a is 1 for a "
                         "homogeneous radial zone and grows to about 33 where a more "
                         "permeable layer lies below (ILRI Table 8.2)",
                         param="geometry_factor")
    with np.errstate(invalid="ignore"):
        neg = ~np.isnan(a) & (a * radial_thickness <= wet_perimeter)
    if np.any(neg):
        raise InputError("geometry factor a times the radial-zone thickness must exceed the "
                         "wet perimeter pi r0, or the radial head loss would be negative",
                         param="geometry_factor")


def _overlap(a0, a1, b0, b1):
    return np.maximum(0.0, np.minimum(a1, b1) - np.maximum(a0, b0))


def ernst_profile_terms(*, spacing, head, drain_depth, barrier_depth, k_top, drain_radius,
                        k_bottom=None, interface_depth=None, k_vertical=None,
                        geometry_factor=None, quarter_spacing_limit=True):
    """Ernst's flow parameters for a two-layer profile, and the three head losses.

    Parameters
    ----------
    spacing : array_like
        Drain spacing L [m] (needed for the L/4 limit on flow depths).
    head : array_like
        Midway water-table height above drain level h [m].
    drain_depth, barrier_depth : array_like
        Depths below the surface of the drains and of the impermeable barrier [m].
    k_top : array_like
        Conductivity of the top layer (surface to interface) [m/d].
    drain_radius : array_like
        Effective drain radius r0 [m]; the wet perimeter is ``u = pi r0``.
    k_bottom : array_like, optional
        Conductivity of the bottom layer (interface to barrier) [m/d];
        default ``k_top``.
    interface_depth : array_like, optional
        Depth of the layer interface below the surface [m]; default the drain
        depth (interface at drain level).
    k_vertical : array_like, optional
        Vertical conductivity of the top layer [m/d]; default ``k_top``.
    geometry_factor : array_like, optional
        Override of the geometry factor a [-]; NaN entries keep the rule.
    quarter_spacing_limit : bool
        Limit the flow depth below the drains to L/4 (usual practice for deep
        barriers [MEMORY]).

    Returns
    -------
    dict of numpy.ndarray
        ``transmissivity`` [m2/d], ``k_radial`` [m/d], ``radial_thickness`` [m],
        ``geometry_factor`` [-], ``vertical_resistance`` [d] (sum of D_v/K_v
        from the midway water table down to drain level), ``wet_perimeter`` [m],
        and the head losses per unit recharge ``vertical``, ``horizontal``,
        ``radial`` [d] (multiply by q for metres).

    Notes
    -----
    Cases (ILRI Publication 16, section 8.2 [MEMORY]):

    * interface at or above drain level (drains in the bottom layer): radial
      flow in the bottom layer, a = 1, D_r = barrier depth - drain depth;
    * drains in the top layer: K_r = K_top, D_r = interface depth - drain depth,
      a from :func:`ernst_geometry_factor` (the bottom layer counts as
      impermeable when K_b/K_t < 0.1).

    Where the radial zone is thinner than u / a (drains within about pi r0 of
    the barrier or of a less permeable layer) the radial loss ln(a D_r / u)
    would turn negative; it is taken as zero there, the limit that
    Hooghoudt's equivalent depth reaches with d = D.

    The horizontal transmissivity integrates K over the saturated zone from
    h/2 above drain level (the mean saturated height above the drains) down
    to the barrier (or to the interface when the bottom layer counts as
    impermeable).

    References
    ----------
    .. [1] Ernst, L.F. (1956). Netherlands Journal of Agricultural Science 4,
       126-131.
    .. [2] Ritzema, H.P. (1994). Subsurface flow to drains. Chapter 8 in
       Drainage Principles and Applications, ILRI Publication 16, 2nd ed.
    """
    if k_bottom is None:
        k_bottom = k_top
    if interface_depth is None:
        interface_depth = drain_depth
    L, h, zd, zb, kt, kb, zi, r0 = as_float_arrays(
        spacing, head, drain_depth, barrier_depth, k_top, k_bottom, interface_depth,
        drain_radius)
    kv = kt if k_vertical is None else np.broadcast_to(np.asarray(k_vertical, float), L.shape)
    zi = np.minimum(zi, zb)
    in_top = zi > zd
    d_top = np.where(in_top, zi - zd, 0.0)          # top layer below drain level
    d_bottom = zb - np.maximum(zi, zd)              # bottom layer below drain level
    ratio = kb / kt
    bottom_counts = ~(in_top & ((ratio < 0.1) | (d_bottom <= 0)))
    limit = np.where(quarter_spacing_limit, L / 4.0, np.inf)
    # horizontal transmissivity: integrate K from zd - h/2 to the flow base
    base = np.where(bottom_counts, zb, zi)
    base = np.minimum(base, zd + limit)
    top_edge = zd - h / 2.0
    kd = kt * _overlap(top_edge, base, -np.inf, zi) + kb * _overlap(top_edge, base, zi, np.inf)
    # radial zone
    k_radial = np.where(in_top, kt, kb)
    d_radial = np.minimum(np.where(in_top, d_top, zb - zd), limit)
    a_table = ernst_geometry_factor(ratio, np.where(in_top, d_bottom / np.where(
        d_top > 0, d_top, 1.0), 0.0))
    a = np.where(in_top & bottom_counts, a_table, 1.0)
    if geometry_factor is not None:
        # a user value (NaN = use the rule) replaces the rule
        user = np.broadcast_to(np.asarray(geometry_factor, float), L.shape)
        a = np.where(np.isnan(user), a, user)
    u = np.pi * r0
    # vertical resistance from the midway water table (zd - h) to drain level
    t_top = _overlap(zd - h, zd, -np.inf, zi)
    c_vert = t_top / kv + (h - t_top) / kb
    with np.errstate(divide="ignore", invalid="ignore"):
        terms = {
            "transmissivity": kd, "k_radial": k_radial, "radial_thickness": d_radial,
            "geometry_factor": a, "vertical_resistance": c_vert, "wet_perimeter": u,
            "vertical": c_vert,
            "horizontal": L * L / (8.0 * kd),
            # a radial zone thinner than u/a adds no radial resistance (the same
            # limit as Hooghoudt's d <= D): the loss is clipped at zero
            "radial": L / (np.pi * k_radial) * np.log(np.maximum(a * d_radial / u, 1.0)),
        }
    return {k: scalar_or_array(v) for k, v in terms.items()}


def ernst_profile_spacing(*, head, recharge, drain_depth, barrier_depth, k_top, drain_radius,
                          k_bottom=None, interface_depth=None, k_vertical=None,
                          geometry_factor=None, quarter_spacing_limit=True, xtol=1e-6):
    """Drain spacing from Ernst's equation for a two-layer profile.

    Parameters
    ----------
    head : array_like
        Design midway water-table height above drain level h [m].
    recharge : array_like
        Steady recharge q [m/d].
    drain_depth, barrier_depth, k_top, drain_radius, k_bottom, interface_depth,
    k_vertical, geometry_factor, quarter_spacing_limit
        As in :func:`ernst_profile_terms`.
    xtol : float
        Tolerance on the spacing [m].

    Returns
    -------
    numpy.ndarray or float
        L [m]; NaN with a ConvergenceWarning where no spacing meets the head
        (the vertical loss alone exceeds it).

    Raises
    ------
    drainplan.errors.InputError
        For non-positive conductivities, recharge, head or radius; a barrier
        not below the drains; a radius not smaller than the radial zone.

    Notes
    -----
    Because D_r and the horizontal flow depth are limited to L/4, the head is
    solved for L with the shared bracketed solver rather than the quadratic
    formula of :func:`ernst_spacing` (they agree where the limit is inactive).

    References
    ----------
    .. [1] Ernst, L.F. (1956). Netherlands Journal of Agricultural Science 4,
       126-131.
    .. [2] Ritzema, H.P. (1994). Subsurface flow to drains. Chapter 8 in
       Drainage Principles and Applications, ILRI Publication 16, 2nd ed.

    Examples
    --------
    >>> round(float(ernst_profile_spacing(head=0.5, recharge=0.007, drain_depth=1.0,
    ...     barrier_depth=3.0, k_top=1.0, drain_radius=0.1)), 1)
    30.8
    """
    if k_bottom is None:
        k_bottom = k_top
    if interface_depth is None:
        interface_depth = drain_depth
    h, q, zd, zb, kt, kb, zi, r0 = as_float_arrays(
        head, recharge, drain_depth, barrier_depth, k_top, k_bottom, interface_depth,
        drain_radius)
    kv = kt if k_vertical is None else np.broadcast_to(np.asarray(k_vertical, float), h.shape)
    require_positive(h, "head", "water-table height midway above drain level", "m")
    require_positive(q, "recharge", "recharge", "m/d")
    require_positive(kt, "k_top", "conductivity of the top layer", "m/d")
    require_positive(kb, "k_bottom", "conductivity of the bottom layer", "m/d")
    require_positive(kv, "k_vertical", "vertical conductivity", "m/d")
    require_positive(r0, "drain_radius", "drain radius", "m")
    require_positive(zd, "drain_depth", "drain depth", "m")
    require_nonnegative(zi, "interface_depth", "interface depth", "m")
    bad = zb <= zd
    if np.any(bad):
        raise InputError("the barrier must lie below the drains (barrier depth > drain depth)",
                         param="barrier_depth")
    bad = h > zd
    if np.any(bad):
        raise InputError("the midway water-table height above the drains cannot exceed "
                         "the drain depth", param="head")
    radial = np.where(zi > zd, np.minimum(zi, zb) - zd, zb - zd)
    bad = r0 >= radial
    if np.any(bad):
        raise InputError("drain radius must be smaller than the radial-flow zone below the "
                         "drains (drain level to interface or barrier)", param="drain_radius")
    if geometry_factor is None:
        a_user = np.full(h.shape, np.nan)
    else:
        a_user = np.broadcast_to(np.asarray(geometry_factor, float), h.shape)
        _check_geometry_factor(a_user, np.minimum(radial, 1.0e9), np.pi * r0)

    def f(L, h, q, zd, zb, kt, kb, zi, r0, kv, a_user):
        t = ernst_profile_terms(spacing=L, head=h, drain_depth=zd, barrier_depth=zb,
                                k_top=kt, k_bottom=kb, interface_depth=zi, drain_radius=r0,
                                k_vertical=kv, geometry_factor=a_user,
                                quarter_spacing_limit=quarter_spacing_limit)
        return q * (t["vertical"] + t["horizontal"] + t["radial"]) - h       # Eq. (3.1)

    lo = 8.0 * np.pi * r0
    hi = np.full(h.shape, 1.0e5)
    res = bracketed_root(f, lo, hi, (h, q, zd, zb, kt, kb, zi, r0, kv, a_user), xtol=xtol,
                         what="Ernst spacing")
    return scalar_or_array(res.root)


def ernst_layer_caution(*, drain_depth, interface_depth, k_top, k_bottom):
    """Caution text where Ernst is applied outside the layered case it was built for.

    Parameters
    ----------
    drain_depth : array_like
        Depth of the drains below the surface [m].
    interface_depth : array_like or None
        Depth of the layer interface below the surface [m]; None or a depth at
        or above the drains means the drains lie in the bottom layer.
    k_top, k_bottom : array_like
        Conductivity of the top and of the bottom layer [m/d].

    Returns
    -------
    str or None
        The caution, or None where the case is one Ernst's method covers.

    Notes
    -----
    Ernst's geometry factor a for drains in the top layer was tabulated for a
    bottom layer at least as permeable as the top one, K_b/K_t from 1 to 50
    (ILRI Publication 16, Table 8.2 [MEMORY]); below K_b/K_t = 0.1 the bottom
    layer counts as impermeable. Between 0.1 and 1 -- a top layer far more
    permeable than the one below -- drainplan interpolates a between 1 and the
    homogeneous value: that extension is drainplan's own, not a published
    table, so the result is flagged and Hooghoudt is suggested (interface at
    drain level with K above and below, or the top layer alone with the
    barrier at the interface).

    Examples
    --------
    >>> ernst_layer_caution(drain_depth=1.0, interface_depth=1.5, k_top=2.0,
    ...                     k_bottom=0.5)[:40]
    'Ernst outside the case it was built for:'
    >>> ernst_layer_caution(drain_depth=1.0, interface_depth=1.5, k_top=0.5,
    ...                     k_bottom=2.0) is None
    True
    """
    if interface_depth is None:
        return None
    zd, zi, kt, kb = as_float_arrays(drain_depth, interface_depth, k_top, k_bottom)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = kb / kt
    hit = (zi > zd) & (ratio >= 0.1) & (ratio < 1.0)
    if not np.any(hit):
        return None
    r = float(np.min(ratio[hit]))
    return ("Ernst outside the case it was built for: the drains lie in a top layer "
            f"{1.0 / r:.3g} times more permeable than the layer below (K_b/K_t = {r:.2g}); "
            "Ernst's geometry factor is tabulated for K_b/K_t of 1 to 50, and the values "
            "used below 1 are drainplan's own interpolation, not a published table. "
            "Use Hooghoudt instead (interface at drain level with K above and below, or "
            "the top layer alone with the barrier at the interface depth).")
