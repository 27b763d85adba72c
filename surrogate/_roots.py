"""Vectorised bracketing root finder: safeguarded Newton (bisection whenever a Newton step
leaves the bracket) for many independent monotone scalar equations at once. Converged
elements drop out of the working set, so the cost follows the typical, not the worst, row."""

from __future__ import annotations

import numpy as np

ROOT_XTOL = 1e-12  #: absolute tolerance on the unknown (the unknowns here lie in [0, 1])
ROOT_MAXITER = 200  #: bisection alone needs ~45 steps to ROOT_XTOL on [0, 1]


def solve_bracketed(fun, params, lo, hi, x0=None, xtol=ROOT_XTOL, maxiter=ROOT_MAXITER):
    """Root of ``fun`` in ``[lo, hi]`` for each element.

    ``fun(x, p)`` returns ``(f, dfdx)`` for unknowns ``x`` and ``p``, a dict holding the
    matching elements of ``params`` (a dict of equal-length arrays). ``f`` must be increasing
    and change sign on the bracket (a root at either end is found too). Returns
    ``(x, iterations)``, iterations per element. Run it under ``np.errstate(all="ignore")``.
    """
    n = np.size(lo)
    lo = np.broadcast_to(np.asarray(lo, dtype=float), (n,)).copy()
    hi = np.broadcast_to(np.asarray(hi, dtype=float), (n,)).copy()
    x = 0.5 * (lo + hi) if x0 is None else np.clip(np.asarray(x0, dtype=float), lo, hi)
    result = x.copy()
    iters = np.zeros(n, dtype=np.int32)
    if n == 0:  # nothing to solve (an empty subset): return at once, not after maxiter passes
        return result, iters
    idx = np.arange(n)
    p = params
    for it in range(1, maxiter + 1):
        f, df = fun(x, p)
        neg = f < 0  # the root lies above x
        lo = np.where(neg, x, lo)
        hi = np.where(neg, hi, x)
        step = f / df
        xn = x - step
        inside = (xn > lo) & (xn < hi)  # False for NaN too
        small = np.abs(step) <= xtol
        # a Newton step below tolerance means converged, even where rounding noise in f puts
        # it just outside the one-sided bracket (we must not bisect a wide bracket then)
        x = np.where(inside, xn, np.where(small, x, 0.5 * (lo + hi)))
        done = small | (hi - lo <= xtol)
        if done.all():
            result[idx] = x
            iters[idx] = it
            return result, iters
        if done.any():
            result[idx[done]] = x[done]
            iters[idx[done]] = it
            keep = ~done
            idx, x, lo, hi = idx[keep], x[keep], lo[keep], hi[keep]
            p = {k: v[keep] for k, v in p.items()}
    result[idx] = x
    iters[idx] = maxiter
    return result, iters
