"""Carrier statistics: the normalised Fermi-Dirac integral of order 1/2, its inverse, and the
bulk Fermi-level positions of neutral material.

F_1/2(eta) = (2/sqrt(pi)) int_0^inf sqrt(x) / (1 + exp(x - eta)) dx,  dF_1/2/deta = F_-1/2
(Blakemore, Solid-State Electron. 25, 1067 (1982), doi:10.1016/0038-1101(82)90143-5, eq. 1).

Method: inside ``[ETA_LO, ETA_HI]`` a cubic Hermite table of ln F_1/2 on a uniform grid of
step ``TABLE_STEP``, its nodes computed once (lazily) by composite Gauss-Legendre quadrature
in t = sqrt(x); below ``ETA_LO`` the non-degenerate series F = e^eta - e^(2 eta)/2^(3/2), above
``ETA_HI`` the Sommerfeld expansion to 4th order (Blakemore eq. 9). Relative error < 1e-8
over the table (checked against scipy.integrate.quad in tests/test_statistics.py).
"""

from __future__ import annotations

import numpy as np

ETA_LO = -30.0  #: below this, the two-term non-degenerate series is used [1]
ETA_HI = 40.0  #: above this, the Sommerfeld expansion is used [1]
TABLE_STEP = 0.02  #: spacing of the ln F_1/2 Hermite table [1]
_GL_ORDER = 16  #: Gauss-Legendre points per panel when building the table
_PANEL = 0.125  #: panel width in t = sqrt(x) when building the table
INVERSE_TOL = 1e-12  #: target accuracy of eta for the inverse [1]
_NEWTON_STOP = 1e-6  #: a Newton step below this leaves an error ~ step^2 < INVERSE_TOL

_SQRT_PI = np.sqrt(np.pi)
_table = None  # (eta nodes, ln F_1/2, d ln F_1/2 / d eta)
_inverse_table = None  # (ln y start, step, eta, d eta / d ln y) on a uniform ln y grid
INVERSE_STEP = 0.02  #: spacing in ln F_1/2 of the inverse table [1]


def _quadrature_table():
    """F_1/2 and F_-1/2 at the table nodes by composite Gauss-Legendre in t (x = t^2)."""
    eta = np.arange(ETA_LO, ETA_HI + TABLE_STEP / 2, TABLE_STEP)
    t_max = np.sqrt(ETA_HI + 60.0)  # integrand < e^-60 relative beyond
    edges = np.arange(0.0, t_max + _PANEL, _PANEL)
    x, w = np.polynomial.legendre.leggauss(_GL_ORDER)
    half = 0.5 * _PANEL
    t = (edges[:-1, None] + half * (x[None, :] + 1.0)).ravel()
    wt = np.tile(w * half, edges.size - 1)
    f12 = np.empty_like(eta)
    fm12 = np.empty_like(eta)
    for i in range(0, eta.size, 256):
        e = eta[i:i + 256, None]
        occ = 1.0 / (1.0 + np.exp(np.minimum(t[None, :] ** 2 - e, 700.0)))
        f12[i:i + 256] = (4.0 / _SQRT_PI) * (occ * t ** 2) @ wt
        fm12[i:i + 256] = (2.0 / _SQRT_PI) * occ @ wt
    return eta, np.log(f12), fm12 / f12


def _get_table():
    global _table
    if _table is None:
        _table = _quadrature_table()
    return _table


def _sommerfeld(eta):
    """F_1/2 and F_-1/2 for eta >> 1 (Sommerfeld expansion, terms to eta^-4)."""
    e2 = eta * eta
    c = 4.0 / (3.0 * _SQRT_PI)
    f = c * eta ** 1.5 * (1.0 + np.pi ** 2 / (8.0 * e2) + 7.0 * np.pi ** 4 / (640.0 * e2 * e2))
    fm = (2.0 / _SQRT_PI) * np.sqrt(eta) * (1.0 - np.pi ** 2 / (24.0 * e2) - 7.0 * np.pi ** 4 / (384.0 * e2 * e2))
    return f, fm


def fermi_half_and_derivative(eta):
    """F_1/2(eta) [1] and its derivative F_-1/2(eta) [1], for reduced Fermi level ``eta`` [1].

    The derivative returned is that of the interpolant itself, so Newton iterations built on
    it are consistent.
    """
    eta = np.asarray(eta, dtype=float)
    nodes, lnf, dlnf = _get_table()
    if eta.size and ETA_LO <= eta.min() and eta.max() <= ETA_HI:  # common case: all in the table
        return _table_eval(eta, lnf, dlnf)
    f = np.empty_like(eta)
    df = np.empty_like(eta)
    lo = eta < ETA_LO
    hi = eta > ETA_HI
    mid = ~(lo | hi)
    if lo.any():
        e = np.exp(eta[lo])
        f[lo] = e - e * e / 2.0 ** 1.5
        df[lo] = e - e * e / 2.0 ** 0.5
    if hi.any():
        f[hi], df[hi] = _sommerfeld(eta[hi])
    if mid.any():
        f[mid], df[mid] = _table_eval(eta[mid], lnf, dlnf)
    return f, df


def _table_eval(em, lnf, dlnf):
    """F_1/2 and its derivative from the Hermite table of ln F_1/2 (eta inside the table)."""
    s = (em - ETA_LO) / TABLE_STEP
    i = np.minimum(s.astype(np.intp), lnf.size - 2)
    u = s - i
    h = TABLE_STEP
    y0, y1 = lnf[i], lnf[i + 1]
    d0, d1 = dlnf[i] * h, dlnf[i + 1] * h
    u2 = u * u
    u3 = u2 * u
    g = (2 * u3 - 3 * u2 + 1) * y0 + (u3 - 2 * u2 + u) * d0 + (-2 * u3 + 3 * u2) * y1 + (u3 - u2) * d1
    dg = ((6 * u2 - 6 * u) * y0 + (3 * u2 - 4 * u + 1) * d0 + (-6 * u2 + 6 * u) * y1 + (3 * u2 - 2 * u) * d1) / h
    fm = np.exp(g)
    return fm, fm * dg


def fermi_half(eta, derivative: bool = False):
    """Normalised Fermi-Dirac integral F_1/2 [1] of reduced Fermi level ``eta`` [1]; with
    ``derivative`` the pair (F_1/2, dF_1/2/deta = F_-1/2)."""
    f, df = fermi_half_and_derivative(eta)
    return (f, df) if derivative else f


def _hermite(x0, step, y, dy, x):
    """Cubic Hermite interpolation on a uniform grid (nodes x0 + k step) inside its range."""
    s = (x - x0) / step
    i = np.clip(s.astype(np.intp), 0, y.size - 2)
    u = s - i
    u2 = u * u
    u3 = u2 * u
    return ((2 * u3 - 3 * u2 + 1) * y[i] + (u3 - 2 * u2 + u) * step * dy[i]
            + (-2 * u3 + 3 * u2) * y[i + 1] + (u3 - u2) * step * dy[i + 1])


def _get_inverse_table():
    """eta against ln F_1/2 on a uniform grid, from the forward table by Newton (built once)."""
    global _inverse_table
    if _inverse_table is None:
        nodes, lnf, _ = _get_table()
        g = np.arange(lnf[0], lnf[-1], INVERSE_STEP)
        eta = np.interp(g, lnf, nodes)
        for _ in range(6):
            f, df = fermi_half_and_derivative(eta)
            eta = eta - (np.log(f) - g) * f / df
        f, df = fermi_half_and_derivative(eta)
        _inverse_table = (g[0], INVERSE_STEP, eta, f / df)
    return _inverse_table


def fermi_half_inverse(y):
    """Reduced Fermi level eta [1] with F_1/2(eta) = ``y`` [1] (``y`` > 0).

    Method: cubic Hermite interpolation of eta against ln y (table built once from the forward
    table), exact series/limits outside it (non-degenerate: eta = ln y + y / 2^(3/2); degenerate:
    eta = (3 sqrt(pi) y / 4)^(2/3)), then Newton steps on ln F_1/2 until the step is below
    ``INVERSE_TOL``.
    """
    y = np.asarray(y, dtype=float)
    if np.any(~(y > 0)):
        raise ValueError("fermi_half_inverse: argument must be > 0")
    g0, step, eta_t, deta_t = _get_inverse_table()
    lny = np.log(y)
    g1 = g0 + step * (eta_t.size - 1)
    eta = np.where(lny < g0, lny + y / 2.0 ** 1.5,
                   np.where(lny > g1, (0.75 * _SQRT_PI * y) ** (2.0 / 3.0), 0.0))
    mid = (lny >= g0) & (lny <= g1)
    if mid.any():
        eta[mid] = _hermite(g0, step, eta_t, deta_t, lny[mid])
    eta = np.atleast_1d(eta)
    lny = np.atleast_1d(lny)
    active = np.arange(eta.size)
    for _ in range(30):
        f, df = fermi_half_and_derivative(eta[active])
        d = (np.log(f) - lny[active]) * f / df
        eta[active] -= d
        active = active[np.abs(d) >= _NEWTON_STOP * np.maximum(1.0, np.abs(eta[active]))]
        if not active.size:
            break
    return eta.reshape(y.shape)


STATISTICS = ("fermi-dirac", "boltzmann")


def check_statistics(statistics: str) -> str:
    """Return the canonical statistics name or raise ``DesignError`` naming the choices."""
    from ._errors import DesignError

    s = str(statistics).strip().lower()
    if s not in STATISTICS:
        raise DesignError("statistics", f"one of {', '.join(STATISTICS)}", statistics)
    return s


def reduced_level(density_cm3, dos_cm3, statistics: str = "fermi-dirac"):
    """Reduced Fermi level eta [1] at which a band of effective density of states ``dos_cm3``
    [cm^-3] holds ``density_cm3`` [cm^-3] carriers: eta = (E_F - E_c)/kT for electrons,
    (E_v - E_F)/kT for holes. Boltzmann: eta = ln(n/N); Fermi-Dirac: eta = F_1/2^-1(n/N)
    (Sze & Ng, 3rd ed., eq. 1.16-1.17 and 1.23)."""
    ratio = np.asarray(density_cm3, dtype=float) / np.asarray(dos_cm3, dtype=float)
    if check_statistics(statistics) == "boltzmann":
        return np.log(ratio)
    return fermi_half_inverse(ratio)


def occupancy(eta, statistics: str = "fermi-dirac"):
    """Carrier density over effective density of states [1] and its derivative in eta [1]:
    e^eta (Boltzmann) or F_1/2(eta) (Fermi-Dirac)."""
    if statistics == "boltzmann":
        e = np.exp(np.minimum(eta, 700.0))
        return e, e
    return fermi_half_and_derivative(eta)


def intrinsic_density(band_gap_eV, nc_cm3, nv_cm3, temperature_K):
    """Intrinsic carrier density n_i [cm^-3] = sqrt(N_c N_v) exp(-E_g / 2kT), Boltzmann
    statistics (Sze & Ng, 3rd ed., eq. 1.24)."""
    from ._constants import K_B_EV

    kt = K_B_EV * np.asarray(temperature_K, dtype=float)
    return np.sqrt(np.asarray(nc_cm3) * np.asarray(nv_cm3)) * np.exp(-np.asarray(band_gap_eV) / (2.0 * kt))
