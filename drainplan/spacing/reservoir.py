"""de Zeeuw-Hellinga linear reservoir: drain discharge and midway head under variable recharge.

The fast, textbook alternative to the Boussinesq simulation
(:func:`~drainplan.spacing.simulation.boussinesq_simulation`), with the same
surface rules and the same result type.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from .simulation import SimulationResult, _cases, _weather

__all__ = ["RESERVOIR_SHAPE_FACTOR", "de_zeeuw_hellinga_reaction_factor",
           "de_zeeuw_hellinga_simulation"]

#: Ratio of the mean water-table height to the midway height in the reservoir
#: relation q = 0.8 mu alpha h (published 0.8; 8/pi^2 = 0.81 would reproduce the
#: linear Hooghoudt equation exactly at steady state).
RESERVOIR_SHAPE_FACTOR = 0.8


def de_zeeuw_hellinga_reaction_factor(*, k, equivalent_depth, drainable_porosity, spacing):
    """Reaction factor alpha = pi^2 K d / (mu L^2) of the de Zeeuw-Hellinga reservoir.

    Parameters
    ----------
    k : array_like
        Conductivity of the flow region below drain level [m/d].
    equivalent_depth : array_like
        Hooghoudt's equivalent depth d [m].
    drainable_porosity : array_like
        mu [-].
    spacing : array_like
        Drain spacing L [m].

    Returns
    -------
    numpy.ndarray or float
        alpha [1/d]; 1/alpha is Kraijenhoff van de Leur's reservoir coefficient.

    References
    ----------
    .. [1] de Zeeuw, J.W. and Hellinga, F. (1958). Neerslag en afvoer.
       Landbouwkundig Tijdschrift 70, 405-422.
    .. [2] Kraijenhoff van de Leur, D.A. (1958). A study of non-steady groundwater
       flow with special reference to a reservoir coefficient. De Ingenieur 70,
       B87-B94.

    Examples
    --------
    >>> round(float(de_zeeuw_hellinga_reaction_factor(k=0.5, equivalent_depth=3.0,
    ...                                                drainable_porosity=0.05,
    ...                                                spacing=40.0)), 6)
    0.185055
    """
    K, d, mu, L = np.broadcast_arrays(*(np.asarray(v, float) for v in
                                        (k, equivalent_depth, drainable_porosity, spacing)))
    a = np.pi ** 2 * K * d / (mu * L * L)                       # Eq. (5) reaction factor
    return a[()] if a.ndim == 0 else a


def de_zeeuw_hellinga_simulation(*, spacing, rain, pet, k_below, depth_to_barrier,
                                 drain_radius, drain_depth, drainable_porosity,
                                 k_above=None, root_zone_depth=0.5, time_step=1.0,
                                 initial_depth=None, spin_up=0,
                                 shape_factor=RESERVOIR_SHAPE_FACTOR,
                                 equivalent_depth_method="series"):
    """Drain discharge and midway water table over a weather record (linear reservoir).

    Parameters
    ----------
    spacing, rain, pet, k_below, depth_to_barrier, drain_radius, drain_depth
        As in :func:`~drainplan.spacing.simulation.boussinesq_simulation`.
    drainable_porosity : array_like
        Constant drainable porosity mu [-].
    k_above : array_like, optional
        Not used by the linear model (flow above drain level is ignored); accepted
        so that both models take the same site inputs.
    root_zone_depth : array_like
        Depth down to which ET is not reduced [m]; the factor uses the midway
        depth at the start of each step.
    time_step : float
        Step length [d] (recharge constant within a step).
    initial_depth : float, optional
        Initial midway water-table depth [m]; default drain level.
    spin_up : int
        Steps from the start of the record run first, unreported.
    shape_factor : float
        c in ``W = c mu h`` (stored water W against midway height h); the
        published 0.8.
    equivalent_depth_method : {"series", "moody"}

    Returns
    -------
    SimulationResult
        ``model="reservoir"``; ``extra["reaction_factor"]`` [1/d] and
        ``extra["discharge_end"]`` (discharge rate at the end of each step,
        Eq. 5.1) [m/d].

    Notes
    -----
    With recharge R constant during a step of length dt and
    alpha = pi^2 K2 d / (mu L^2) (Eqs. 5.1 and 5.2 of the method notes)::

        q_t = q_(t-1) exp(-alpha dt) + R (1 - exp(-alpha dt))
        h_t = h_(t-1) exp(-alpha dt) + R / (c mu alpha) (1 - exp(-alpha dt))

    so the stored water W = c mu h = q / alpha is a linear reservoir, and the
    drain outflow in a step is ``R dt - (W_t - W_(t-1))``. ET is reduced with
    the midway depth at the start of the step; above the surface the excess
    is runoff; the store does not go below empty (ET is cut instead).

    References
    ----------
    .. [1] de Zeeuw, J.W. and Hellinga, F. (1958). Neerslag en afvoer.
       Landbouwkundig Tijdschrift 70, 405-422.
    .. [2] Ritzema, H.P. (1994). Subsurface flow to drains. Ch. 8 in Drainage
       Principles and Applications, ILRI Publication 16, 2nd ed., Wageningen.

    Examples
    --------
    >>> r = de_zeeuw_hellinga_simulation(spacing=40.0, rain=[0.02, 0.0], pet=[0.0, 0.0],
    ...                                  k_below=0.5, depth_to_barrier=6.0,
    ...                                  drain_radius=0.1, drain_depth=1.5,
    ...                                  drainable_porosity=0.05)
    >>> bool(abs(r.balance_error()).max() < 1e-15)
    True
    """
    rain, pet = _weather(rain, pet)
    if drainable_porosity is None:
        raise InputError("the reservoir model needs a constant drainable porosity",
                         param="drainable_porosity")
    c = _cases(spacing, k_below, k_above, depth_to_barrier, drain_radius, drain_depth,
               drainable_porosity, root_zone_depth, equivalent_depth_method)
    dt = float(time_step)
    if not (np.isfinite(dt) and dt > 0):
        raise InputError("time step must be greater than 0 d", param="time_step")
    cf = float(shape_factor)
    if not (0 < cf <= 1):
        raise InputError("shape factor must lie in (0, 1]", param="shape_factor")
    a = de_zeeuw_hellinga_reaction_factor(k=c["kb"], equivalent_depth=c["d"],
                                          drainable_porosity=c["mu"], spacing=c["L"])
    a = np.atleast_1d(a)
    zd, zr = c["zd"], c["zr"]
    cmu = cf * c["mu"]
    w_max = cmu * zd                                    # stored water with the table at the surface
    if initial_depth is None:
        w = np.zeros_like(a)
    else:
        z0 = float(initial_depth)
        if not (np.isfinite(z0) and z0 >= 0):
            raise InputError("initial water-table depth must be 0 m or deeper",
                             param="initial_depth")
        w = cmu * np.clip(zd - z0, 0.0, None)
    if int(spin_up) > 0:
        k = min(int(spin_up), rain.size)
        w = _run(w, rain[:k], pet[:k], a, dt, cmu, zd, zr, w_max)[0]
    w, out = _run(w, rain, pet, a, dt, cmu, zd, zr, w_max)
    wtd, drain, runoff, et, storage, q_end = out
    return SimulationResult(model="reservoir", spacing=c["L"], equivalent_depth=c["d"],
                            time_step=dt, water_table_depth=wtd, rain=rain, pet=pet, et=et,
                            drain=drain, runoff=runoff, storage=storage,
                            extra={"reaction_factor": a, "shape_factor": cf,
                                   "discharge_end": q_end})


def _run(w, rain, pet, a, dt, cmu, zd, zr, w_max):
    from .simulation import et_reduction_factor

    T, n = rain.size, a.size
    decay = np.exp(-a * dt)
    gain = (1.0 - decay) / a                          # integral of exp(-a s) over the step
    # per-step values kept by rows (time, case): contiguous writes; transposed at the end
    W = np.empty((T + 1, n))
    W[0] = w
    Q = np.empty((T, n))
    E = np.empty((T, n))
    RO = np.empty((T, n))
    band = zd - zr
    plain = bool(np.all(band > 0))
    inv_band = 1.0 / np.where(band > 0, band, 1.0)
    for t in range(T):
        z_old = zd - w / cmu
        direct = min(rain[t], pet[t])                 # ET met from the day's rain first
        f = np.clip((zd - z_old) * inv_band, 0.0, 1.0) if plain else \
            et_reduction_factor(z_old, root_zone_depth=zr, drain_depth=zd)
        e = direct + (pet[t] - direct) * f
        R = (rain[t] - e) / dt                        # recharge rate [m/d]
        w_new = w * decay + R * gain                  # Eq. (5.2) times c mu
        q = R * dt - (w_new - w)                      # outflow in the step
        over = np.maximum(w_new - w_max, 0.0)         # above the surface: runoff
        w_new = w_new - over
        short = np.minimum(w_new, 0.0)                # below empty: less ET
        w_new = w_new - short
        e = e + short
        neg = np.minimum(q, 0.0)                      # drains do not infiltrate: less ET
        RO[t] = over
        Q[t] = q - neg
        E[t] = e + neg
        w = w_new
        W[t + 1] = w
    storage = W.T.copy()
    wtd = zd[:, None] - storage[:, 1:] / cmu[:, None] if np.ndim(zd) else \
        zd - storage[:, 1:] / cmu[:, None]
    q_end = a[:, None] * storage[:, 1:]               # Eq. (5.1): q = alpha W
    runoff, drain, et = RO.T.copy(), Q.T.copy(), E.T.copy()
    return w, (wtd, drain, runoff, et, storage, q_end)
