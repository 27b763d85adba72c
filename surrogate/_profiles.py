"""Band profiles E_c(r), E_v(r) (E_F = 0) of the depletion approximation for one design,
rebuilt piecewise from the regime solution of ``_depletion`` (same equations, physics.md 3-4)."""

from __future__ import annotations

import numpy as np

from ._constants import NM
from ._depletion import _h, _prepare, solve_pcore
from ._design import check_design
from ._errors import RadialpnError
from ._statistics import check_statistics

_TINY = 1e-300


def _region(r, r0):
    """(psi(r) - psi(r0)) / (-K N) [m^2] in a uniform region of charge density q N whose
    field vanishes at r0 (physics.md section 3)."""
    return r * r - r0 * r0 - 2.0 * r0 * r0 * np.log(np.maximum(r, _TINY) / max(r0, _TINY))


def depletion_profile(design: dict, statistics: str = "fermi-dirac", points: int = 400) -> dict:
    """Band edges of one design by the depletion approximation.

    Returns ``r_nm`` [nm], ``ec_eV`` and ``ev_eV`` [eV, relative to E_F = 0], and the region
    edges ``core_neutral_radius_nm``, ``junction_edge_nm`` (shell side of the junction
    depletion), ``surface_edge_nm`` (inner edge of the surface depletion), ``core_radius_nm``,
    ``outer_radius_nm`` [nm], with ``regime``. Raises ``DesignError`` on bad input and
    ``RadialpnError`` if the design has no depletion-model answer.
    """
    from ._depletion import _deplete_table  # status checks in one place

    statistics = check_statistics(statistics)
    table = check_design(design)
    res = _deplete_table(table, statistics)
    if res["status"][0] != "ok":
        raise RadialpnError(str(res["status"][0]))
    prob, _ = _prepare(table, statistics)
    with np.errstate(all="ignore"):
        s = solve_pcore(**prob)
    p = {k: float(v[0]) for k, v in prob.items()}
    K, u, w, v = float(s["K"][0]), float(s["u"][0]), float(s["w"][0]), float(s["v"][0])
    NA, ND, a, R = p["NA"], p["ND"], p["a"], p["R"]
    rp, r0, rs = a * np.sqrt(u), a * np.sqrt(w), R * np.sqrt(v)
    r = np.linspace(0.0, R, points)
    core, shell = r < a, r >= a
    psi = np.empty_like(r)
    coupled = bool(s["coupled"][0])
    if not coupled:  # the shell keeps a neutral region: psi = 0 there
        psi[shell] = np.where(r[shell] <= r0, -K * ND * _region(r[shell], r0), 0.0)
        sd = shell & (r >= rs)
        psi[sd] = -K * ND * _region(r[sd], rs)
        psi_a = -K * ND * _region(a, r0)
        psi_p = psi_a - K * NA * _region(a, rp)
    else:  # frame psi = 0 at the core's neutral region (or its axis when emptied)
        psi_p = 0.0
        psi_a = K * NA * _region(a, rp)
        psi[shell] = psi_a - K * ND * (r[shell] ** 2 - a * a - 2.0 * r0 * r0 * np.log(r[shell] / a))
    psi[core] = psi_p + np.where(r[core] >= rp, K * NA * _region(r[core], rp), 0.0)
    if not coupled:
        fermi_minus_ev = p["Eg"] - p["dn"] + psi
    elif u > 0:
        fermi_minus_ev = p["dp"] + psi
    else:  # all depleted: the surface charge fixes the band position
        qs = ND * a * a * ((R / a) ** 2 - w) / (2.0 * R) / p["Dit"]
        fermi_minus_ev = p["Ecnl"] + qs + psi - psi[-1]
    ev = -fermi_minus_ev
    ec = ev + p["Eg"]
    if not table.p_core[0]:  # mirror back: n-core bands are the p-core mirror's, negated
        ec, ev = -ev, -ec
    out = {
        "r_nm": r / NM, "ec_eV": ec, "ev_eV": ev, "regime": str(res["regime"][0]),
        "core_neutral_radius_nm": rp / NM, "core_radius_nm": a / NM, "outer_radius_nm": R / NM,
        "junction_edge_nm": min(r0, R) / NM, "surface_edge_nm": (rs if not coupled else min(r0, R)) / NM,
        "vbi_V": float(res["vbi_V"][0]),
    }
    return out
