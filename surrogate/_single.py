"""One design at a time, in plain Python floats: the single-query fast path of the surrogate.

A warm single query spends most of its time in per-call numpy overhead (dozens of array
operations on arrays of one element). This module answers the common case, one valid design
given as a mapping of scalars, with the same equations as the vectorised code in scalar
``math``: validation (``one_design``, the rules of ``_design.normalize_designs``), the
depletion engine (``_depletion``: the same balances, the same safeguarded Newton iteration of
``_roots.solve_bracketed`` element by element, the same Fermi-Dirac tables of
``_statistics``) and the model features (``_features``).

Whenever anything is not the plain case (a value to refuse, an interlayer, a row the
depletion engine does not answer, an arithmetic exception) these functions return None and the
caller takes the general path, which then writes the row's reason. Results equal the general
path's to rounding (the transcendental functions of ``math`` and of numpy may differ in the last
bit); ``tests/test_single.py`` checks that on random designs.
"""

from __future__ import annotations

import math

import numpy as np

from . import _statistics as _st
from ._constants import CM2_TO_M2, CM3_TO_M3, EPS0, K_B_EV, NM, Q
from ._design import INPUT_COLUMNS, NUMERIC, REGIMES, DesignTable, near_miss, parse_quantity
from ._errors import RadialpnError
from ._features import DIT_FLOOR
from ._ionisation import row_dopants
from ._materials import get_material
from ._roots import ROOT_MAXITER, ROOT_XTOL

_TINY = 1e-300
MATERIAL_CACHE = 256  #: (material, temperature) entries kept; the cache is cleared when full
_material_cache: dict = {}


def one_design(designs):
    """A ``DesignTable`` of one valid design given as a mapping of column -> scalar (or
    one-element list), else None (the general validation then decides, with its messages)."""
    if type(designs) is not dict:
        return None
    got = {}
    for k, v in designs.items():
        if k not in INPUT_COLUMNS:
            if near_miss(k):
                return None  # the general validation refuses it, naming the column meant
            continue
        if type(v) in (list, tuple):
            if len(v) != 1:
                return None
            v = v[0]
        if isinstance(v, (bool, np.bool_)) or not isinstance(v, (str, float, int, np.integer)):
            return None
        got[k] = v
    name, core = got.get("material"), got.get("core_type")
    if not isinstance(name, str) or not isinstance(core, str):
        return None
    try:
        material = get_material(name).name
    except RadialpnError:
        return None
    ct = core.strip().lower().removesuffix("-core").removesuffix("core")
    if ct not in ("p", "n"):
        return None
    values = {}
    for col, (lo, hi, default, _kind) in NUMERIC.items():
        v = got.get(col)
        if v is None:
            if default is None:
                return None
            x = default
        else:
            try:
                x = parse_quantity(col, v) if isinstance(v, str) else float(v)
            except (RadialpnError, OverflowError):
                return None
            if not (lo <= x <= hi):
                return None
        values[col] = np.array([x])
    il, t = values["interlayer_nm"][0], values["shell_thickness_nm"][0]
    if il > 0 and il > t - 0.5:
        return None
    return DesignTable(n=1, material=np.array([material], dtype=object), p_core=np.array([ct == "p"]),
                       values=values, status=np.array(["ok"], dtype=object))


def material_constants(name: str, temperature_K: float) -> tuple:
    """(E_g [eV], eps_r [1], N_c [cm^-3], N_v [cm^-3], default neutral level [eV]) of a
    material at one temperature [K], the values of ``_depletion.material_arrays``; cached."""
    m = get_material(name)
    key = (m, temperature_K)
    hit = _material_cache.get(key)
    if hit is None:
        if len(_material_cache) >= MATERIAL_CACHE:
            _material_cache.clear()
        t = np.array([temperature_K])
        hit = (float(m.band_gap(t)[0]), float(m.permittivity_rel), float(m.nc(t)[0]), float(m.nv(t)[0]),
               float(m.cnl_eV))
        _material_cache[key] = hit
    return hit


def _fermi_half(eta):
    """F_1/2 and F_-1/2 of one eta, as ``_statistics.fermi_half_and_derivative``."""
    if eta < _st.ETA_LO:
        e = math.exp(eta)
        return e - e * e / 2.0 ** 1.5, e - e * e / 2.0 ** 0.5
    if eta > _st.ETA_HI:
        f, fm = _st._sommerfeld(np.array([eta]))
        return float(f[0]), float(fm[0])
    tab = _st._forward_table()
    lnf, dlnf = tab["lnf"], tab["dlnf"]
    h = _st.TABLE_STEP
    s = (eta - _st.ETA_LO) / h
    i = min(int(s), lnf.size - 2)
    if not (tab["done"][i // _st.TABLE_BLOCK] and tab["done"][(i + 1) // _st.TABLE_BLOCK]):
        _st._ensure_forward(i, i + 1)
    u = s - i
    y0, y1 = float(lnf[i]), float(lnf[i + 1])
    d0, d1 = float(dlnf[i]) * h, float(dlnf[i + 1]) * h
    u2 = u * u
    u3 = u2 * u
    g = (2 * u3 - 3 * u2 + 1) * y0 + (u3 - 2 * u2 + u) * d0 + (-2 * u3 + 3 * u2) * y1 + (u3 - u2) * d1
    dg = ((6 * u2 - 6 * u) * y0 + (3 * u2 - 4 * u + 1) * d0 + (-6 * u2 + 6 * u) * y1 + (3 * u2 - 2 * u) * d1) / h
    fm = math.exp(g)
    return fm, fm * dg


def _fermi_half_inverse(y):
    """eta with F_1/2(eta) = y > 0, as ``_statistics.fermi_half_inverse``."""
    inv = _st._inverse_table()
    g0, step, eta_t, deta_t = float(inv["g0"]), inv["step"], inv["eta"], inv["deta"]
    lny = math.log(y)
    g1 = g0 + step * (eta_t.size - 1)
    if lny < g0:
        eta = lny + y / 2.0 ** 1.5
    elif lny > g1:
        eta = (0.75 * _st._SQRT_PI * y) ** (2.0 / 3.0)
    else:
        s = (lny - g0) / step
        i = min(max(int(s), 0), eta_t.size - 2)
        if not (inv["done"][i // _st.INVERSE_BLOCK] and inv["done"][(i + 1) // _st.INVERSE_BLOCK]):
            _st._ensure_inverse(i, i + 1)
        u = s - i
        u2 = u * u
        u3 = u2 * u
        eta = ((2 * u3 - 3 * u2 + 1) * float(eta_t[i]) + (u3 - 2 * u2 + u) * step * float(deta_t[i])
               + (-2 * u3 + 3 * u2) * float(eta_t[i + 1]) + (u3 - u2) * step * float(deta_t[i + 1]))
    for _ in range(30):
        f, df = _fermi_half(eta)
        d = (math.log(f) - lny) * f / df
        eta -= d
        if abs(d) < _st._NEWTON_STOP * max(1.0, abs(eta)):
            break
    return eta


def _level(doping, dos, kt, statistics):
    """``_depletion.bulk_levels`` for one region [eV]."""
    ratio = doping / dos
    return -kt * (math.log(ratio) if statistics == "boltzmann" else _fermi_half_inverse(ratio))


def _h(x):
    return 1.0 - x + x * math.log(max(x, _TINY))


def _ln(x):
    return math.log(max(x, _TINY))


def _div(a, b):
    """a / b with IEEE 754 results where Python raises (numpy's division under errstate)."""
    try:
        return a / b
    except ZeroDivisionError:
        return math.nan if a != a or a == 0 else math.copysign(math.inf, a) * math.copysign(1.0, b)


def _root(fun, x0, lo=0.0, hi=1.0, xtol=ROOT_XTOL, maxiter=ROOT_MAXITER):
    """``_roots.solve_bracketed`` for one equation (the same steps, element by element)."""
    x = min(max(x0, lo), hi)
    for _ in range(maxiter):
        f, df = fun(x)
        if f < 0:
            lo = x
        else:
            hi = x
        step = _div(f, df)
        xn = x - step
        small = abs(step) <= xtol
        x = xn if lo < xn < hi else (x if small else 0.5 * (lo + hi))
        if small or hi - lo <= xtol:
            return x
    return x


def _solve(NA, ND, a, R, eps, Eg, dp, dn, Dit, Ecnl):
    """``_depletion.solve_pcore`` and ``outputs`` for one design (SI). None where the
    depletion engine refuses the row (``_depletion.row_status``)."""
    K = Q / (4.0 * eps)
    vbi0 = Eg - dp - dn
    phi0 = Eg - dn - Ecnl
    if not vbi0 > 0 or (Dit > 0 and phi0 < 0):
        return None
    ratio = NA / ND
    rho = (R / a) * (R / a)
    lnrho = math.log(rho)
    Ka2 = K * a * a
    A, B = Ka2 * NA, Ka2 * ND

    def fj(q):
        u, w = 1.0 - q, 1.0 + ratio * q
        return A * _h(u) + B * _h(w) - vbi0, A * (_ln(w) - _ln(u))

    u_j = 0.0
    if fj(1.0)[0] > 0.0:
        q0 = math.sqrt(2.0 * max(vbi0, 0.0) / (A * (1.0 + ratio)))
        u_j = 1.0 - _root(fj, min(q0, 0.999))
    w_j = 1.0 + ratio * (1.0 - u_j)
    L, C = ND * R / 2.0, K * ND * R * R

    def fs(q):
        v = 1.0 - q
        return L * q - Dit * (phi0 - C * _h(v)), L - Dit * C * _ln(v)

    v_s = 0.0
    if fs(1.0)[0] > 0.0:
        pos = max(phi0, 0.0)
        q0 = 2.0 * Dit * pos / (L + math.sqrt(L * L + 2.0 * (Dit * Dit) * C * pos))
        v_s = 1.0 - _root(fs, min(q0, 0.999))
    r_n, r_s = a * math.sqrt(w_j), R * math.sqrt(v_s)
    coupled = r_n >= r_s
    S = ND * a * a / (2.0 * R)

    def psi_R(u, w):
        return A * _h(u) - B * (rho - 1.0 - w * lnrho)

    def fc(s):
        u = s * s
        w = 1.0 + ratio * (1.0 - u)
        return (S * (rho - w) - Dit * (dp + psi_R(u, w) - Ecnl),
                2.0 * s * (S * ratio - Dit * A * (_ln(u) - lnrho)))

    u = u_j
    if coupled:
        if fc(1.0)[0] < 0.0:
            return None  # overcharged: outside the depletion model
        u = 0.0
        if fc(0.0)[0] < 0.0:
            s_c = _root(fc, math.sqrt(u_j))
            u = s_c * s_c
    w = 1.0 + ratio * (1.0 - u)
    psiR = psi_R(u, w)
    core_neutral = u > 0.0
    xm = min(w, rho)
    core_drop = Ka2 * NA * _h(u)  # the engine's grouping (``_depletion.outputs`` at beta = 1), so equal rounding
    psi_m = core_drop - Ka2 * ND * (xm - 1.0 - w * _ln(xm))
    if coupled:
        vbi, bending = psi_m, psi_m - psiR
        regime = 2 if core_neutral else 3
    else:
        vbi = vbi0 if core_neutral else core_drop + Ka2 * ND * _h(w)
        bending = K * ND * R * R * _h(v_s)
        regime = 0 if core_neutral else 1
    t = R - a
    if core_neutral:
        core_margin = math.sqrt(u)
    else:
        dc = (Ecnl + ND * a * a * (rho - w) / (2.0 * R) / Dit) - psiR - dp if coupled else vbi0 - vbi
        core_margin = -math.sqrt(max(dc, 0.0) / (K * NA * a * a))
    if coupled:
        ds = vbi0 - vbi if core_neutral else \
            Eg - ((Ecnl + ND * a * a * (rho - w) / (2.0 * R) / Dit) + psi_m - psiR) - dn
        shell_margin = -math.sqrt(max(ds, 0.0) / (K * ND * t * t))
    else:
        shell_margin = (r_s - r_n) / t
    out = dict(regime=regime, vbi_V=vbi, vbi0_V=vbi0, core_neutral_radius_nm=a * math.sqrt(u) / NM,
               shell_neutral_nm=0.0 if coupled else (r_s - r_n) / NM, surface_bending_V=bending,
               core_margin=core_margin, shell_margin=shell_margin, surface_barrier_V=phi0,
               junction_edge_nm=(a * math.sqrt(xm) if coupled else r_n) / NM)
    if not all(map(math.isfinite, (vbi, bending, core_margin))):
        return None
    return out


def features_one(table: DesignTable, statistics: str, ionisation: str = "full", incomplete: bool | None = None):
    """``_features.features`` for a one-row validated table: (X (1, n_features), depletion
    output mapping of one-element arrays), or None when the general path must answer (an
    interlayer, or a row ``ionisation`` resolves to incomplete ionisation; ``incomplete``: that
    resolution when the caller has it already)."""
    if table.n != 1 or table.status[0] != "ok":
        return None
    if incomplete is None:
        incomplete = ionisation != "full" and bool(row_dopants(table, ionisation)[0][0])
    if incomplete:
        return None
    v = {k: float(x[0]) for k, x in table.values.items()}
    got = feature_row(v, str(table.material[0]), bool(table.p_core[0]), statistics)
    if got is None:
        return None
    row, sol = got
    da = {k: np.array([x]) for k, x in sol.items() if k != "regime"}
    da.update(regime=np.array([REGIMES[sol["regime"]]], dtype=object), engine=np.array(["depletion"], dtype=object),
              status=np.array(["ok"], dtype=object))
    return np.array([row]), da


def feature_row(v: dict, material: str, p: bool, statistics: str):
    """The feature row (a list of floats) and the depletion outputs (floats) of one design given
    as column -> float ``v`` of a valid row under full ionisation, or None (``features_one``'s
    core, which the V_bi smoothing calls for each neighbour of a single design)."""
    if v["interlayer_nm"] > 0:
        return None
    try:
        Eg, eps_r, nc, nv, cnl0 = material_constants(material, v["temperature_K"])
        kt = K_B_EV * v["temperature_K"]
        cnl = cnl0 if math.isnan(v["cnl_eV"]) else v["cnl_eV"]
        na, nd = v["core_doping_cm3"], v["shell_doping_cm3"]
        dp = _level(na, nv if p else nc, kt, statistics)
        dn = _level(nd, nc if p else nv, kt, statistics)
        a = v["core_radius_nm"] * NM
        sol = _solve(na * CM3_TO_M3, nd * CM3_TO_M3, a, a + v["shell_thickness_nm"] * NM, eps_r * EPS0, Eg, dp, dn,
                     v["dit_cm2eV"] * CM2_TO_M2, cnl if p else Eg - cnl)
        if sol is None:
            return None
        r, t = v["core_radius_nm"], v["shell_thickness_nm"]
        eps = eps_r * EPS0
        ld_core = math.sqrt(eps * kt / (Q * na * 1e6)) / NM
        ld_shell = math.sqrt(eps * kt / (Q * nd * 1e6)) / NM
        lg = math.log10
        row = [lg(r), lg(t), lg(na), lg(nd), lg(v["dit_cm2eV"] + DIT_FLOOR), cnl, v["temperature_K"], sol["vbi_V"],
               sol["vbi0_V"], sol["vbi_V"] / sol["vbi0_V"], sol["core_margin"], sol["shell_margin"],
               sol["surface_bending_V"], sol["surface_barrier_V"], float(sol["regime"]), lg(r / ld_core),
               lg(t / ld_shell), sol["core_margin"] * r / ld_core, sol["shell_margin"] * t / ld_shell]
    except (ArithmeticError, ValueError):
        return None
    if not all(map(math.isfinite, row)):
        return None
    return row, sol
