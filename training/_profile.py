"""Band profile of one design from the reference solver (for `radialpn profile`)."""

from __future__ import annotations

import numpy as np

from .._constants import NM
from .._design import REGIMES, check_design
from .._errors import RadialpnError
from .._ionisation import check_ionisation
from .._statistics import check_statistics

from ._solver import NODES, _chunk, _physics, _validity


def solver_profile(design: dict, statistics: str = "fermi-dirac", nodes: int = NODES, ionisation: str = "auto") -> dict:
    """Solved band edges of one design.

    Returns ``r_nm`` [nm], ``ec_eV``, ``ev_eV`` [eV, E_F = 0], ``n_cm3``, ``p_cm3`` [cm^-3] on the
    solver's grid, with ``regime``, ``vbi_V``, ``core_radius_nm``, ``interlayer_end_nm``,
    ``outer_radius_nm``, the neutral extents and ``ionisation`` (the model used). Raises ``DesignError`` on bad input and
    ``RadialpnError`` with the solver's reason where ``solve`` gives the row no number (no
    convergence, a non-finite output, a Fermi level beyond the parabolic-band limit).
    """
    statistics = check_statistics(statistics)
    ionisation = check_ionisation(ionisation)
    table = check_design(design)
    ph = _physics(table, statistics, ionisation)
    if ph["table"].status[0] != "ok":
        raise RadialpnError(str(ph["table"].status[0]))
    res = _chunk(ph, np.array([0]), statistics, nodes, profiles=True)
    # the solver's own checks on its answer (convergence, finite outputs, Fermi levels within the
    # parabolic-band limit): a design `solve` refuses gets no profile either
    status = _validity(res, ph["table"].p_core[:1], ph["table"].values["dit_cm2eV"][:1])[0]
    if status != "ok":
        raise RadialpnError(str(status))
    y, r, eg = res["y"][:, 0], res["r"][:, 0], float(res["Eg"][0])
    ev, ec = -y, eg - y
    hole, elec = res["hole"][:, 0], res["elec"][:, 0]
    if not table.p_core[0]:  # mirror back to the n-core frame
        ec, ev = -ev, -ec
        hole, elec = elec, hole
    a = float(ph["prob"]["a"][0])
    b = float(ph["b"][0])
    # mirrored frame: core p, shell n; the regime criterion's reference density (the solver's)
    na = float(res.get("NA_ref", ph["prob"]["NA"])[0])
    nd = float(res.get("ND_ref", ph["prob"]["ND"])[0])
    maj_core = res["hole"][:, 0] >= 0.5 * na
    maj_shell = res["elec"][:, 0] >= 0.5 * nd
    region = np.where(r <= a, np.where(maj_core, "core-neutral", "core-depleted"),
                      np.where(r < b, "interlayer", np.where(maj_shell, "shell-neutral", "shell-depleted")))
    return {
        "region": region,
        "r_nm": r / NM, "ec_eV": ec, "ev_eV": ev, "n_cm3": elec * 1e-6, "p_cm3": hole * 1e-6,
        "regime": REGIMES[int(res["regime_code"][0])], "vbi_V": float(res["vbi_V"][0]),
        "vbi0_V": float(res["vbi0_V"][0]), "core_radius_nm": a / NM,
        "interlayer_end_nm": float(ph["b"][0]) / NM, "outer_radius_nm": float(ph["prob"]["R"][0]) / NM,
        "core_neutral_radius_nm": float(res["core_neutral_radius_m"][0]) / NM,
        "shell_neutral_nm": float(res["shell_neutral_m"][0]) / NM, "iterations": int(res["iterations"][0]),
        "ionisation": "incomplete" if ph["incomplete"][0] else "full",
    }
