"""Vectorised bracketed root finding shared by every implicit design equation.

Two solvers work on whole arrays of cases, with the same contract (tolerance in
the unit of the unknown, per-case stopping, NaN and one
:class:`~drainplan.errors.ConvergenceWarning` for cases without a root):

* :func:`bracketed_root` -- Chandrupatla's (1997) method (inverse quadratic
  interpolation safeguarded by bisection; it never leaves the bracket and needs
  no derivative). For equations without derivatives, and as the fallback of
* :func:`newton_root` -- Newton or Halley steps from a close starting estimate.
  With a good estimate it needs one to three evaluations of the equation and
  its derivatives; cases it cannot finish, or whose root falls outside the
  bracket, go to :func:`bracketed_root`.

Cases are processed in blocks of a few ten thousand so the temporaries stay in
the processor cache, and cases that have converged are dropped from the work
arrays.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from .errors import ConvergenceWarning

__all__ = ["RootResult", "bracketed_root", "newton_root"]

#: Cases per block. 4096 float64 values (32 KiB) keep a block's temporaries in
#: cache and below the C library's threshold for allocating with mmap: each
#: temporary of 256 KiB or more costs fresh pages from the kernel, which made
#: blocks of 32768 cases 10x slower per operation on the 2-core test machine
#: (1.8 against 23 ns per case for an exp of a product).
BLOCK = 4096


@dataclass(frozen=True)
class RootResult:
    """Result of :func:`bracketed_root`.

    Attributes
    ----------
    root : numpy.ndarray
        The roots; NaN where there is no sign change in the bracket or the
        solver did not converge.
    converged : numpy.ndarray of bool
        True where ``root`` is within the tolerance.
    iterations : int
        Largest number of iterations any case needed.
    """

    root: np.ndarray
    converged: np.ndarray
    iterations: int


def bracketed_root(func, lo, hi, args=(), *, xtol=1e-6, rtol=1e-12, maxiter=100,
                   what="root"):
    """Find x in [lo, hi] with ``func(x, *args) = 0`` for arrays of cases.

    Parameters
    ----------
    func : callable
        ``func(x, *args) -> array``, evaluated elementwise; it receives 1-D
        arrays (a block of the cases still iterating).
    lo, hi : array_like
        Bracket ends; ``func`` must change sign between them.
    args : tuple of array_like
        Extra arrays, broadcast with ``lo`` and ``hi``.
    xtol : float
        Absolute tolerance on x (in the unit of x; metres for spacings).
    rtol : float
        Relative tolerance on x.
    maxiter : int
        Iteration limit.
    what : str
        Name of the unknown, used in the warning text.

    Returns
    -------
    RootResult

    Warns
    -----
    ConvergenceWarning
        When some cases have no sign change in the bracket or do not converge;
        their root is NaN.

    References
    ----------
    .. [1] Chandrupatla, T.R. (1997). A new hybrid quadratic/bisection
       algorithm for finding the zero of a nonlinear function without using
       derivatives. Advances in Engineering Software 28(3), 145-149.

    Examples
    --------
    >>> r = bracketed_root(lambda x: x**3 - 2.0, 0.0, 5.0, xtol=1e-12)
    >>> round(float(r.root), 9)
    1.25992105
    """
    return _in_blocks(_chandrupatla_block, func, lo, hi, args, xtol, rtol, maxiter, what)


def _in_blocks(block_solver, func, lo, hi, args, xtol, rtol, maxiter, what, total=None,
               stacklevel=3):
    lo, hi, *args = np.broadcast_arrays(np.asarray(lo, float), np.asarray(hi, float),
                                        *[np.asarray(a, float) for a in args])
    shape = lo.shape
    lo, hi = lo.ravel(), hi.ravel()
    args = [a.ravel() for a in args]
    n = lo.size
    root = np.full(n, np.nan)
    converged = np.zeros(n, dtype=bool)
    iterations = 0
    for start in range(0, n, BLOCK):
        sl = slice(start, start + BLOCK)
        r, c, it = block_solver(func, lo[sl], hi[sl], [a[sl] for a in args],
                                xtol, rtol, maxiter)
        root[sl], converged[sl] = r, c
        iterations = max(iterations, it)
    nbad = int(np.count_nonzero(~converged))
    if nbad:
        warnings.warn(
            f"no {what} found for {nbad} of {total or n} case(s) (no sign change in the "
            f"bracket or no convergence in {maxiter} iterations); their result is NaN",
            ConvergenceWarning, stacklevel=stacklevel)
        root[~converged] = np.nan
    return RootResult(root.reshape(shape), converged.reshape(shape), iterations)


def _start(lo, hi, flo, fhi, xtol, rtol):
    """Cases solved by an end of the bracket, and those that need iterating."""
    n = lo.size
    root = np.full(n, np.nan)
    converged = np.zeros(n, dtype=bool)
    tiny = np.abs(hi - lo) <= 0.5 * xtol + 2.0 * rtol * np.abs(hi)
    for end, fend in ((lo, flo), (hi, fhi)):
        hit = ((fend == 0) | tiny) & ~converged
        root[hit] = end[hit]
        converged |= hit
    valid = (np.sign(flo) * np.sign(fhi) < 0) & np.isfinite(flo) & np.isfinite(fhi)
    return root, converged, np.flatnonzero(valid & ~converged)


def _chandrupatla_block(func, lo, hi, args, xtol, rtol, maxiter):
    fa = np.asarray(func(lo, *args), float)
    fb = np.asarray(func(hi, *args), float)
    root, converged, idx = _start(lo, hi, fa, fb, xtol, rtol)
    # (a, b, c): newest point, the point of opposite sign, the previous point
    a, b, fa, fb = hi[idx], lo[idx], fb[idx], fa[idx]
    c, fc = a.copy(), fa.copy()
    args_act = [x[idx] for x in args]
    t = np.full(idx.size, 0.5)
    it = 0
    while idx.size and it < maxiter:
        it += 1
        xt = a + t * (b - a)
        ft = np.asarray(func(xt, *args_act), float)
        same = np.sign(ft) == np.sign(fa)
        c = np.where(same, a, b)
        fc = np.where(same, fa, fb)
        b = np.where(same, b, a)
        fb = np.where(same, fb, fa)
        a, fa = xt, ft
        best_is_a = np.abs(fa) < np.abs(fb)
        xm = np.where(best_is_a, a, b)
        fm = np.where(best_is_a, fa, fb)
        tol = 2.0 * rtol * np.abs(xm) + 0.5 * xtol
        with np.errstate(divide="ignore", invalid="ignore"):
            tl = tol / np.abs(b - a)
            done = (tl > 0.5) | (fm == 0)
            xi = (a - b) / (c - b)
            phi = (fa - fb) / (fc - fb)
            iqi = (phi * phi < xi) & ((1.0 - phi) ** 2 < 1.0 - xi)
            t_iqi = (fa / (fb - fa) * fc / (fb - fc)
                     + (c - a) / (b - a) * fa / (fc - fa) * fb / (fc - fb))
        t = np.where(iqi, t_iqi, 0.5)
        t = np.clip(t, tl, 1.0 - tl)
        t = np.where(np.isfinite(t), t, 0.5)
        if np.any(done):
            root[idx[done]] = xm[done]
            converged[idx[done]] = True
            keep = ~done
            idx = idx[keep]
            a, b, c, fa, fb, fc, t = (v[keep] for v in (a, b, c, fa, fb, fc, t))
            args_act = [v[keep] for v in args_act]
    return root, converged, it


def newton_root(func, x0, lo, hi, args=(), *, fallback=None, xtol=1e-6, rtol=4e-16,
                maxiter=12, what="root"):
    """Find x in [lo, hi] with ``f(x) = 0`` by Newton or Halley steps, for arrays of cases.

    Parameters
    ----------
    func : callable
        ``func(x, *args)`` returning ``(f, f1)`` (Newton) or ``(f, f1, f2)``
        (Halley): the function and its first (and second) derivative,
        elementwise on 1-D arrays (a block of the cases still iterating).
    x0 : array_like
        Starting estimates, inside the bracket (clipped into it).
    lo, hi : array_like
        Bracket ends: the root sought is in [lo, hi]. They are not evaluated.
    args : tuple of array_like
        Extra arrays, broadcast with ``x0``.
    fallback : callable, optional
        ``fallback(x, *args) -> f``: the function alone, for
        :func:`bracketed_root` on the cases Newton could not finish (there the
        bracket is checked; cases without a sign change get NaN and a
        warning). Without it those cases get NaN and a warning here.
    xtol : float
        Absolute tolerance on x (in the unit of x; metres for spacings).
    rtol : float
        Relative tolerance on x.
    maxiter : int
        Newton/Halley iterations before a case goes to the fallback.
    what : str
        Name of the unknown, used in the warning text.

    Returns
    -------
    RootResult

    Notes
    -----
    A case stops when its step is below ``xtol + rtol |x|``, or when its steps
    already shrink at the method's order and the error of the new point that
    this order predicts is below a quarter of the tolerance, with the
    constant of the order taken both from the scale of x (the function
    varies on the scale of x itself) and from the last two steps s and p:
    ``max(s^2 / |x|, |s|^3 / p^2)`` for Newton, ``max(|s|^3 / x^2, s^4 / |p|^3)``
    for Halley; the step must also be at most a quarter of the previous one. A case that
    has not stopped after ``maxiter`` steps (a step that is not finite never
    stops), or whose root is outside [lo, hi], is handed to
    :func:`bracketed_root` (``fallback``), so a case with a root in the
    bracket is never lost.

    References
    ----------
    .. [1] Press, W.H., Teukolsky, S.A., Vetterling, W.T. and Flannery, B.P.
       (2007). Numerical Recipes, 3rd ed., sections 9.4 (Newton-Raphson with a
       bracket) and 9.5. Cambridge University Press.
    .. [2] Halley, E. (1694). Methodus nova accurata & facilis inveniendi
       radices aequationum quarumcumque generaliter. Philosophical
       Transactions 18, 136-148.

    Examples
    --------
    >>> import numpy as np
    >>> c = np.array([2.0, 3.0, 10.0])
    >>> r = newton_root(lambda x, c: (x * x - c, 2 * x, 2 + 0 * x), 1.5, 0.0, 4.0, (c,),
    ...                 xtol=1e-12)
    >>> np.round(r.root, 12).tolist()
    [1.414213562373, 1.732050807569, 3.162277660168]
    """
    x0, lo, hi, *args = np.broadcast_arrays(
        np.asarray(x0, float), np.asarray(lo, float), np.asarray(hi, float),
        *[np.asarray(a, float) for a in args])
    shape = x0.shape
    x0, lo, hi = x0.ravel(), lo.ravel(), hi.ravel()
    args = [a.ravel() for a in args]
    n = x0.size
    root = np.full(n, np.nan)
    converged = np.zeros(n, dtype=bool)
    iterations = 0
    for start in range(0, n, BLOCK):
        sl = slice(start, start + BLOCK)
        r, c, it = newton_block(func, x0[sl], lo[sl], hi[sl], [a[sl] for a in args],
                                xtol=xtol, rtol=rtol, maxiter=maxiter)
        c &= (r >= lo[sl]) & (r <= hi[sl])
        root[sl], converged[sl] = np.where(c, r, np.nan), c
        iterations = max(iterations, it)
    left = np.flatnonzero(~converged)
    if left.size and fallback is not None:
        res = _in_blocks(_chandrupatla_block, fallback, lo[left], hi[left],
                         [a[left] for a in args], xtol, rtol, 100, what, total=n)
        root[left], converged[left] = res.root, res.converged
        iterations = max(iterations, res.iterations)
    elif left.size:
        warnings.warn(
            f"no {what} found for {left.size} of {n} case(s) (no convergence in {maxiter} "
            f"iterations); their result is NaN", ConvergenceWarning, stacklevel=2)
    return RootResult(root.reshape(shape), converged.reshape(shape), iterations)


def newton_block(func, x, lo, hi, args, *, xtol, rtol, maxiter, prev=None):
    """Newton/Halley on one block of 1-D arrays, no fallback and no warning.

    Returns ``(root, converged, iterations)``; unfinished cases (no stop in
    ``maxiter`` steps, or a step that is not finite) have NaN and converged
    False. The bracket [lo, hi] only clips the starting estimates here: the
    caller checks that a root lies in it (:func:`newton_root` does); None
    for estimates already inside. The
    building block of :func:`newton_root`, for callers that run their own
    blocks (see its Notes). ``prev``: the size of a step the caller already
    made toward each root (then the order-based stop can end a case after one
    step here).
    """
    n = x.size
    root = np.full(n, np.nan)
    converged = np.zeros(n, dtype=bool)
    if lo is not None:
        with np.errstate(invalid="ignore"):
            x = np.minimum(np.maximum(x, lo), hi)
    else:
        x = np.array(x, dtype=float)             # updated in place below
    idx = None                       # all cases, until some stop
    if prev is None:
        prev = 0.0                   # the order-based stop needs two steps
    tol = xtol + (rtol * float(np.nanmax(np.abs(x), initial=0.0)) if rtol else 0.0)
    c = 0.25 * tol
    it = 0
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        while it < maxiter:
            it += 1
            out = func(x, *args)
            f, f1 = out[0], out[1]
            # the stop: predicted error of the new point below tol / 4, by the
            # method's order, with the constant from the scale of x and from the
            # last two steps
            if len(out) > 2:
                den = np.multiply(f, out[2])
                den /= f1
                den *= -0.5
                den += f1
                step = np.divide(f, den)              # Halley: f / (f1 - f f2 / (2 f1))
                a = np.abs(step)
                p = np.multiply(a, a)
                p *= a                                # a^3
                quick = p <= c * (x * x)
                p *= a                                # a^4
                quick &= p <= c * (prev * prev * prev)
            else:
                step = np.divide(f, f1)               # Newton: f / f1
                a = np.abs(step)
                p = np.multiply(a, a)
                quick = p <= c * np.abs(x)
                p *= a
                quick &= p <= c * prev ** 2
            x -= step
            quick &= a <= 0.25 * prev
            quick |= a <= tol
            stop = quick
            if stop.any():
                if idx is None:
                    root[stop] = x[stop]
                    converged[stop] = True
                else:
                    root[idx[stop]] = x[stop]
                    converged[idx[stop]] = True
                if stop.all():
                    break
                keep = ~stop
                idx = np.flatnonzero(keep) if idx is None else idx[keep]
                x, a = x[keep], a[keep]
                args = [v[keep] if np.ndim(v) else v for v in args]
            prev = a
    return root, converged, it
