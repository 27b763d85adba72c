"""Band profiles of the depletion approximation, rebuilt piecewise from the regime solution of
``_depletion`` (same equations, docs/physics.md sections 6-7). ``fermi_minus_ev`` is vectorised
over designs (it also seeds the reference solver); ``depletion_profile`` is the one-design
convenience for users and the front end."""

from __future__ import annotations

import numpy as np

from ._constants import NM
from ._depletion import deplete_table, prepare, solve_pcore
from ._design import check_design
from ._errors import RadialpnError
from ._ionisation import check_ionisation, row_dopants
from ._statistics import check_statistics

_TINY = 1e-300


def _region(r, r0):
    """(psi(r) - psi(r0)) / (-K N) [m^2] in a uniform region of charge density q N whose field
    vanishes at r0 (docs/physics.md section 6); r0 may be 0 (the log term then vanishes)."""
    r0 = np.asarray(r0, dtype=float)
    return r * r - r0 * r0 - 2.0 * r0 * r0 * np.log(np.maximum(r, _TINY) / np.maximum(r0, _TINY))


def fermi_minus_ev(prob: dict, sol: dict, r):
    """E_F - E_v(r) [eV] of the mirrored p-core problem by the depletion approximation.

    ``prob``/``sol``: the inputs and output of ``solve_pcore`` for B designs; ``r`` [m] of
    shape (N, B) (one column of radii per design). Returns shape (N, B).
    """
    K, u, w, v = sol["K"], sol["u"], sol["w"], sol["v"]
    NA, ND, a, R = prob["NA"], prob["ND"], prob["a"], prob["R"]
    b = prob.get("b", a)  # inner radius of the doped shell (interlayer a..b)
    rp, r0, rs = a * np.sqrt(u), a * np.sqrt(w), R * np.sqrt(v)
    coupled = sol["coupled"]
    # the interlayer carries the core's depleted charge's field, 2 K N_A a^2 (1 - u) / r
    # (Gauss's law in a cylinder, Jackson 3rd ed. sec. 1.3): psi(r) = psi(b) - G ln(b^2/r^2)
    G = K * NA * a * a * (1.0 - u)
    drop_i = G * np.log(b * b / (a * a))
    # decoupled frame: psi = 0 in the shell's neutral region
    d_shell = np.where(r <= r0, -K * ND * _region(r, r0), 0.0)
    d_shell = np.where(r >= rs, -K * ND * _region(r, rs), d_shell)
    d_psi_b = -K * ND * _region(b, r0)
    d_psi_p = d_psi_b - drop_i - K * NA * _region(a, rp)
    # coupled frame: psi = 0 at the core's neutral region (or its axis when emptied)
    c_psi_b = K * NA * _region(a, rp) + drop_i
    c_shell = c_psi_b - K * ND * (r * r - b * b - 2.0 * r0 * r0 * np.log(np.maximum(r, _TINY) / b))
    psi_shell = np.where(coupled, c_shell, d_shell)
    psi_inter = np.where(coupled, c_psi_b, d_psi_b) - G * np.log(b * b / np.maximum(r * r, _TINY))
    psi_p = np.where(coupled, 0.0, d_psi_p)
    psi_core = psi_p + np.where(r >= rp, K * NA * _region(r, rp), 0.0)
    psi = np.where(r < a, psi_core, np.where(r < b, psi_inter, psi_shell))
    with np.errstate(divide="ignore", invalid="ignore"):
        qs = ND * a * a * ((R / a) ** 2 - w) / (2.0 * R) / prob["Dit"]
    psi_R = c_psi_b - K * ND * (R * R - b * b - 2.0 * r0 * r0 * np.log(R / b))
    offset = np.where(~coupled, prob["Eg"] - prob["dn"],
                      np.where(u > 0, prob["dp"], prob["Ecnl"] + qs - psi_R))
    return offset + psi


def depletion_profile(design: dict, statistics: str = "fermi-dirac", points: int = 400, ionisation: str = "auto") -> dict:
    """Band edges of one design by the depletion approximation.

    Returns ``r_nm`` [nm], ``ec_eV`` and ``ev_eV`` [eV, relative to E_F = 0], ``region`` (a
    label per point: core-neutral, core-depleted, interlayer, shell-neutral, shell-depleted), the region edges
    ``core_neutral_radius_nm``, ``junction_edge_nm`` (where the junction's depletion of the
    shell ends, or the shell's potential extremum when the shell is fully depleted),
    ``surface_edge_nm`` (inner edge of the surface depletion), ``core_radius_nm``,
    ``outer_radius_nm`` [nm], with ``regime``, ``vbi_V`` and ``ionisation`` (the bulk levels'
    model, ``_ionisation``). Raises ``DesignError`` on bad
    input and ``RadialpnError`` if the design has no depletion-model answer.
    """
    statistics = check_statistics(statistics)
    ionisation = check_ionisation(ionisation)
    table = check_design(design)
    res = deplete_table(table, statistics, ionisation)
    if res["status"][0] != "ok":
        raise RadialpnError(str(res["status"][0]))
    incomplete, _, dopants = row_dopants(table, ionisation)
    prob, _ = prepare(table, statistics, dopants if incomplete.any() else None)
    with np.errstate(all="ignore"):
        sol = solve_pcore(**prob)
    a, R = float(prob["a"][0]), float(prob["R"][0])
    r = np.linspace(0.0, R, points)
    with np.errstate(all="ignore"):
        ev = -fermi_minus_ev(prob, sol, r[:, None])[:, 0]
    ec = ev + float(prob["Eg"][0])
    if not table.p_core[0]:  # mirror back: n-core bands are the p-core mirror's, negated
        ec, ev = -ev, -ec
    coupled = bool(sol["coupled"][0])
    r0 = a * np.sqrt(float(sol["w"][0]))
    rp = a * np.sqrt(float(sol["u"][0]))
    rs = R * np.sqrt(float(sol["v"][0]))
    shell_neutral = (~np.array(coupled)) & (r > r0) & (r < rs)
    b = float(prob["b"][0])
    region = np.where(r <= a, np.where(r < rp, "core-neutral", "core-depleted"),
                      np.where(r < b, "interlayer", np.where(shell_neutral, "shell-neutral", "shell-depleted")))
    return {
        "region": region,
        "r_nm": r / NM, "ec_eV": ec, "ev_eV": ev, "regime": str(res["regime"][0]), "vbi_V": float(res["vbi_V"][0]),
        "core_neutral_radius_nm": a * np.sqrt(float(sol["u"][0])) / NM, "core_radius_nm": a / NM,
        "outer_radius_nm": R / NM, "junction_edge_nm": min(r0, R) / NM,
        "surface_edge_nm": (R * np.sqrt(float(sol["v"][0])) if not coupled else min(r0, R)) / NM,
        "ionisation": str(res["ionisation"][0]),
    }
