"""An independent depletion-approximation solver for tests: raw radii (no reduced variables),
scipy.optimize.brentq for every balance, and every potential drop integrated from the
Gauss's-law field with scipy.integrate.quad (field in a cylinder: eps E(r) 2 pi r = charge per
length enclosed; Jackson, Classical Electrodynamics, 3rd ed., sec. 1.3). p-core/n-shell only;
tests mirror n-core designs by hand. Slow, for a few dozen designs."""

from __future__ import annotations

import math

from scipy.integrate import quad
from scipy.optimize import brentq

Q = 1.602176634e-19
EPS0 = 8.8541878128e-12


def _drop(r0, r1, N, eps):
    """|psi(r1) - psi(r0)| for uniform charge q N with zero field at r0, by quadrature."""
    lo, hi = sorted((r0, r1))
    val, _ = quad(lambda r: Q * N / (2 * eps) * abs(r - r0 * r0 / r), lo, hi, epsabs=0, epsrel=1e-12)
    return val


def solve(NA, ND, a, R, eps_r, Eg, dp, dn, Dit, Ecnl):
    """SI inputs (m^-3, m, eV, m^-2 eV^-1). Returns (regime, V_bi [V])."""
    eps = eps_r * EPS0
    vbi0 = Eg - dp - dn
    phi0 = Eg - dn - Ecnl

    def rn_of(rp):
        return math.sqrt(a * a + NA / ND * (a * a - rp * rp))

    def vj(rp):
        return _drop(rp, a, NA, eps) + _drop(rn_of(rp), a, ND, eps)

    if vj(0.0) <= vbi0:
        rp = 0.0
    else:
        rp = brentq(lambda x: vj(x) - vbi0, 0.0, a, xtol=1e-15 * a, rtol=1e-14)
    rn = rn_of(rp)

    def fs(rs):
        return ND * (R * R - rs * rs) / (2 * R) - Dit * (phi0 - _drop(rs, R, ND, eps))

    rs = 0.0 if fs(0.0) <= 0 else (R if Dit == 0 else brentq(fs, 0.0, R, xtol=1e-15 * R, rtol=1e-14))
    if rn < rs:
        return ("both-neutral", vbi0) if rp > 0 else ("core-depleted", vj(0.0))

    def shell_psi(rp, r):
        """psi(r) - psi(rp) for r in the shell, field from Gauss's law, by quadrature."""
        def field(x):  # E(r) = enclosed charge / (2 pi eps r)
            core = -NA * (min(x, a) ** 2 - rp * rp) if x > rp else 0.0
            shell = ND * (x * x - a * a) if x > a else 0.0
            return Q * (core + shell) / (2 * eps * x)
        v1, _ = quad(field, max(rp, 1e-30), a, epsabs=0, epsrel=1e-12)
        v2, _ = quad(field, a, r, epsabs=0, epsrel=1e-12)
        return -(v1 + v2)

    def fc(rp):
        psiR = shell_psi(rp, R)
        return ND * (R * R - rn_of(rp) ** 2) / (2 * R) - Dit * (dp + psiR - Ecnl)

    if fc(0.0) >= 0:
        rp, regime = 0.0, "all-depleted"
    else:
        rp, regime = brentq(fc, 0.0, a, xtol=1e-15 * a, rtol=1e-14), "shell-depleted"
    rm = min(rn_of(rp), R)
    return regime, shell_psi(rp, rm)
