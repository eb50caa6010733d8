"""Season simulation: the water table between parallel drains over a weather record.

Two models, both vectorised over cases (spacings, and any other input given as
an array of the same length), both SI (m, d) and exact in their water balance:

* :func:`boussinesq_simulation` -- the non-linear Boussinesq (Dupuit-Forchheimer)
  equation on the half spacing with transmissivity ``K2 d + K1 h`` (d the
  equivalent depth), solved with an implicit finite-volume scheme;
* :func:`de_zeeuw_hellinga_simulation` -- the linear reservoir of de Zeeuw and
  Hellinga, with the reaction factor from K, d, mu and L (in
  :mod:`drainplan.spacing.reservoir`).

Both share the surface rules (:func:`et_reduction_factor`), the result type
(:class:`SimulationResult`) and :func:`sew30`.

Surface rules (the same in both models)
---------------------------------------
* Recharge is rain minus actual evapotranspiration (ET) of the same day; there
  is no separate store for the unsaturated zone.
* ET is met first from the day's rain; the rest of the demand (PET - rain, when
  positive) is drawn from the water table at the rate (PET - rain) x f, with
  f = 1 while the water table stands in the root zone (depth <=
  ``root_zone_depth``) and f falling linearly to 0 as it drops from the root
  zone to drain level (:func:`et_reduction_factor`). Where the root zone
  reaches the drains, ET is cut only by the water available above them.
* When the water table reaches the surface, what cannot be stored leaves as
  surface runoff on the same day (no ponding storage is kept).
* The water table does not fall below drain level (the drains do not
  infiltrate, and ET takes only water stored above the drains).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .._validate import require_nonnegative, require_positive, require_radius_below_barrier
from ..errors import InputError
from .equivalent_depth import EQUIVALENT_DEPTH_METHODS, equivalent_depth

__all__ = ["SimulationResult", "boussinesq_simulation", "et_reduction_factor", "sew30",
           "porosity_storage"]


@dataclass(frozen=True)
class SimulationResult:
    """Daily (per time step) series of a season simulation, one row per case.

    All depths of water are per unit field area [m] summed over each time step;
    divide by the step length for rates.

    Attributes
    ----------
    model : str
        ``"boussinesq"`` or ``"reservoir"``.
    spacing : numpy.ndarray, shape (n,)
        Drain spacing of each case [m].
    equivalent_depth : numpy.ndarray, shape (n,)
        Equivalent depth d used for each case [m].
    time_step : float
        Length of one reported step [d].
    water_table_depth : numpy.ndarray, shape (n, T)
        Midway water-table depth below the surface at the end of each step [m].
    rain, pet : numpy.ndarray, shape (T,)
        Rain and potential ET of each step [m].
    et, drain, runoff : numpy.ndarray, shape (n, T)
        Actual ET, drain outflow and surface runoff of each step [m].
    storage : numpy.ndarray, shape (n, T + 1)
        Water stored above drain level, per unit area, at the start and the end
        of every step [m].
    extra : dict
        Model details (reaction factor, cells, sub-steps, ...).
    """

    model: str
    spacing: np.ndarray
    equivalent_depth: np.ndarray
    time_step: float
    water_table_depth: np.ndarray
    rain: np.ndarray
    pet: np.ndarray
    et: np.ndarray
    drain: np.ndarray
    runoff: np.ndarray
    storage: np.ndarray
    extra: dict = field(default_factory=dict)

    def balance_error(self):
        """Rain - ET - drain - runoff - storage change over the record, per case [m]."""
        return (self.rain.sum() - self.et.sum(axis=1) - self.drain.sum(axis=1)
                - self.runoff.sum(axis=1) - (self.storage[:, -1] - self.storage[:, 0]))


def et_reduction_factor(water_table_depth, *, root_zone_depth, drain_depth):
    """Actual over potential ET as the water table drops below the root zone.

    Parameters
    ----------
    water_table_depth : array_like
        Water-table depth below the surface [m].
    root_zone_depth : array_like
        Depth down to which the water table leaves ET unreduced [m], > 0.
    drain_depth : array_like
        Drain depth [m]; the factor reaches 0 at drain level.

    Returns
    -------
    numpy.ndarray or float
        Factor f [-], 1 down to the root-zone depth, linear to 0 at drain level
        (0 below it); where the root zone reaches the drains, 1 above them.

    Notes
    -----
    A documented simple rule (linear reduction between two depths), of the kind
    used in water-table management models; the depths are inputs, not fitted
    values [PRACTICE]::

        f = clip((z_d - z) / (z_d - z_r), 0, 1)       for z_r < z_d

    Examples
    --------
    >>> [round(float(v), 3) for v in et_reduction_factor([0.2, 0.5, 0.8, 1.0], root_zone_depth=0.4,
    ...                                                   drain_depth=1.0)]
    [1.0, 0.833, 0.333, 0.0]
    """
    z, zr, zd = np.broadcast_arrays(*(np.asarray(v, float) for v in
                                      (water_table_depth, root_zone_depth, drain_depth)))
    band = zd - zr
    with np.errstate(divide="ignore", invalid="ignore"):
        f = np.where(band > 0, np.clip((zd - z) / np.where(band > 0, band, 1.0), 0.0, 1.0),
                     np.where(z < zd, 1.0, 0.0))
    return f[()] if f.ndim == 0 else f


def sew30(water_table_depth, *, axis=-1, threshold=0.30):
    """Sum of excess water within 30 cm of the surface, SEW30 [cm d].

    Parameters
    ----------
    water_table_depth : array_like
        Daily water-table depth below the surface (midway between drains) [m].
    axis : int
        Axis of the days.
    threshold : float
        Depth of the index [m]; 0.30 for SEW30.

    Returns
    -------
    numpy.ndarray or float
        SEW30 [cm d] (its customary unit: cm of water-table height above
        30 cm depth, summed over days).

    Notes
    -----
    ``SEW30 = sum_i max(0, 30 - x_i)``, x_i the water-table depth in cm on day i
    (Sieben 1964). One value per day is assumed; for sub-daily series
    multiply by the step length.

    References
    ----------
    .. [1] Sieben, W.H. (1964). Het verband tussen ontwatering en opbrengst bij
       de jonge zavelgronden in de Noordoostpolder. Van Zee tot Land 40,
       Tjeenk Willink, Zwolle.

    Examples
    --------
    >>> float(sew30([0.10, 0.25, 0.40, 0.0]))
    55.0
    """
    z = np.asarray(water_table_depth, float)
    out = np.maximum(0.0, 100.0 * (threshold - z)).sum(axis=axis)
    return out[()] if np.ndim(out) == 0 else out


def _porosity_profile(profile):
    """(bottoms, values) of a layered drainable porosity, checked."""
    try:
        bottoms = np.asarray([float(b) for b, _ in profile])
        values = np.asarray([float(m) for _, m in profile])
    except (TypeError, ValueError):
        raise InputError("porosity profile must be pairs of (layer bottom depth [m], "
                         "drainable porosity [-])", param="porosity_profile") from None
    if bottoms.size == 0 or np.any(~np.isfinite(bottoms)) or np.any(np.diff(bottoms) <= 0) \
            or bottoms[0] <= 0:
        raise InputError("porosity profile layer bottoms must be positive depths in "
                         "increasing order", param="porosity_profile")
    if np.any(~np.isfinite(values)) or np.any(values <= 0) or np.any(values >= 1):
        raise InputError("drainable porosity of every layer must lie between 0 and 1",
                         param="porosity_profile")
    return bottoms, values


def porosity_storage(water_table_depth, *, profile):
    """Air-filled (drainable) volume above a water table with layered porosity [m].

    Parameters
    ----------
    water_table_depth : array_like
        Depth of the water table below the surface [m], >= 0.
    profile : sequence of (bottom, mu)
        Layers from the surface down: bottom depth [m] and drainable porosity
        [-]; the last value continues below the last bottom.

    Returns
    -------
    numpy.ndarray or float
        ``V(z) = integral_0^z mu(zeta) dzeta`` [m]: water released when the
        water table falls from the surface to depth z.

    Examples
    --------
    >>> float(porosity_storage(1.0, profile=[(0.4, 0.1), (2.0, 0.05)]))
    0.07
    """
    bottoms, values = _porosity_profile(profile)
    z = np.asarray(water_table_depth, float)
    knots = np.concatenate([[0.0], bottoms])
    cum = np.concatenate([[0.0], np.cumsum(values * np.diff(knots))])
    out = np.interp(z, knots, cum) + np.maximum(z - knots[-1], 0.0) * values[-1]
    return out[()] if out.ndim == 0 else out


def _cases(spacing, k_below, k_above, depth_to_barrier, drain_radius, drain_depth,
           drainable_porosity, root_zone_depth, ed_method):
    """Broadcast and check the per-case inputs; return a dict of (n,) arrays."""
    if ed_method not in EQUIVALENT_DEPTH_METHODS:
        raise InputError(f"equivalent-depth method {ed_method!r} is unknown; choose one of "
                         + ", ".join(EQUIVALENT_DEPTH_METHODS), param="equivalent_depth_method")
    if k_above is None:
        k_above = k_below
    arrays = [np.atleast_1d(np.asarray(v, float)) for v in
              (spacing, k_below, k_above, depth_to_barrier, drain_radius, drain_depth,
               root_zone_depth)]
    try:
        L, kb, ka, D, r0, zd, zr = np.broadcast_arrays(*arrays)
    except ValueError:
        raise InputError("case inputs (spacing, K, depths) must be scalars or arrays of one "
                         "length", param="spacing") from None
    if L.ndim != 1:
        raise InputError("spacing must be a number or a 1-D array", param="spacing")
    require_positive(L, "spacing", "drain spacing", "m")
    require_positive(kb, "k_below", "hydraulic conductivity below drain level", "m/d")
    require_positive(ka, "k_above", "hydraulic conductivity above drain level", "m/d")
    require_nonnegative(D, "depth_to_barrier", "depth to the barrier below drain level", "m")
    require_positive(r0, "drain_radius", "drain radius", "m")
    require_radius_below_barrier(D, r0)
    require_positive(zd, "drain_depth", "drain depth", "m")
    require_positive(zr, "root_zone_depth", "root-zone depth", "m")
    if np.any(L <= np.pi * r0):
        raise InputError("drain spacing must be wider than pi times the drain radius",
                         param="spacing")
    out = dict(L=L.copy(), kb=kb.copy(), ka=ka.copy(), D=D.copy(), r0=r0.copy(),
               zd=zd.copy(), zr=zr.copy())
    out["d"] = np.atleast_1d(equivalent_depth(L, D, r0, method=ed_method))
    if drainable_porosity is not None:
        mu = np.broadcast_to(np.atleast_1d(np.asarray(drainable_porosity, float)),
                             L.shape).copy()
        if np.any(~np.isfinite(mu)) or np.any(mu <= 0) or np.any(mu >= 1):
            raise InputError("drainable porosity must lie between 0 and 1", 
                             param="drainable_porosity")
        out["mu"] = mu
    return out


def _weather(rain, pet):
    rain = np.asarray(rain, float)
    pet = np.asarray(pet, float)
    if rain.ndim != 1 or pet.shape != rain.shape or rain.size == 0:
        raise InputError("rain and potential ET must be 1-D series of the same length",
                         param="rain")
    require_nonnegative(rain, "rain", "rain", "m")
    require_nonnegative(pet, "pet", "potential ET", "m")
    return rain, pet


def boussinesq_simulation(*, spacing, rain, pet, k_below, depth_to_barrier, drain_radius,
                          drain_depth, drainable_porosity=None, porosity_profile=None,
                          k_above=None, root_zone_depth=0.5, time_step=1.0, substeps=1,
                          cells=24, initial_depth=None, spin_up=0,
                          equivalent_depth_method="series"):
    """Water table between parallel drains over a weather record (non-linear Boussinesq).

    Parameters
    ----------
    spacing : array_like, shape (n,) or scalar
        Drain spacing L of each case [m].
    rain, pet : array_like, shape (T,)
        Rain and potential evapotranspiration in each time step [m].
    k_below : array_like
        Conductivity K2 below drain level [m/d] (scalar or one per case).
    depth_to_barrier : array_like
        Barrier depth below drain level D [m].
    drain_radius : array_like
        Effective drain radius r0 [m].
    drain_depth : array_like
        Drain depth below the surface [m]; the water table cannot rise above the
        surface.
    drainable_porosity : array_like, optional
        Constant drainable porosity mu [-] (scalar or one per case).
    porosity_profile : sequence of (bottom, mu), optional
        Drainable porosity varying with the water-table depth: layers from the
        surface down, bottom depth [m] and mu [-] (instead of a constant).
    k_above : array_like, optional
        Conductivity K1 above drain level [m/d]; default ``k_below``.
    root_zone_depth : array_like
        Water-table depth down to which ET is not reduced [m]
        (:func:`et_reduction_factor`).
    time_step : float
        Length of one step of ``rain``/``pet`` [d].
    substeps : int
        Implicit steps per weather step (rain and PET spread evenly).
    cells : int
        Finite-volume nodes on the half spacing (besides the drain node).
    initial_depth : float or array_like, optional
        Initial water-table depth [m]: one number (a flat water table), or an
        array of shape (n, cells) at the nodes ``x_j = j L / (2 cells)``,
        j = 1 ... cells; default drain level (no water above the drains).
    spin_up : int
        Weather steps from the start of the record run first, unreported, to set
        the initial state (after ``initial_depth``).
    equivalent_depth_method : {"series", "moody"}

    Returns
    -------
    SimulationResult
        ``model="boussinesq"``; storage is ``V(z_d) - V(z)`` summed over the
        half spacing (``mu h`` for a constant mu).

    Raises
    ------
    drainplan.errors.InputError
        For a non-positive K, spacing or depth, a porosity outside (0, 1), both
        or neither porosity input, or bad weather series.

    Notes
    -----
    Equation (14.1 of the method notes; Boussinesq's equation with Hooghoudt's
    equivalent depth), h the height above drain level, x from the drain::

        mu(h) dh/dt = d/dx [ (K2 d + K1 h) dh/dx ] + R(t),
        h(0, t) = 0,   dh/dx (L/2, t) = 0

    Finite volumes: nodes ``x_j = j L / (2 M)``, faces half-way, face
    transmissivity ``K2 d + K1 (h_j + h_j+1) / 2`` taken at the start of each
    step (linearly implicit), storage and ET taken at the end of the step
    (iterated on the layered storage and the ET band), so the scheme is
    stable at any step. Under constant
    recharge the discrete steady state satisfies ``q L^2 = 8 K2 d h + 4 K1 h^2``
    exactly (the face sums are midpoint rules of a linear function), i.e.
    Hooghoudt's equation. Drain outflow is the flux through the first face plus
    the rain on the half cell over the drain. Every term of the water balance
    comes from the same fluxes, so rain = ET + drain + runoff + storage change
    to rounding. Surface runoff and the drain-level floor are imposed by an
    active set (cells pinned at the bound; their excess is runoff, their
    deficit reduces ET).

    References
    ----------
    .. [1] Boussinesq, J. (1904). Recherches theoriques sur l'ecoulement des nappes
       d'eau infiltrees dans le sol et sur le debit des sources. Journal de
       Mathematiques Pures et Appliquees 10, 5-78.
    .. [2] Hooghoudt, S.B. (1940). Bijdragen tot de kennis van eenige
       natuurkundige grootheden van den grond 7, 's-Gravenhage.
    .. [3] van der Molen, W.H. and Wesseling, J. (1991). Agricultural Water
       Management 19, 1-16.
    .. [4] Ritzema, H.P. (1994). Subsurface flow to drains. Ch. 8 in Drainage
       Principles and Applications, ILRI Publication 16, 2nd ed., Wageningen.

    Examples
    --------
    >>> r = boussinesq_simulation(spacing=[20.0, 40.0], rain=[0.03, 0.0, 0.0],
    ...                           pet=[0.0, 0.0, 0.0], k_below=0.5, depth_to_barrier=2.0,
    ...                           drain_radius=0.1, drain_depth=1.0, drainable_porosity=0.06)
    >>> [round(float(v), 2) for v in r.water_table_depth[:, -1]]
    [0.72, 0.55]
    >>> bool(abs(r.balance_error()).max() < 1e-12)
    True
    """
    rain, pet = _weather(rain, pet)
    if (drainable_porosity is None) == (porosity_profile is None):
        raise InputError("give a constant drainable porosity or a porosity profile (one of "
                         "the two)", param="drainable_porosity")
    c = _cases(spacing, k_below, k_above, depth_to_barrier, drain_radius, drain_depth,
               drainable_porosity, root_zone_depth, equivalent_depth_method)
    prof = _porosity_profile(porosity_profile) if porosity_profile is not None else None
    dt_w = float(time_step)
    if not (np.isfinite(dt_w) and dt_w > 0):
        raise InputError("time step must be greater than 0 d", param="time_step")
    substeps, cells, spin_up = int(substeps), int(cells), int(spin_up)
    if substeps < 1 or cells < 2 or spin_up < 0:
        raise InputError("substeps must be >= 1, cells >= 2 and spin_up >= 0", param="cells")
    n, M = c["L"].size, cells
    zd = c["zd"]
    h_surf = zd                         # surface height above drain level [m]
    if initial_depth is None:
        state = np.zeros((n, M))
    else:
        z0 = np.asarray(initial_depth, float)
        if z0.ndim not in (0, 2) or (z0.ndim == 2 and z0.shape != (n, M)):
            raise InputError(f"initial water-table depth must be one number or an array of "
                             f"shape ({n}, {M}) (cases x cells)", param="initial_depth")
        if np.any(~np.isfinite(z0)) or np.any(z0 < 0):
            raise InputError("initial water-table depth must be 0 m or deeper",
                             param="initial_depth")
        state = np.clip(zd[:, None] - z0, 0.0, None) * np.ones((n, M))
    sim = _Boussinesq(c, M, prof, dt_w / substeps)
    if spin_up:
        k = min(spin_up, rain.size)
        state = sim.run(state, rain[:k] / dt_w, pet[:k] / dt_w, substeps, h_surf)[0]
    state, out = sim.run(state, rain / dt_w, pet / dt_w, substeps, h_surf)
    wtd, drain, runoff, et, storage = out
    return SimulationResult(
        model="boussinesq", spacing=c["L"], equivalent_depth=c["d"], time_step=dt_w,
        water_table_depth=wtd, rain=rain, pet=pet, et=et, drain=drain, runoff=runoff,
        storage=storage, extra={"cells": M, "substeps": substeps, "spin_up": spin_up,
                                "max_active_set_iterations": sim.max_iter})


#: Heights this far below drain level [m] are rounding, not a water table below the
#: drains (the fast path keeps them; the water balance stays exact).
_FLOOR_TOLERANCE = 1e-12


class _Boussinesq:
    """Implicit finite-volume stepper for all cases at once (private)."""

    def __init__(self, c, M, prof, dt):
        from scipy.linalg import lapack

        self.gtsv = lapack.dgtsv
        self.ptsv = lapack.dptsv     # symmetric positive definite (the fast path's matrix)
        n = c["L"].size
        self.n, self.M, self.dt = n, M, dt
        half = c["L"] / 2.0
        self.half = half
        self.dx = half / M                                     # (n,)
        w = np.ones((n, M)) * self.dx[:, None]
        w[:, -1] *= 0.5                                        # half cell at midway
        self.w = w
        self.w0 = self.dx / 2.0                                # half cell over the drain
        self.kbd = c["kb"] * c["d"]                            # K2 d
        self.ka = c["ka"]
        self.zd = c["zd"]
        self.hr = np.maximum(c["zd"] - c["zr"], 0.0)           # top of the ET band above drains
        self.prof = prof
        if prof is None:
            self.mu = c["mu"]
        else:
            bottoms, values = prof
            self.knots = np.concatenate([[0.0], bottoms])
            self.cum = np.concatenate([[0.0], np.cumsum(values * np.diff(self.knots))])
            self.values = values
            self.v_top = self._vz(self.zd)                     # V at drain level (n,)
        self.max_iter = 0

    # layered storage: stored water above drain level, V(h) = Vz(zd) - Vz(zd - h)
    def _vz(self, z):
        return np.interp(z, self.knots, self.cum) + np.maximum(z - self.knots[-1], 0.0) \
            * self.values[-1]

    def _mu_at(self, z):
        i = np.searchsorted(self.knots[1:], z, side="left")
        return self.values[np.minimum(i, self.values.size - 1)]

    def storage_of(self, h):
        if self.prof is None:
            return self.mu[:, None] * h
        return self.v_top[:, None] - self._vz(self.zd[:, None] - h)

    #: Weather steps per block of the record: the states of a block are kept and its
    #: fluxes, ET and storage computed afterwards in a few array operations.
    BLOCK = 256

    def run(self, h, rain_rate, pet_rate, substeps, h_surf):
        T = rain_rate.size
        n, M, dt = self.n, self.M, self.dt
        w, w0, dx, half = self.w, self.w0, self.dx, self.half
        hs = h_surf[:, None]
        self.hs = hs
        S = substeps
        h_mid = np.empty((n, T))
        drain = np.empty((n, T))
        runoff = np.zeros((n, T))
        et = np.empty((n, T))
        storage = np.empty((n, T + 1))
        storage[:, 0] = (self.storage_of(h) * w).sum(axis=1) / half
        # rain after ET met from the day's rain, and the PET left for the water table
        direct = np.minimum(rain_rate, pet_rate)
        r_all, p_all = rain_rate - direct, pet_rate - direct
        et[:] = direct * (dt * S)
        drain[:] = (dt * w0 / half)[:, None] * (r_all * S)      # rain on the drain's half cell
        # fast path (constant mu, no bound reached): a handful of array operations per step
        fast = self.prof is None
        cdt = (dt / dx)[:, None]
        a0 = cdt * self.kbd[:, None]              # dt/dx x K2 d
        a1 = cdt * 0.5 * self.ka[:, None]         # dt/dx x K1 / 2
        dtw = dt * w
        wmu = w * self.mu[:, None] if fast else None
        hr = self.hr[:, None]
        inv_hr = 1.0 / np.where(hr > 0, hr, np.inf)
        dtw_half = dtw / half[:, None]
        solve = self.ptsv
        hs_min = float(hs.min())
        B = self.BLOCK
        K = B * S
        # states of one block: column 0 the drain node (h = 0), then the M nodes
        H = np.zeros((K + 1, n, M + 1))
        H[0, :, 1:] = h
        cl = np.zeros((n, M + 1))                 # dt/dx x face transmissivity, j-1/2
        ctl, ctr = cl[:, :M], cl[:, 1:]
        tmp = np.empty((n, M))
        # the system's diagonal, right-hand side and off-diagonal, and their flat views
        # (what the solver takes; it overwrites them)
        diag_t, rhs_t, neg = np.empty((n, M)), np.empty((n, M)), np.empty((n, M))
        diag_f, rhs_f, off = diag_t.reshape(-1), rhs_t.reshape(-1), neg.reshape(-1)[:-1]
        d_band, b_band, e_band = np.empty(n * M), np.empty(n * M), np.empty(n * M - 1)
        d_band2, b_band2 = d_band.reshape(n, M), b_band.reshape(n, M)
        vmax, vmin, vany = np.maximum.reduce, np.minimum.reduce, np.logical_or.reduce
        for t0 in range(0, T, B):
            nt = min(B, T - t0)
            slow = {}                             # substep -> (flux, runoff, ET) of _step
            bands = {}                            # substep -> band, where it is not h < hr
            k = 0
            for t in range(t0, t0 + nt):
                r, p = float(r_all[t]), float(p_all[t])
                if fast:
                    pin = p * inv_hr              # in the band ET = pin h
                    dtw_pin, dtw_p = dtw * pin, dtw * p
                    dtw_r = dtw * r - dtw_p
                for _ in range(S):
                    hb = H[k]
                    h = hb[:, 1:]
                    h_new = None
                    if fast:
                        np.add(h, hb[:, :-1], out=tmp)
                        np.multiply(a1, tmp, out=tmp)
                        np.add(a0, tmp, out=ctl)
                        np.add(ctl, ctr, out=diag_t)
                        np.add(diag_t, wmu, out=diag_t)
                        np.multiply(wmu, h, out=rhs_t)
                        np.add(rhs_t, dtw_r, out=rhs_t)
                        np.negative(ctr, out=neg)
                        if p == 0.0:
                            x = solve(diag_f, off, rhs_f, 1, 1, 1)[2]
                        else:
                            new_band = h < hr
                            for it in range(8):    # ET = p min(1, h/hr) at the new state
                                band = new_band    # the band this solve uses (and the ET sum)
                                np.multiply(band, dtw_pin, out=d_band2)
                                np.add(d_band2, diag_t, out=d_band2)
                                np.multiply(band, dtw_p, out=b_band2)
                                np.add(b_band2, rhs_t, out=b_band2)
                                np.copyto(e_band, off)
                                x = solve(d_band, e_band, b_band, 1, 1, 1)[2]
                                new_band = x.reshape(n, M) < hr
                                if not vany(new_band != band, axis=None):
                                    break
                            else:
                                bands[k] = band
                        h_new = x.reshape(n, M)
                        # bounds: the surface, and drain level (rounding below it, a few
                        # 1e-18 m where the water table rests on the drains, is let stand)
                        if not ((vmax(x) <= hs_min or vmax(h_new - hs, axis=None) <= 0.0)
                                and vmin(x) >= -_FLOOR_TOLERANCE):
                            h_new = None
                    if h_new is None:
                        bands.pop(k, None)
                        h_new, q_d, ro, e = self._step(h.copy(), r, p)
                        slow[k] = (q_d, ro / half, e / half)
                    H[k + 1, :, 1:] = h_new
                    k += 1
            self._block(H, k, t0, nt, S, slow, bands, p_all, inv_hr, a0, a1, dtw_half, wmu,
                        hr, half, h_mid, drain, runoff, et, storage)
            H[0] = H[k]
        return H[0, :, 1:].copy(), (self.zd[:, None] - h_mid, drain, runoff, et, storage)

    def _block(self, H, k, t0, nt, S, slow, bands, p_all, inv_hr, a0, a1, dtw_half, wmu, hr,
               half, h_mid, drain, runoff, et, storage):
        """Fluxes, ET and storage of a block of ``k`` substeps from its states ``H``."""
        n = self.n
        old, new = H[:k, :, 1:], H[1:k + 1, :, 1:]
        p = np.repeat(p_all[t0:t0 + nt], S)[:, None, None]                  # (k, 1, 1)
        # flow through the first face: dt/dx x (K2 d + K1 h_1 / 2) x h_1 (the drain node 0)
        flux = (a0[:, 0] + a1[:, 0] * old[:, :, 0]) * new[:, :, 0]          # (k, n)
        band = new < hr
        for j, b in bands.items():
            band[j] = b
        e = ((p + band * ((p * inv_hr) * new - p)) * dtw_half).sum(axis=2)   # (k, n)
        ro = np.zeros((k, n))
        for j, (q_d, r_j, e_j) in slow.items():
            flux[j], ro[j], e[j] = q_d, r_j, e_j
        rows = slice(t0, t0 + nt)
        drain[:, rows] += flux.reshape(nt, S, n).sum(axis=1).T / half[:, None]
        runoff[:, rows] = ro.reshape(nt, S, n).sum(axis=1).T
        et[:, rows] += e.reshape(nt, S, n).sum(axis=1).T
        ends = H[S:k + 1:S, :, 1:]                                          # (nt, n, M)
        h_mid[:, rows] = ends[:, :, -1].T
        if wmu is not None:
            storage[:, t0 + 1:t0 + nt + 1] = (wmu * ends).sum(axis=2).T / half[:, None]
        else:
            storage[:, t0 + 1:t0 + nt + 1] = (self.storage_of(ends) * self.w).sum(
                axis=2).T / half[:, None]

    def _step(self, h, r, p):
        """One implicit step with the layered storage and the bounds (active set)."""
        n, M, dt = self.n, self.M, self.dt
        w, dx = self.w, self.dx
        hs, hr = self.hs, self.hr[:, None]
        const_mu = self.prof is None
        cdt = (dt / dx)[:, None]
        hl = np.concatenate([np.zeros((n, 1)), h[:, :-1]], axis=1)
        tl = self.kbd[:, None] + self.ka[:, None] * 0.5 * (h + hl)      # face j-1/2
        ctl = cdt * tl
        ctr = np.empty_like(ctl)
        ctr[:, :-1] = ctl[:, 1:]
        ctr[:, -1] = 0.0
        band = h < hr                                           # ET reduced in these cells
        inv_hr = 1.0 / np.where(hr > 0, hr, np.inf)
        off = -ctr.ravel()[:-1]
        h_old = h
        s_old = None if const_mu else self.storage_of(h_old)
        h_iter = h_old
        pinned_hi = np.zeros((n, M), bool)
        pinned_lo = np.zeros((n, M), bool)
        for it in range(30):
            e_imp = band * (p * inv_hr)                         # ET = e_imp h + e_exp
            e_exp = p - band * p
            diag0 = ctl + ctr + dt * w * e_imp
            rhs0 = dt * w * (r - e_exp)
            if const_mu:
                wmu = w * self.mu[:, None]
                diag = diag0 + wmu
                rhs = rhs0 + wmu * h_old
            else:
                mu_it = self._mu_at(self.zd[:, None] - h_iter)
                diag = diag0 + w * mu_it
                rhs = rhs0 + w * (mu_it * h_iter - (self.storage_of(h_iter) - s_old))
            pinned = pinned_hi | pinned_lo
            if pinned.any():
                diag = np.where(pinned, 1.0, diag)
                rhs = np.where(pinned_hi, hs, np.where(pinned_lo, 0.0, rhs))
                pf = pinned.ravel()
                du = off.copy()
                dl = off.copy()
                du[pf[:-1]] = 0.0
                dl[pf[1:]] = 0.0
            else:
                du, dl = off, off
            h_new = self.gtsv(dl, diag.ravel(), du, rhs.ravel())[3].reshape(n, M)
            changed = False
            over = (h_new > hs) & ~pinned
            under = (h_new < -_FLOOR_TOLERANCE) & ~pinned
            if over.any() or under.any():
                pinned_hi |= over
                pinned_lo |= under
                changed = True
            if pinned.any():
                exc = self._excess(h_new, h_old, s_old, tl, r, e_imp, e_exp, cdt)
                release = (pinned_hi & (exc < 0)) | (pinned_lo & (exc > 0))
                if release.any():
                    pinned_hi &= ~release
                    pinned_lo &= ~release
                    changed = True
            if p > 0 and not changed:
                new_band = h_new < hr
                if not np.array_equal(new_band, band):
                    band = new_band
                    changed = True
            if not const_mu and not changed and not np.array_equal(
                    self._mu_at(self.zd[:, None] - h_new), self._mu_at(self.zd[:, None] - h_iter)):
                changed = True
            h_iter = h_new
            if not changed:
                break
        self.max_iter = max(self.max_iter, it + 1)
        h = h_new
        et_step = dt * (w * (e_exp + e_imp * h)).sum(axis=1)       # nominal ET
        ro_step = np.zeros(n)
        if (pinned_hi | pinned_lo).any():
            exc = self._excess(h, h_old, s_old, tl, r, e_imp, e_exp, cdt)
            ro_step = np.where(pinned_hi, exc, 0.0).sum(axis=1)
            et_step = et_step + np.where(pinned_lo, exc, 0.0).sum(axis=1)
        # drain: the flux through the first face (the rain on the drain's half cell is
        # added by the caller)
        q_face = dt * tl[:, 0] * h[:, 0] / dx
        return h, q_face, ro_step, et_step

    def _excess(self, h, h_old, s_old, tl, r, e_imp, e_exp, cdt):
        """Per-cell water arriving in the step that the cell did not store [m2 per m]:
        recharge + inflow - outflow - storage change (0 where the equations hold)."""
        dt, w = self.dt, self.w
        hl = np.concatenate([np.zeros((self.n, 1)), h[:, :-1]], axis=1)
        g_left = cdt * tl * (h - hl)                  # dt x flow from node j toward the drain
        g_right = np.zeros_like(g_left)
        g_right[:, :-1] = g_left[:, 1:]
        if s_old is None:
            ds = self.mu[:, None] * (h - h_old)
        else:
            ds = self.storage_of(h) - s_old
        return dt * w * (r - e_exp - e_imp * h) + g_right - g_left - w * ds
