"""Independent reference for the Poisson solver: scipy.integrate.solve_bvp (Kierzenka &
Shampine, ACM TOMS 27, 299 (2001), doi:10.1145/502800.502801) on the first-order system
y' = F/r, F' = -r rho(y)/eps in core and shell, mapped to s in [0, 1] each and joined by
continuity of y and F = r dy/dr at the junction. Boltzmann statistics written out with exp, or
Fermi-Dirac with F_1/2 from its own table: scipy.integrate.quad of the defining integral
(Blakemore, Solid-State Electron. 25, 1067 (1982), doi:10.1016/0038-1101(82)90143-5, eq. 1) on a
grid, interpolated by a scipy CubicSpline of ln F_1/2 (none of radialpn's own statistics code).
p-core/n-shell only (pass a mirrored material for an n-core design); lengths in nm, potentials
in V."""

from __future__ import annotations

import numpy as np
from scipy.integrate import quad, solve_bvp
from scipy.interpolate import CubicSpline

Q = 1.602176634e-19
EPS0 = 8.8541878128e-12
KB = 8.617333262e-5


_FD = None


def fermi_half(eta):
    """F_1/2 [1] normalised so that F -> exp(eta) when eta -> -inf: quad on a grid (built once),
    CubicSpline of ln F between -40 and 80, exp(eta) below."""
    global _FD
    if _FD is None:
        grid = np.arange(-40.0, 80.01, 0.05)
        vals = [quad(lambda x, e=e: np.sqrt(x) / (1.0 + np.exp(min(x - e, 700.0))), 0, max(e, 0) + 60,
                     epsabs=0, epsrel=1e-12, limit=200)[0] * 2 / np.sqrt(np.pi) for e in grid]
        _FD = CubicSpline(grid, np.log(vals))
    eta = np.asarray(eta, dtype=float)
    return np.where(eta < -40, np.exp(np.maximum(eta, -700.0)), np.exp(_FD(np.clip(eta, -40, 80))))


def ionised_acceptors(N, y, level, g, share, kt):
    """N_A- [cm^-3] at E_F - E_v = y [eV]: N (1 - s + s / (1 + g exp((E_A - E_F)/kT))), the
    acceptor occupancy of Sze & Ng, 3rd ed., eq. 1.39 for the localised share s, the rest ionised."""
    with np.errstate(over="ignore"):
        return N * (1.0 - share + share / (1.0 + g * np.exp(np.minimum((level - y) / kt, 700.0))))


def solve(NA, ND, a, t, eps_r, Eg, Nc, Nv, T, Dit, Ecnl, y_guess, statistics="boltzmann", core_dopant=None,
          shell_dopant=None):
    """Dopings and N_c, N_v in cm^-3, a and t in nm, D_it in cm^-2 eV^-1. ``y_guess(r_nm)``:
    a start for y = E_F - E_v. ``statistics``: "boltzmann" or "fermi-dirac". ``core_dopant``,
    ``shell_dopant``: None (fully ionised) or (E_i [eV] from the region's majority band, g,
    localised share s) for incomplete ionisation. Returns (V_bi, fine r, fine y)."""
    kt = KB * T
    R = a + t
    k = Q * 1e6 * 1e-18 / (eps_r * EPS0)  # q N[cm^-3] / eps, per nm^2, in V
    occ = np.exp if statistics == "boltzmann" else fermi_half

    def rho(y, dop):  # (p - n + ionised dopants) in cm^-3; dop < 0: core acceptors, > 0: shell donors
        if dop < 0 and core_dopant is not None:
            dop = -ionised_acceptors(-dop, y, *core_dopant, kt)
        elif dop > 0 and shell_dopant is not None:  # donor level E_g - E_i above E_v: the mirror of an acceptor
            dop = ionised_acceptors(dop, Eg - y, *shell_dopant, kt)
        return Nv * occ(-y / kt) - Nc * occ((y - Eg) / kt) + dop

    s0 = 1e-7

    def f(s, u):
        yc, Fc, ys, Fs = u
        rc = a * s
        rs = a + t * s
        return np.vstack([a * Fc / rc, -a * rc * k * rho(yc, -NA), t * Fs / rs, -t * rs * k * rho(ys, ND)])

    sig = Q * Dit * 1e4 * 1e-9 / (eps_r * EPS0)  # q D_it / eps in V/nm per eV

    def bc(ua, ub):
        return np.array([ua[1], ub[0] - ua[2], ub[1] - ua[3], ub[3] + R * sig * (ub[2] - Ecnl)])

    s = np.concatenate([np.geomspace(s0, 0.01, 50), np.linspace(0.01, 1, 400)[1:]])
    yc, ys = y_guess(a * s), y_guess(a + t * s)
    d = 1e-6
    Fc = a * s * (y_guess(a * s + d) - y_guess(a * s - d)) / (2 * d)
    Fs = (a + t * s) * (y_guess(a + t * s + d) - y_guess(a + t * s - d)) / (2 * d)
    Fc[0] = 0.0
    sol = solve_bvp(f, bc, s, np.vstack([yc, Fc, ys, Fs]), tol=1e-7, max_nodes=500000)
    if not sol.success:
        raise RuntimeError(sol.message)
    fine = np.linspace(s0, 1, 200001)
    u = sol.sol(fine)
    vbi = u[2].max() - u[0].min()
    return vbi, np.concatenate([a * fine, a + t * fine]), np.concatenate([u[0], u[2]])
