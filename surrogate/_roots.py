"""Vectorised bracketing root finder: safeguarded Newton (bisection whenever a Newton step
leaves the bracket) for many independent monotone scalar equations at once. Converged
elements drop out of the working set, so the cost follows the typical, not the worst, row."""

from __future__ import annotations

import numpy as np

ROOT_XTOL = 1e-12  #: absolute tolerance on the unknown (the unknowns here lie in [0, 1])
ROOT_MAXITER = 200  #: bisection alone needs ~45 steps to ROOT_XTOL on [0, 1]


def solve_bracketed(fun, params, lo, hi, increasing, x0=None, xtol=ROOT_XTOL, maxiter=ROOT_MAXITER):
    """Root of ``fun`` in ``[lo, hi]`` for each element.

    ``fun(x, p)`` returns ``(f, dfdx)`` for unknowns ``x`` and ``p``, a dict holding the
    matching elements of ``params`` (a dict of equal-length arrays). ``f`` must be monotone,
    increasing where ``increasing`` (bool) is true, and change sign on the bracket (a root at
    either end is found too). Returns ``(x, iterations)``, iterations per element.
    """
    n = np.size(lo)
    lo = np.broadcast_to(np.asarray(lo, dtype=float), (n,)).copy()
    hi = np.broadcast_to(np.asarray(hi, dtype=float), (n,)).copy()
    x = 0.5 * (lo + hi) if x0 is None else np.clip(np.asarray(x0, dtype=float), lo, hi)
    result = x.copy()
    iters = np.zeros(n, dtype=np.int32)
    idx = np.arange(n)
    p = params
    for it in range(1, maxiter + 1):
        f, df = fun(x, p)
        below = (f < 0) == increasing  # the root lies above x
        lo = np.where(below, x, lo)
        hi = np.where(below, hi, x)
        with np.errstate(divide="ignore", invalid="ignore"):
            step = f / df
        xn = x - step
        # a Newton step below tolerance means converged, even if rounding noise in f puts it
        # just outside the one-sided bracket (otherwise we would bisect a wide bracket)
        small = np.abs(step) <= xtol
        bad = ~(xn > lo) | ~(xn < hi)  # NaN-safe
        xn = np.where(bad & ~small, 0.5 * (lo + hi), xn)
        xn = np.where((f == 0) | (small & bad), x, xn)
        done = small | (np.abs(xn - x) <= xtol) | (hi - lo <= xtol)
        x = xn
        if done.any():
            result[idx[done]] = x[done]
            iters[idx[done]] = it
            keep = ~done
            if not keep.any():
                return result, iters
            idx, x, lo, hi = idx[keep], x[keep], lo[keep], hi[keep]
            p = {k: v[keep] for k, v in p.items()}
    result[idx] = x
    iters[idx] = maxiter
    return result, iters
