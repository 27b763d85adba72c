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

import threading

import numpy as np

ETA_LO = -30.0  #: below this, the two-term non-degenerate series is used [1]
ETA_HI = 40.0  #: above this, the Sommerfeld expansion is used [1]
TABLE_STEP = 0.02  #: spacing of the ln F_1/2 Hermite table [1]
_GL_ORDER = 16  #: Gauss-Legendre points per panel when building the table
_PANEL = 0.125  #: panel width in t = sqrt(x) when building the table
INVERSE_TOL = 1e-12  #: target accuracy of eta for the inverse [1]
_NEWTON_STOP = 1e-6  #: a Newton step below this leaves an error ~ step^2 < INVERSE_TOL

_SQRT_PI = np.sqrt(np.pi)
TABLE_BLOCK = 256  #: table nodes computed together, each block on first use (a query touches a few)
INVERSE_BLOCK = 32  #: inverse-table nodes computed together (a block of ln y may span many eta nodes)
#: guards the creation of the lazily built tables (threads of one batch share them; a block
#: computed twice by two threads gets the same numbers, so the blocks themselves need no lock)
_INIT_LOCK = threading.Lock()
_forward = None  # eta nodes, ln F_1/2, d ln F_1/2 / d eta (NaN until their block is computed), done blocks
_inverse = None  # the same for eta against ln F_1/2 on a uniform ln y grid
INVERSE_STEP = 0.02  #: spacing in ln F_1/2 of the inverse table [1]
_quad = None  # quadrature points t and weights of the table's Gauss-Legendre rule


def _forward_table() -> dict:
    global _forward
    if _forward is None:
        with _INIT_LOCK:  # two threads must not each make (and one then replace) the table
            if _forward is None:
                eta = np.arange(ETA_LO, ETA_HI + TABLE_STEP / 2, TABLE_STEP)
                _forward = dict(eta=eta, lnf=np.full(eta.size, np.nan), dlnf=np.full(eta.size, np.nan),
                                done=np.zeros(-(-eta.size // TABLE_BLOCK), dtype=bool))
    return _forward


def _quadrature_block(e):
    """F_1/2 and F_-1/2 at nodes ``e`` by composite Gauss-Legendre in t (x = t^2)."""
    global _quad
    if _quad is None:
        t_max = np.sqrt(ETA_HI + 60.0)  # integrand < e^-60 relative beyond
        edges = np.arange(0.0, t_max + _PANEL, _PANEL)
        x, w = np.polynomial.legendre.leggauss(_GL_ORDER)
        half = 0.5 * _PANEL
        _quad = ((edges[:-1, None] + half * (x[None, :] + 1.0)).ravel(), np.tile(w * half, edges.size - 1))
    t, wt = _quad
    occ = 1.0 / (1.0 + np.exp(np.minimum(t[None, :] ** 2 - e[:, None], 700.0)))
    return (4.0 / _SQRT_PI) * (occ * t ** 2) @ wt, (2.0 / _SQRT_PI) * occ @ wt


def _ensure_forward(lo: int, hi: int) -> dict:
    """The forward table with nodes lo..hi (indices, inclusive) computed."""
    tab = _forward_table()
    last = tab["done"].size - 1
    for b in range(min(max(lo, 0) // TABLE_BLOCK, last), min(max(hi, 0) // TABLE_BLOCK, last) + 1):
        if not tab["done"][b]:
            sl = slice(b * TABLE_BLOCK, (b + 1) * TABLE_BLOCK)
            f12, fm12 = _quadrature_block(tab["eta"][sl])
            tab["lnf"][sl], tab["dlnf"][sl] = np.log(f12), fm12 / f12
            tab["done"][b] = True
    return tab


def _get_table():
    """(eta nodes, ln F_1/2, d ln F_1/2 / d eta) of the whole table."""
    tab = _ensure_forward(0, _forward_table()["eta"].size - 1)
    return tab["eta"], tab["lnf"], tab["dlnf"]


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
    if eta.size and ETA_LO <= eta.min() and eta.max() <= ETA_HI:  # common case: all in the table
        return _table_eval(eta)
    f = np.full_like(eta, np.nan)  # NaN in, NaN out (never a table index from NaN)
    df = np.full_like(eta, np.nan)
    lo = eta < ETA_LO
    hi = eta > ETA_HI
    mid = (eta >= ETA_LO) & (eta <= ETA_HI)
    if lo.any():
        e = np.exp(eta[lo])
        f[lo] = e - e * e / 2.0 ** 1.5
        df[lo] = e - e * e / 2.0 ** 0.5
    if hi.any():
        f[hi], df[hi] = _sommerfeld(eta[hi])
    if mid.any():
        f[mid], df[mid] = _table_eval(eta[mid])
    return f, df


def _table_eval(em):
    """F_1/2 and its derivative from the Hermite table of ln F_1/2 (eta inside the table)."""
    tab = _forward_table()
    s = (em - ETA_LO) / TABLE_STEP
    i = np.minimum(s.astype(np.intp), tab["lnf"].size - 2)
    if i.size and not tab["done"].all():
        _ensure_forward(int(i.min()), int(i.max()) + 1)
    lnf, dlnf = tab["lnf"], tab["dlnf"]
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


def _inverse_table() -> dict:
    """The inverse table's grid (uniform in ln F_1/2 from the forward table's first to its last
    node); its values are computed block by block (``_ensure_inverse``)."""
    global _inverse
    if _inverse is None:
        tab = _forward_table()
        k = tab["eta"].size - 1
        _ensure_forward(0, 0)
        _ensure_forward(k, k)
        with _INIT_LOCK:
            if _inverse is None:
                g = np.arange(tab["lnf"][0], tab["lnf"][k], INVERSE_STEP)
                _inverse = dict(g=g, g0=g[0], step=INVERSE_STEP, eta=np.full(g.size, np.nan),
                                deta=np.full(g.size, np.nan), done=np.zeros(-(-g.size // INVERSE_BLOCK), dtype=bool))
    return _inverse


def _ensure_inverse(lo: int, hi: int) -> dict:
    """The inverse table with nodes lo..hi computed: eta of each ln y node by Newton on the
    forward table from its linear interpolation (the forward nodes around it computed first:
    ln F_1/2(eta) < eta, so the bracketing nodes lie at or above eta = ln y)."""
    inv = _inverse_table()
    tab = _forward_table()
    last = inv["done"].size - 1
    top = tab["eta"].size - 1
    for b in range(min(max(lo, 0) // INVERSE_BLOCK, last), min(max(hi, 0) // INVERSE_BLOCK, last) + 1):
        if inv["done"][b]:
            continue
        sl = slice(b * INVERSE_BLOCK, (b + 1) * INVERSE_BLOCK)
        g = inv["g"][sl]
        k0 = min(max(int((g[0] - ETA_LO) / TABLE_STEP) - 1, 0), top)  # eta[k0] < g[0], so lnf[k0] < g[0]
        k1 = k0
        while True:  # the first node at or above the block's last ln y
            k1 = min(k1 + INVERSE_BLOCK, top)
            _ensure_forward(k0, k1)
            if tab["lnf"][k1] >= g[-1] or k1 == top:
                break
        eta = np.interp(g, tab["lnf"][k0:k1 + 1], tab["eta"][k0:k1 + 1])
        for _ in range(6):
            f, df = fermi_half_and_derivative(eta)
            eta = eta - (np.log(f) - g) * f / df
        f, df = fermi_half_and_derivative(eta)
        inv["eta"][sl], inv["deta"][sl] = eta, f / df
        inv["done"][b] = True
    return inv


def _get_inverse_table():
    """(ln y start, step, eta, d eta / d ln y) of the whole inverse table."""
    inv = _ensure_inverse(0, _inverse_table()["g"].size - 1)
    return inv["g0"], inv["step"], inv["eta"], inv["deta"]


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
    inv = _inverse_table()
    g0, step, eta_t, deta_t = inv["g0"], inv["step"], inv["eta"], inv["deta"]
    lny = np.log(y)
    g1 = g0 + step * (eta_t.size - 1)
    eta = np.where(lny < g0, lny + y / 2.0 ** 1.5,
                   np.where(lny > g1, (0.75 * _SQRT_PI * y) ** (2.0 / 3.0), 0.0))
    mid = (lny >= g0) & (lny <= g1)
    if mid.any():
        if not inv["done"].all():
            k = np.clip(((lny[mid] - g0) / step).astype(np.intp), 0, eta_t.size - 2)
            _ensure_inverse(int(k.min()), int(k.max()) + 1)
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
