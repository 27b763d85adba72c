"""Carrier occupancy for the reference solver's Newton loop: the same F_1/2 as
``radialpn._statistics`` (its Hermite table of ln F_1/2, non-degenerate series below
``ETA_LO``, Sommerfeld expansion above ``ETA_HI``; Blakemore, Solid-State Electron. 25, 1067
(1982), doi:10.1016/0038-1101(82)90143-5), evaluated faster for the solver's (nodes x designs)
arrays:

- the cubic of each table interval in Horner form, c0 + u (c1 + u (c2 + u c3)), coefficients
  precomputed once per interval (the same polynomial as the Hermite basis; ~10 array operations
  instead of ~35, in place);
- where some arguments fall outside the table (minority carriers far from their band, common
  in the solver), the table over the clipped argument everywhere and the series/expansion only
  at those positions (flat indices), instead of three boolean gathers and scatters.

Values agree with ``radialpn._statistics.fermi_half_and_derivative`` to rounding (relative
~1e-14; tests/test_solver.py checks it); the runtime keeps its own evaluation so that the
depletion engine and the surrogates' features stay bit-for-bit as they were.
"""

from __future__ import annotations

import numpy as np

from .._statistics import ETA_HI, ETA_LO, TABLE_STEP, _get_table, _sommerfeld
from .._statistics import occupancy as _runtime_occupancy

_horner = None  # per-interval coefficients (c0, c1, c2, c3, k1, k2, k3), built once


def _coefficients():
    """ln F_1/2 = c0 + u (c1 + u (c2 + u c3)) on each interval, u in [0, 1) the position in it,
    and its eta-derivative k1 + u (k2 + u k3) (= (c1 + 2 c2 u + 3 c3 u^2) / step)."""
    global _horner
    if _horner is None:
        _, lnf, dlnf = _get_table()
        h = TABLE_STEP
        y0, y1, d0, d1 = lnf[:-1], lnf[1:], dlnf[:-1] * h, dlnf[1:] * h
        c2 = 3.0 * (y1 - y0) - 2.0 * d0 - d1
        c3 = 2.0 * (y0 - y1) + d0 + d1
        _horner = (y0.copy(), d0, c2, c3, d0 / h, 2.0 * c2 / h, 3.0 * c3 / h)
    return _horner


def _table(em):
    """F_1/2 [1] and F_-1/2 [1] from the table, ``em`` inside [ETA_LO, ETA_HI] (a fresh array,
    not modified)."""
    c0, c1, c2, c3, k1, k2, k3 = _coefficients()
    u = (em - ETA_LO) / TABLE_STEP
    i = u.astype(np.intp)
    np.minimum(i, c0.size - 1, out=i)
    u -= i
    g = c3.take(i)
    g *= u
    g += c2.take(i)
    g *= u
    g += c1.take(i)
    g *= u
    g += c0.take(i)
    dg = k3.take(i)
    dg *= u
    dg += k2.take(i)
    dg *= u
    dg += k1.take(i)
    f = np.exp(g, out=g)
    dg *= f
    return f, dg


def fermi_dirac(eta):
    """F_1/2(eta) [1] and its derivative F_-1/2(eta) [1] for an array ``eta`` [1] (ndim >= 1)."""
    eta = np.asarray(eta, dtype=float)
    if not eta.size:
        return np.empty_like(eta), np.empty_like(eta)
    lo_all, hi_all = eta.min(), eta.max()
    if ETA_LO <= lo_all and hi_all <= ETA_HI:
        return _table(eta)
    f, df = _table(np.minimum(np.maximum(eta, ETA_LO), ETA_HI))
    flat = eta.reshape(-1)
    if lo_all < ETA_LO:  # non-degenerate series F = e^eta - e^(2 eta) / 2^(3/2)
        lo = np.flatnonzero(flat < ETA_LO)
        e = np.exp(flat.take(lo))
        np.put(f, lo, e - e * e / 2.0 ** 1.5)
        np.put(df, lo, e - e * e / 2.0 ** 0.5)
    if hi_all > ETA_HI:
        hi = np.flatnonzero(flat > ETA_HI)
        fh, dfh = _sommerfeld(flat.take(hi))
        np.put(f, hi, fh)
        np.put(df, hi, dfh)
    return f, df


def occupancy(eta, statistics: str = "fermi-dirac"):
    """``radialpn._statistics.occupancy`` [1], [1] with the Fermi-Dirac case evaluated here."""
    if statistics == "fermi-dirac":
        return fermi_dirac(eta)
    return _runtime_occupancy(eta, statistics)
