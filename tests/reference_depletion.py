"""An independent depletion-approximation solver for tests: raw radii (no reduced variables),
scipy.optimize.brentq for every balance, and every potential drop integrated from the
Gauss's-law field with scipy.integrate.quad (field in a cylinder: eps E(r) 2 pi r = charge per
length enclosed; Jackson, Classical Electrodynamics, 3rd ed., sec. 1.3), the undoped interlayer
a < r < b included (there the enclosed charge is the core's depleted charge alone). p-core/n-shell
only; tests mirror n-core designs by hand. Slow, for a few dozen designs."""

from __future__ import annotations

import math

import numpy as np
from scipy.integrate import quad
from scipy.optimize import brentq

Q = 1.602176634e-19
EPS0 = 8.8541878128e-12


def _drop(r0, r1, N, eps):
    """|psi(r1) - psi(r0)| for uniform charge q N with zero field at r0, by quadrature."""
    lo, hi = sorted((r0, r1))
    val, _ = quad(lambda r: Q * N / (2 * eps) * abs(r - r0 * r0 / r), lo, hi, epsabs=0, epsrel=1e-12)
    return val


def solve_full(NA, ND, a, R, eps_r, Eg, dp, dn, Dit, Ecnl, b=None):
    """SI inputs (m^-3, m, eV, m^-2 eV^-1); ``b`` [m] the doped shell's inner radius (default
    ``a``: no interlayer). Returns (regime, V_bi [V], peak |E| between the core's depletion edge
    and the shell's potential maximum [V/m])."""
    b = a if b is None else b
    eps = eps_r * EPS0
    vbi0 = Eg - dp - dn
    phi0 = Eg - dn - Ecnl

    def rn_of(rp):  # zero-field radius in the shell: shell charge b..rn balances the core's
        return math.sqrt(b * b + NA / ND * (a * a - rp * rp))

    def field(rp, x):
        """E(x) [V/m] = enclosed charge per length / (2 pi eps x) (Gauss's law)."""
        core = -NA * (min(x, a) ** 2 - rp * rp) if x > rp else 0.0
        shell = ND * (x * x - b * b) if x > b else 0.0
        return Q * (core + shell) / (2 * eps * x)

    def interlayer_drop(rp):
        if b == a:
            return 0.0
        val, _ = quad(lambda x: -field(rp, x), a, b, epsabs=0, epsrel=1e-12)
        return val

    def vj(rp):
        return _drop(rp, a, NA, eps) + interlayer_drop(rp) + _drop(rn_of(rp), b, ND, eps)

    if vj(0.0) <= vbi0:
        rp = 0.0
    else:
        rp = brentq(lambda x: vj(x) - vbi0, 0.0, a, xtol=1e-15 * a, rtol=1e-14)
    rn = rn_of(rp)

    def fs(rs):  # surface charge against the surface-state charge, doped shell only (b..R)
        return ND * (R * R - rs * rs) / (2 * R) - Dit * (phi0 - _drop(rs, R, ND, eps))

    rs = b if fs(b) <= 0 else (R if Dit == 0 else brentq(fs, b, R, xtol=1e-15 * R, rtol=1e-14))

    def peak(rp, rm):
        xs = np.unique(np.concatenate([np.linspace(max(rp, 1e-30), rm, 4001), [a, b]]))
        return max(abs(field(rp, x)) for x in xs if x <= rm)

    if rn < rs:
        if rp > 0:
            return "both-neutral", vbi0, peak(rp, rn)
        return "core-depleted", vj(0.0), peak(0.0, rn)

    def shell_psi(rp, r):
        """psi(r) - psi(rp) for r in the shell, field from Gauss's law, by quadrature."""
        v1, _ = quad(lambda x: field(rp, x), max(rp, 1e-30), a, epsabs=0, epsrel=1e-12)
        v2, _ = quad(lambda x: field(rp, x), a, b, epsabs=0, epsrel=1e-12) if b > a else (0.0, 0.0)
        v3, _ = quad(lambda x: field(rp, x), b, r, epsabs=0, epsrel=1e-12)
        return -(v1 + v2 + v3)

    def fc(rp):
        psiR = shell_psi(rp, R)
        return ND * (R * R - rn_of(rp) ** 2) / (2 * R) - Dit * (dp + psiR - Ecnl)

    if fc(0.0) >= 0:
        rp, regime = 0.0, "all-depleted"
    else:
        rp, regime = brentq(fc, 0.0, a, xtol=1e-15 * a, rtol=1e-14), "shell-depleted"
    rm = min(rn_of(rp), R)
    return regime, shell_psi(rp, rm), peak(rp, rm)


def solve(NA, ND, a, R, eps_r, Eg, dp, dn, Dit, Ecnl, b=None):
    """As ``solve_full``, returning (regime, V_bi [V])."""
    regime, vbi, _ = solve_full(NA, ND, a, R, eps_r, Eg, dp, dn, Dit, Ecnl, b)
    return regime, vbi


def design_row(d, material, temperature_K=300.0):
    """``solve_full`` on one design-table row ``d`` (mapping of its columns; ``interlayer_nm``
    optional) of ``material`` (a radialpn Material: only its tabulated constants are read), in
    the p-core frame by hand with Boltzmann bulk levels: (regime, V_bi [V], peak field [V/m])."""
    kt = 1.380649e-23 * temperature_K / 1.602176634e-19  # kT [eV] (CODATA 2018 exact constants)
    p = d["core_type"] == "p"
    Eg = float(material.band_gap(temperature_K))
    nc, nv = material.nc(temperature_K), material.nv(temperature_K)
    core_dos, shell_dos = (nv, nc) if p else (nc, nv)
    dp = kt * math.log(core_dos / d["core_doping_cm3"])
    dn = kt * math.log(shell_dos / d["shell_doping_cm3"])
    cnl = material.cnl_eV if p else Eg - material.cnl_eV
    a = d["core_radius_nm"] * 1e-9
    return solve_full(d["core_doping_cm3"] * 1e6, d["shell_doping_cm3"] * 1e6, a, a + d["shell_thickness_nm"] * 1e-9,
                      material.permittivity_rel, Eg, dp, dn, d["dit_cm2eV"] * 1e4, cnl,
                      b=a + d.get("interlayer_nm", 0.0) * 1e-9)
