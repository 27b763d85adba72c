"""Depletion-approximation engine for radial p-n nanowires: the four-regime analytic model of
docs/physics.md section 7, vectorised over arrays of designs.

Geometry and charges (p-core/n-shell; an n-core design is solved as its mirror image):
core 0 <= r < a of acceptors N_A, an undoped (intrinsic) interlayer a <= r < b (b = a +
interlayer; b = a without one), shell b <= r <= R of donors N_D, surface states D_it about the
neutral level E_cnl at r = R. In a uniformly charged cylinder region whose field vanishes at
r0, psi(r1) - psi(r0) = -(q N / 4 eps) [r1^2 - r0^2 - 2 r0^2 ln(r1/r0)]; in the uncharged
interlayer the field is that of the enclosed charge, E(r) = Q_enc / (2 pi eps r) per unit
length, and adds the drop (Q_enc / 2 pi eps) ln(b/a) (Gauss's law in a cylinder; Jackson,
Classical Electrodynamics, 3rd ed., sec. 1.3). With u = r_p^2/a^2, w = r_n^2/a^2 (the shell's
zero-field radius), beta = b^2/a^2, rho = R^2/a^2, v = r_s^2/R^2 and h(x) = 1 - x + x ln x the
balances become

  junction   K a^2 [N_A h(u) + N_A (1 - u) ln beta + N_D beta h(w/beta)] = V_bi0,
             w = beta + (N_A/N_D)(1 - u)
  surface    N_D R (1 - v)/2 = D_it [phi_0 - K N_D R^2 h(v)],   phi_0 = E_g - delta_n - E_cnl
  coupled    N_D a^2 (rho - w)/(2R) = D_it [delta_p + psi_R(u) - E_cnl]
             psi_R = K a^2 [N_A h(u) + N_A (1 - u) ln beta - N_D (rho - beta - w ln(rho/beta))]

with K = q/(4 eps), delta_p = E_F - E_v in the neutral core, delta_n = E_c - E_F in the neutral
shell, and V_bi0 = E_g - delta_p - delta_n (Sze & Ng, Physics of Semiconductor Devices, 3rd
ed., 2007, sec. 2.2, eq. 2.10 in the Boltzmann limit; with incomplete ionisation the bulk
levels delta_p, delta_n come from the ionised dopants, ``_ionisation``, while the depletion
regions stay fully ionised). The interlayer terms leave the derivatives of the junction and
coupled balances as they are without one (d/dq of the junction balance is K a^2 N_A ln(w/u)).
Each balance is monotone in its unknown and is solved by a vectorised safeguarded Newton
iteration (``_roots``). beta = 1 gives the p-n wire exactly.

Regimes: junction and surface solved alone; if the junction's shell edge r_n lies inside the
surface's edge r_s they do not interact (regime both-neutral, or core-depleted when the junction
alone empties the core). Otherwise the shell has no neutral region and the coupled balance fixes
r_p (shell-depleted), or the core empties too (all-depleted).
V_bi = max over the shell of psi - min over the core of psi.
"""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor

import numpy as np

from ._constants import CM2_TO_M2, CM3_TO_M3, EPS0, K_B_EV, NM, Q
from ._design import REGIMES, DesignTable, categories, normalize_designs
from ._errors import DesignError
from ._ionisation import check_ionisation, ionisation_column, localised_share, row_dopants
from ._materials import get_material
from ._roots import solve_bracketed
from ._statistics import check_statistics, intrinsic_density, occupancy, reduced_level
from ._trees import threads as worker_threads
from ._tunnel import tunnel_log10
from ._validity import INTRINSIC_SHARE_LIMIT, beyond_parabolic, intrinsic_text, penetration_text

_TINY = 1e-300
LEVEL_XTOL = 1e-12  #: tolerance of the reduced bulk level under incomplete ionisation [1]


def _h(x):
    """h(x) = 1 - x + x ln x [1]; h(0) = 1, h(1) = 0, h'(x) = ln x."""
    return 1.0 - x + x * np.log(np.maximum(x, _TINY))


def _ln(x):
    return np.log(np.maximum(x, _TINY))


def material_arrays(material, temperature_K, statistics="fermi-dirac", core_doping_cm3=None,
                    shell_doping_cm3=None, p_core=None):
    """Per-row material constants at temperature: E_g [eV], eps_r [1], N_c, N_v [cm^-3],
    default neutral level [eV], kT [eV]. ``material`` is an array of canonical names."""
    t = np.asarray(temperature_K, dtype=float)
    n = t.size
    out = {k: np.empty(n) for k in ("band_gap_eV", "permittivity_rel", "nc_cm3", "nv_cm3", "cnl_eV")}
    names, inv = categories(material, n)
    for k, name in enumerate(names):
        sel = inv == k
        if not name:
            for v in out.values():
                v[sel] = np.nan
            continue
        m = get_material(name)
        with np.errstate(all="ignore"):  # rows refused by validation may carry NaN or negative T
            out["band_gap_eV"][sel] = m.band_gap(t[sel])
            out["nc_cm3"][sel] = m.nc(t[sel])
            out["nv_cm3"][sel] = m.nv(t[sel])
        out["permittivity_rel"][sel] = m.permittivity_rel
        out["cnl_eV"][sel] = m.cnl_eV
    out["kT_eV"] = K_B_EV * t
    return out


def bulk_levels(doping_cm3, dos_cm3, kt_eV, statistics, level_eV=None, degeneracy=None, share=None):
    """Distance [eV] from the Fermi level to the majority band edge in neutral material:
    E_c - E_F (n-type, with N_c) or E_F - E_v (p-type, with N_v). Negative when degenerate.
    Full ionisation: majority density = doping (Sze & Ng, 3rd ed., eq. 1.23 (Boltzmann) and 1.16
    (F_1/2)). With ``level_eV`` (the dopant's ionisation energy E_i [eV]), ``degeneracy`` g [1]
    and ``share`` s [1] (``_ionisation``): majority density = ionised dopants,
    N_dos F(eta) = N (1 - s / (1 + exp(w))), w = eta + E_i/kT + ln g, eta the reduced level
    (Sze & Ng, 3rd ed., eq. 1.38-1.39 with the neutrality of sec. 1.4.2, minority carriers
    neglected as in the full case); solved for rows with s > 0 by ``solve_bracketed``."""
    eta = reduced_level(doping_cm3, dos_cm3, statistics)
    if share is None or not np.any(share > 0):
        return -kt_eV * eta
    i = np.flatnonzero(share > 0)
    kt = np.broadcast_to(kt_eV, eta.shape)[i]
    p = dict(L=np.log(np.asarray(doping_cm3, dtype=float)[i] / np.asarray(dos_cm3, dtype=float)[i]),
             c=level_eV[i] / kt + np.log(degeneracy[i]), s=share[i])

    def f(x, q):  # ln F(eta) - ln(ionised fraction) - ln(N/N_dos), increasing in eta
        occ, docc = occupancy(x, statistics)
        sig = 1.0 / (1.0 + np.exp(-np.minimum(x + q["c"], 700.0)))  # 1 / (1 + exp(-w))
        frac = 1.0 - q["s"] * sig
        return np.log(occ) - np.log(frac) - q["L"], docc / occ + q["s"] * sig * (1.0 - sig) / frac

    # bracket: the full-ionisation level above; below, F(eta) <= e^eta and -ln(fraction) <= max(w, 0) + ln 2
    hi = eta[i]
    lo = np.minimum(np.minimum(0.0, 0.5 * (p["L"] - p["c"] - np.log(2.0))), p["L"] - np.log(2.0)) - 1.0
    with np.errstate(all="ignore"):
        root, _ = solve_bracketed(f, p, lo, hi, x0=hi, xtol=LEVEL_XTOL)
    eta = eta.copy()
    eta[i] = root
    return -kt_eV * eta


def bulk_level(doping_cm3, dos_cm3, temperature_K, statistics: str = "fermi-dirac", ionisation_eV=None,
               degeneracy=2.0, mott_cm3=np.inf):
    """Majority band edge to Fermi level [eV] in neutral material (E_c - E_F for a donor-doped
    region with ``dos_cm3`` = N_c, E_F - E_v for an acceptor-doped one with N_v; negative when
    degenerate) at doping ``doping_cm3`` [cm^-3] and ``temperature_K`` [K]. ``ionisation_eV``
    (the dopant's dilute-limit ionisation energy [eV]; None: full ionisation), ``degeneracy``
    g [1] and ``mott_cm3`` (Mott density [cm^-3]) give the incomplete ionisation of
    ``_ionisation`` (Sze & Ng, 3rd ed., eq. 1.38-1.39). Minority carriers are neglected."""
    n = np.asarray(doping_cm3, dtype=float)
    shape = np.broadcast_shapes(n.shape, np.shape(dos_cm3), np.shape(temperature_K))
    n = np.broadcast_to(n, shape).ravel()
    dos = np.broadcast_to(np.asarray(dos_cm3, dtype=float), shape).ravel()
    kt = np.broadcast_to(K_B_EV * np.asarray(temperature_K, dtype=float), shape).ravel()
    statistics = check_statistics(statistics)
    if ionisation_eV is None:
        return bulk_levels(n, dos, kt, statistics).reshape(shape)
    s = localised_share(n, np.broadcast_to(np.asarray(mott_cm3, dtype=float), shape).ravel())
    e = np.broadcast_to(np.asarray(ionisation_eV, dtype=float), shape).ravel() * s
    g = np.broadcast_to(np.asarray(degeneracy, dtype=float), shape).ravel()
    return bulk_levels(n, dos, kt, statistics, e, g, s).reshape(shape)


def solve_pcore(NA, ND, a, R, eps, Eg, dp, dn, Dit, Ecnl, b=None):
    """Solve p-core/n-shell designs (all SI: m^-3, m, F/m, eV, m^-2 eV^-1) with the depletion
    approximation; ``b`` [m] is the inner radius of the doped shell (default ``a``: no
    interlayer). Returns a dict of internal arrays (see ``outputs``)."""
    b = a if b is None else b
    K = Q / (4.0 * eps)  # [V m]: a potential is K * N [m^-3] * r^2 [m^2]
    vbi0 = Eg - dp - dn
    phi0 = Eg - dn - Ecnl
    ratio = NA / ND
    rho = (R / a) ** 2
    beta = (b / a) ** 2
    lnrho, lnbeta = np.log(rho), np.log(beta)
    Ka2 = K * a * a
    zero, one = np.zeros_like(a), np.ones_like(a)
    common = dict(A=Ka2 * NA, B=Ka2 * ND, ratio=ratio, beta=beta, lnbeta=lnbeta)

    # junction alone; unknown q = 1 - u (core depletion fraction), f increasing in q
    pj = dict(common, vbi0=vbi0)

    def fj(q, p):
        u, w = 1.0 - q, p["beta"] + p["ratio"] * q
        f = p["A"] * (_h(u) + q * p["lnbeta"]) + p["B"] * p["beta"] * _h(w / p["beta"]) - p["vbi0"]
        return f, p["A"] * (_ln(w) - _ln(u))

    fj1, _ = fj(one, pj)
    u_j = zero.copy()  # core emptied by the junction alone where fj(1) <= 0
    i = np.flatnonzero(fj1 > 0.0)
    pj = {k: v[i] for k, v in pj.items()}
    # planar p-i-n limit: x_p (1 + N_A/N_D) x_p + 2 d x_p = V_bi0 / (2 K N_A), q ~ 2 x_p / a
    vn = np.maximum(pj["vbi0"], 0.0) * a[i] * a[i] / (2.0 * pj["A"])
    d = a[i] * (np.sqrt(pj["beta"]) - 1.0)
    x0 = vn / (d + np.sqrt(d * d + (1.0 + pj["ratio"]) * vn))
    q0 = np.where(vn > 0, 2.0 * x0 / a[i], 0.0)
    q_j, it_j = solve_bracketed(fj, pj, zero[i], one[i], x0=np.minimum(q0, 0.999))
    u_j[i] = 1.0 - q_j
    w_j = beta + ratio * (1.0 - u_j)

    # surface alone; unknown q = 1 - v (surface depletion fraction of R^2), f increasing in q.
    # The doped shell ends at b; a root below b (or r_n) only means the two edges meet (coupled).
    ps = dict(L=ND * R / 2.0, D=Dit, phi0=phi0, C=K * ND * R * R)

    def fs(q, p):
        v = 1.0 - q
        return p["L"] * q - p["D"] * (p["phi0"] - p["C"] * _h(v)), p["L"] - p["D"] * p["C"] * _ln(v)

    fs1, _ = fs(one, ps)
    v_s = zero.copy()  # surface alone would empty the whole wire where fs(1) <= 0
    i = np.flatnonzero(fs1 > 0.0)
    ps = {k: v[i] for k, v in ps.items()}
    bb, pos = ps["L"], np.maximum(ps["phi0"], 0.0)
    q0 = 2.0 * ps["D"] * pos / (bb + np.sqrt(bb * bb + 2.0 * ps["D"] ** 2 * ps["C"] * pos))  # h(1-q) ~ q^2/2
    q_s, it_s = solve_bracketed(fs, ps, zero[i], one[i], x0=np.minimum(q0, 0.999))
    v_s[i] = 1.0 - q_s
    r_n = a * np.sqrt(w_j)
    r_s = R * np.sqrt(v_s)
    coupled = r_n >= r_s

    # coupled (shell fully depleted); unknown s = r_p/a (u = s^2 keeps the slope finite at
    # s = 0), f increasing in s. Solved only for the coupled rows.
    def psi_R(u, w, p):
        return (p["A"] * (_h(u) + (1.0 - u) * p["lnbeta"])
                - p["B"] * (p["rho"] - p["beta"] - w * (p["lnrho"] - p["lnbeta"])))

    def fc(s, p):
        u = s * s
        w = p["beta"] + p["ratio"] * (1.0 - u)
        f = p["S"] * (p["rho"] - w) - p["D"] * (p["dp"] + psi_R(u, w, p) - p["Ecnl"])
        df = 2.0 * s * (p["S"] * p["ratio"] - p["D"] * p["A"] * (_ln(u) - p["lnrho"]))
        return f, df

    c = np.flatnonzero(coupled)
    pc = dict(common, rho=rho, lnrho=lnrho, S=ND * a * a / (2.0 * R), D=Dit, dp=dp, Ecnl=Ecnl)
    pc = {k: v[c] for k, v in pc.items()}
    fc0, _ = fc(zero[c], pc)
    fc1, _ = fc(one[c], pc)
    overcharged = np.zeros_like(coupled)
    overcharged[c] = fc1 < 0.0
    u = u_j.copy()
    u[c] = 0.0  # core emptied too where fc(0) >= 0
    interior = fc0 < 0.0
    c = c[interior]
    pc = {k: v[interior] for k, v in pc.items()}
    s_c, it_c = solve_bracketed(fc, pc, zero[c], one[c], x0=np.sqrt(u_j[c]))
    u[c] = s_c * s_c
    w = beta + ratio * (1.0 - u)
    return dict(K=K, vbi0=vbi0, phi0=phi0, u=u, w=w, v=v_s, r_n=r_n, r_s=r_s, coupled=coupled,
                overcharged=overcharged, rho=rho, beta=beta,
                psi_R=psi_R(u, w, dict(common, rho=rho, lnrho=lnrho)),
                iterations=np.array([it_j.max(initial=0), it_s.max(initial=0), it_c.max(initial=0)]),
                mean_iterations=np.array([it_j.mean() if it_j.size else 0, it_s.mean() if it_s.size else 0,
                                          it_c.mean() if it_c.size else 0]))


def outputs(s, NA, ND, a, R, Eg, dp, dn, Dit, Ecnl, eps=None, b=None):
    """Output columns (SI lengths), margins and the junction's peak field [V/m] from the
    internal solution ``s``. The field |E(r)| = q N_A (r^2 - r_p^2) / (2 eps r) of the depleted
    core grows up to r = a and falls as 1/r through the interlayer and the shell (Gauss's law in
    a cylinder, Jackson 3rd ed. sec. 1.3), so the junction's peak is q N_A a (1 - u) / (2 eps)."""
    b = a if b is None else b
    K, u, w, coupled, beta = s["K"], s["u"], s["w"], s["coupled"], s["beta"]
    vbi0 = s["vbi0"]
    Ka2 = K * a * a
    lnbeta = _ln(beta)
    core_neutral = u > 0.0
    core_drop = Ka2 * NA * (_h(u) + (1.0 - u) * lnbeta)  # axis or r_p to b
    # decoupled: V_bi = V_bi0 if the core keeps a neutral region, else the junction's full-core value
    vbi_dec = np.where(core_neutral, vbi0, core_drop + Ka2 * ND * beta * _h(w / beta))
    bend_dec = K * ND * R * R * _h(s["v"])
    # coupled: potential maximum of the shell at r_m = min(r_0, R), frame psi = 0 at core neutral/axis
    xm = np.minimum(w, s["rho"])  # r_m^2 / a^2
    psi_m = core_drop - Ka2 * ND * (xm - beta - w * (_ln(xm) - lnbeta))
    vbi = np.where(coupled, psi_m, vbi_dec)
    bending = np.where(coupled, psi_m - s["psi_R"], bend_dec)
    regime = np.where(coupled, np.where(core_neutral, 2, 3), np.where(core_neutral, 0, 1))
    # continuous margins, positive where the region keeps a neutral part
    with np.errstate(divide="ignore", invalid="ignore"):
        qs = ND * a * a * (s["rho"] - w) / (2.0 * R) / Dit  # E_F - E_cnl at the surface [eV]
        fermi_minus_ev_R = Ecnl + qs  # E_F - E_v(R), frame psi(0) = 0 when the core is empty
        dc_all = fermi_minus_ev_R - s["psi_R"] - dp
        ds_all = Eg - (fermi_minus_ev_R + psi_m - s["psi_R"]) - dn
    dc = np.where(coupled, dc_all, vbi0 - vbi)
    ds = np.where(core_neutral, vbi0 - vbi, ds_all)
    t = R - b  # doped shell thickness
    core_margin = np.where(core_neutral, np.sqrt(u), -np.sqrt(np.maximum(dc, 0.0) / (K * NA * a * a)))
    shell_margin = np.where(coupled, -np.sqrt(np.maximum(ds, 0.0) / (K * ND * t * t)), (s["r_s"] - s["r_n"]) / t)
    surface_y = np.where(coupled, fermi_minus_ev_R, Eg - dn - bend_dec)  # E_F - E_v at r = R [eV]
    return dict(regime_code=regime, vbi_V=vbi, vbi0_V=vbi0, core_neutral_radius_m=a * np.sqrt(u),
                junction_edge_m=np.where(coupled, a * np.sqrt(xm), s["r_n"]),
                shell_neutral_m=np.where(coupled, 0.0, s["r_s"] - s["r_n"]), surface_bending_V=bending,
                core_margin=core_margin, shell_margin=shell_margin, surface_barrier_V=s["phi0"],
                peak_field_V_per_m=2.0 * K * NA * a * (1.0 - u), surface_y=surface_y)


def prepare(table: DesignTable, statistics: str, dopants=None, mat=None):
    """SI arrays of the mirrored p-core problem for every row of a validated table. ``dopants``:
    the per-row dopant data of ``_ionisation.row_dopants`` (None: full ionisation); the bulk
    levels (so V_bi0) follow it, the depletion regions stay fully ionised. ``mat``: the table's
    ``material_arrays`` when the caller has them already."""
    v = table.values
    mat = material_arrays(table.material, v["temperature_K"], statistics) if mat is None else mat
    p = table.p_core
    Eg, kt = mat["band_gap_eV"], mat["kT_eV"]
    cnl = np.where(np.isnan(v["cnl_eV"]), mat["cnl_eV"], v["cnl_eV"])
    core_dos = np.where(p, mat["nv_cm3"], mat["nc_cm3"])
    shell_dos = np.where(p, mat["nc_cm3"], mat["nv_cm3"])
    ok = table.ok
    safe = lambda x, fill: np.where(ok, x, fill)  # noqa: E731  keep invalid rows finite
    kt2 = np.tile(safe(kt, 0.025), 2)  # both regions in one call (one Newton loop)
    ion = {} if dopants is None else dict(
        level_eV=np.concatenate([dopants["core_E"], dopants["shell_E"]]),
        degeneracy=np.concatenate([dopants["core_g"], dopants["shell_g"]]),
        share=np.concatenate([safe(dopants["core_s"], 0.0), safe(dopants["shell_s"], 0.0)]))
    levels = bulk_levels(np.concatenate([safe(v["core_doping_cm3"], 1e17), safe(v["shell_doping_cm3"], 1e17)]),
                         np.concatenate([safe(core_dos, 1e18), safe(shell_dos, 1e18)]), kt2, statistics, **ion)
    dp, dn = levels[:table.n], levels[table.n:]
    a = safe(v["core_radius_nm"], 50.0) * NM
    return dict(
        NA=safe(v["core_doping_cm3"], 1e17) * CM3_TO_M3, ND=safe(v["shell_doping_cm3"], 1e17) * CM3_TO_M3,
        a=a, R=a + safe(v["shell_thickness_nm"], 50.0) * NM, b=a + safe(v["interlayer_nm"], 0.0) * NM,
        eps=safe(mat["permittivity_rel"], 12.0) * EPS0, Eg=safe(Eg, 1.0), dp=dp, dn=dn,
        Dit=safe(v["dit_cm2eV"], 0.0) * CM2_TO_M2, Ecnl=safe(np.where(p, cnl, Eg - cnl), 0.5),
    ), cnl


def row_status(table: DesignTable, prob, sol, out, cnl, validity: bool = False, mat=None):
    """Status per row: "ok" or why the depletion model gives no answer. ``validity`` adds the
    limits of ``_validity`` with the reference solver's texts (the engine's own answers; the
    solver seeds its grid without them): a neutral core's or shell's Fermi level beyond the
    parabolic-band limit (first: the model's inputs already leave it), intrinsic carriers
    reaching ``INTRINSIC_SHARE_LIMIT`` of the lighter doping (needs ``mat``, the table's
    ``material_arrays``), a charged surface whose Fermi level lies that far inside a band (after
    the regime checks), and finite margins, extents and peak field."""
    status = table.status.copy()
    Eg, mirrored = prob["Eg"], ~table.p_core

    def fail(mask, text):
        sel = mask & (status == "ok")
        status[sel] = text if isinstance(text, str) else text[sel]

    def beyond(mask, where, y, suffix=""):
        for i in np.flatnonzero(mask & (status == "ok")):
            status[i] = penetration_text(where, y[i], Eg[i], mirrored[i]) + suffix

    y_core, y_shell = prob["dp"], Eg - prob["dn"]  # E_F - E_v of the neutral core and shell [eV]
    if validity:
        beyond(beyond_parabolic(y_core, Eg), "neutral core's", y_core)
        beyond(beyond_parabolic(y_shell, Eg), "neutral shell's", y_shell)
        if mat is not None:
            v = table.values
            with np.errstate(all="ignore"):
                ni = intrinsic_density(mat["band_gap_eV"], mat["nc_cm3"], mat["nv_cm3"], v["temperature_K"])
                light = np.minimum(v["core_doping_cm3"], v["shell_doping_cm3"])
            for i in np.flatnonzero((ni >= INTRINSIC_SHARE_LIMIT * light) & (status == "ok")):
                status[i] = intrinsic_text(ni[i], light[i])
    fail(sol["vbi0"] <= 0, "no built-in potential: these dopings give V_bi0 <= 0")
    acc = (prob["Dit"] > 0) & (sol["phi0"] < 0)
    if acc.any():
        fail(acc, np.array([f"surface accumulates: neutral level {c:.3g} eV lies past the shell's Fermi level; "
                            "outside the depletion model" for c in cnl], dtype=object))
    fail(sol["overcharged"], "surface states hold more charge than the depleted shell; outside the depletion model")
    keys = ("vbi_V", "surface_bending_V", "core_margin")
    if validity:
        y_s = out["surface_y"]
        beyond(beyond_parabolic(y_s, Eg) & (prob["Dit"] > 0), "surface", y_s, "; surface pinned inside a band")
        keys += ("shell_margin", "core_neutral_radius_m", "shell_neutral_m", "junction_edge_m", "peak_field_V_per_m")
    finite = np.ones(table.n, dtype=bool)
    for k in keys:
        finite &= np.isfinite(out[k])
    fail(~finite, "depletion engine: no finite solution")
    return status


CHUNK_ROWS = 1 << 16  #: rows per work unit: keeps temporaries in cache
MAX_THREADS = 256  #: the most worker threads ``deplete`` takes


def deplete_table(table: DesignTable, statistics: str, ionisation: str = "full", validity: bool = True,
                  mat: dict | None = None) -> dict:
    """``deplete`` on a validated table. ``validity=False`` leaves out the limits of ``_validity``
    (the surrogate's features keep their definition, ``FEATURES_VERSION``). ``mat``: the table's
    ``material_arrays`` when the caller has them already."""
    incomplete, refused, dopants = row_dopants(table, ionisation)
    if refused is not None:
        table = DesignTable(table.n, table.material, table.p_core, table.values, refused)
    if mat is None:
        mat = material_arrays(table.material, table.values["temperature_K"], statistics)
    prob, cnl = prepare(table, statistics, dopants if incomplete.any() else None, mat=mat)
    with np.errstate(all="ignore"):
        sol = solve_pcore(**prob)
        out = outputs(sol, **prob)
    status = row_status(table, prob, sol, out, cnl, validity=validity, mat=mat)
    good = status == "ok"
    nan = np.nan
    with np.errstate(all="ignore"):  # Kane's estimate at the junction's peak field (_tunnel)
        tunnel = tunnel_log10(out["peak_field_V_per_m"], prob["Eg"], mat["nc_cm3"], mat["nv_cm3"],
                              table.values["temperature_K"])
    names = np.array(REGIMES + ("",), dtype=object)
    return {
        "regime": names[np.where(good, out["regime_code"], 4)],
        "vbi_V": np.where(good, out["vbi_V"], nan),
        "vbi0_V": np.where(good, out["vbi0_V"], nan),
        "core_neutral_radius_nm": np.where(good, out["core_neutral_radius_m"] / NM, nan),
        "shell_neutral_nm": np.where(good, out["shell_neutral_m"] / NM, nan),
        "surface_bending_V": np.where(good, out["surface_bending_V"], nan),
        "engine": np.full(table.n, "depletion", dtype=object),
        "status": status,
        "core_margin": np.where(good, out["core_margin"], nan),
        "shell_margin": np.where(good, out["shell_margin"], nan),
        "surface_barrier_V": np.where(good, out["surface_barrier_V"], nan),
        "junction_edge_nm": np.where(good, out["junction_edge_m"] / NM, nan),
        "peak_field_V_per_cm": np.where(good, out["peak_field_V_per_m"] / 100.0, nan),
        "tunnel_log10": np.where(good, tunnel, nan),
        "ionisation": ionisation_column(DesignTable(table.n, table.material, table.p_core, table.values, status),
                                        incomplete),
    }


def deplete(designs, statistics: str = "fermi-dirac", threads: int | None = None, ionisation: str = "auto") -> dict:
    """Regime and built-in potential of each design by the depletion approximation.

    ``designs``: mapping of design-table column -> array or scalar, a list of row dicts, or a
    pandas DataFrame (docs/design-table.md names and units). ``statistics``: ``"fermi-dirac"`` or
    ``"boltzmann"`` for the bulk Fermi levels. ``threads``: worker threads for large batches
    (default: ``radialpn.worker_threads()``: $RADIALPN_THREADS, $OMP_NUM_THREADS or the cores this process may run on). Returns a mapping of the output columns of the design table (docs/design-table.md) (numpy
    arrays, one entry per input row, NaN and regime "" where ``status`` is not "ok") plus
    continuous boundary margins: ``core_margin`` (r_p/a where the core keeps a neutral region;
    below zero, -sqrt(dV / (q N a^2 / 4 eps)) where it is emptied with its potential dV short
    of neutral), ``shell_margin`` (neutral thickness over shell thickness, likewise extended
    below zero), ``surface_barrier_V`` (the surface barrier at full pinning) and
    ``junction_edge_nm`` (radius where the junction's depletion of the shell ends, or the
    shell's potential extremum when the shell is fully depleted), ``peak_field_V_per_cm`` (the
    junction's peak field [V/cm], at the core's edge) and ``tunnel_log10`` (Kane's WKB estimate
    at that field [1], ``_tunnel``). ``interlayer_nm`` > 0 gives the p-i-n wire (module
    docstring). Rows beyond the parabolic-band limit of ``_validity`` get the solver's status.
    ``ionisation``: ``"auto"``,
    ``"full"`` or ``"incomplete"`` for the bulk levels (``_ionisation``; docs/physics.md section
    4.1); the column ``ionisation`` says which model each row used.
    """
    statistics = check_statistics(statistics)
    ionisation = check_ionisation(ionisation)
    if threads is not None and (isinstance(threads, bool) or not isinstance(threads, (int, np.integer))
                                or not 1 <= threads <= MAX_THREADS):
        raise DesignError("threads", f"a whole number in [1, {MAX_THREADS}]", threads)
    table = designs if isinstance(designs, DesignTable) else normalize_designs(designs)
    if table.n <= CHUNK_ROWS:
        return deplete_table(table, statistics, ionisation)
    parts = [slice(i, min(i + CHUNK_ROWS, table.n)) for i in range(0, table.n, CHUNK_ROWS)]
    work = lambda sl: deplete_table(table.take(sl), statistics, ionisation)  # noqa: E731
    nthreads = threads if threads is not None else worker_threads()
    if nthreads > 1:
        with ThreadPoolExecutor(nthreads) as pool:
            results = list(pool.map(work, parts))
    else:
        results = [work(sl) for sl in parts]
    return {k: np.concatenate([r[k] for r in results]) for k in results[0]}
