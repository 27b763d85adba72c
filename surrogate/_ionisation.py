"""Dopant ionisation: full, or incomplete with the dopant levels of the material table.

A donor level E_D = E_c - E_i holds N_D+ = N_D / (1 + g_D exp((E_F - E_D)/kT)) ionised donors and
an acceptor level E_A = E_v + E_i holds N_A- = N_A / (1 + g_A exp((E_A - E_F)/kT)) (Sze & Ng,
Physics of Semiconductor Devices, 3rd ed., 2007, sec. 1.4.1, eq. 1.38-1.39; g_D = 2, g_A = 4).
Heavy doping: the ionisation energy falls as E_i = E_i0 (1 - (N/N_M)^(1/3)), the N^(1/3) law of
Pearson & Bardeen (Phys. Rev. 75, 865 (1949), doi:10.1103/PhysRev.75.865) with its coefficient
fixed so that it vanishes at the Mott density N_M (``Material.dopant``). The same factor
s = 1 - (N/N_M)^(1/3) (zero at and above N_M) is the share of dopants still bound in localised
states: the unionised share is s / (1 + g^-1 exp((E_F - E_D)/kT)) for donors, so the dopants of
a metallic impurity band (N >= N_M) are all ionised and degenerate doping is not de-ionised.

In the mirrored p-core frame of the solver (y = E_F - E_v, the core's dopant an acceptor and the
shell's a donor) both regions use ``unionised(y, ...)``: with x = (y - E_i)/kT for the core and
x = (E_g - E_i - y)/kT for the shell, the unionised share is s / (1 + exp(x)/g).

``ionisation``: "full", "incomplete" or "auto" (the default): incomplete for a row below
``AUTO_BELOW_K`` or with a deep dopant (dilute-limit E_i0 >= ``DEEP_EV``), else full; a material
without dopant levels stays full under "auto" and is refused under "incomplete".
docs/physics.md section 4.1 gives the reasons for both numbers.
"""

from __future__ import annotations

import numpy as np

from ._design import categories
from ._errors import DesignError
from ._materials import get_material

IONISATION = ("auto", "full", "incomplete")
AUTO_BELOW_K = 200.0  #: "auto" turns incomplete ionisation on below this temperature [K]
DEEP_EV = 0.1  #: "auto" turns it on at any temperature for a dopant this deep or deeper [eV]
_EXP_MAX = 700.0


def check_ionisation(ionisation: str) -> str:
    """Return the canonical ionisation name or raise ``DesignError`` naming the choices."""
    s = str(ionisation).strip().lower()
    if s not in IONISATION:
        raise DesignError("ionisation", f"one of {', '.join(IONISATION)}", ionisation)
    return s


def localised_share(doping_cm3, mott_cm3):
    """s = 1 - (N/N_M)^(1/3), clipped at 0 [1]: the dopants' localised share and E_i / E_i0, for
    doping ``doping_cm3`` [cm^-3] and Mott density ``mott_cm3`` [cm^-3] (Pearson & Bardeen 1949)."""
    ratio = np.asarray(doping_cm3, dtype=float) / np.asarray(mott_cm3, dtype=float)
    return np.maximum(1.0 - np.cbrt(ratio), 0.0)


def unionised(x, degeneracy, share):
    """Unionised share of a dopant u = s / (1 + exp(x)/g) [1] and du/dx [1], where x [1] is the
    distance from the dopant level to the Fermi level in kT, positive when the level is emptied
    of its carrier (donor: (E_D - E_F)/kT; acceptor: (E_F - E_A)/kT); ``degeneracy`` g [1],
    ``share`` s [1] (0 gives full ionisation exactly)."""
    z = np.minimum(np.asarray(x, dtype=float) - np.log(degeneracy), _EXP_MAX)
    sig = 1.0 / (1.0 + np.exp(z))
    return share * sig, -share * sig * (1.0 - sig)


def ionised_fraction(level_minus_fermi_eV, kt_eV, degeneracy=2.0, share=1.0):
    """Ionised fraction N+/N [1] of a donor (or N-/N of an acceptor) whose level lies
    ``level_minus_fermi_eV`` [eV] above (acceptor: below) the Fermi level, at kT ``kt_eV`` [eV],
    degeneracy ``degeneracy`` [1] and localised share ``share`` [1] (1: a dilute dopant):
    1 - s / (1 + g^-1 exp((E_D - E_F)/kT)) (Sze & Ng, 3rd ed., eq. 1.38)."""
    u, _ = unionised(np.asarray(level_minus_fermi_eV, dtype=float) / kt_eV, degeneracy, share)
    return 1.0 - u


def _any_deep(material) -> bool:
    """Whether any of the (canonical) material names has a dopant ``DEEP_EV`` deep or deeper."""
    names = {str(material[0])} if len(material) and (material == material[0]).all() else set(map(str, material))
    for name in names:
        if not name:
            continue
        m = get_material(name)
        if any(np.isfinite(e) and e >= DEEP_EV for e in (m.donor_ionisation_eV, m.acceptor_ionisation_eV)):
            return True
    return False


def row_dopants(table, ionisation: str):
    """Per-row dopant data of the mirrored p-core problem and the resolved model.

    Returns (incomplete (n,) bool, status (n,) object or None, dict of (n,) arrays core_E,
    core_g, core_s, shell_E, shell_g, shell_s): the dilute-limit ionisation energy scaled by s
    [eV], the degeneracy [1] and the localised share s [1] of the core's and the shell's dopant
    (an acceptor core for p-core rows, a donor core for n-core rows). Rows resolved to full
    ionisation have s = 0. ``status`` carries the refusals of "incomplete" for materials without
    dopant levels (None when there are none)."""
    n = table.n
    v = table.values
    keys = ("core_E", "core_g", "core_s", "shell_E", "shell_g", "shell_s")
    out = {k: np.zeros(n) for k in keys}
    out["core_g"][:] = out["shell_g"][:] = 1.0
    incomplete = np.zeros(n, dtype=bool)
    status = None
    if ionisation == "full" or n == 0:
        return incomplete, status, out
    ok = table.ok
    t = v["temperature_K"]
    if ionisation == "auto" and not (ok & (t < AUTO_BELOW_K)).any() and not _any_deep(table.material[ok]):
        return incomplete, status, out  # the common case: warm rows of shallow-dopant materials
    names, inv = categories(table.material, n)
    for k, name in enumerate(names):
        sel = (inv == k) & ok
        if not name or not sel.any():
            continue
        m = get_material(name)
        don, acc = m.dopant("donor"), m.dopant("acceptor")
        known = np.isfinite(don[0]) and np.isfinite(acc[0])
        if not known:
            if ionisation == "incomplete":
                status = table.status.copy() if status is None else status
                status[sel] = (f"ionisation: material {name} has no dopant levels (donor_ionisation_eV, "
                               "acceptor_ionisation_eV); give them in its material file or choose ionisation 'full'")
            continue
        pc = table.p_core[sel]
        e_core = np.where(pc, acc[0], don[0])
        e_shell = np.where(pc, don[0], acc[0])
        if ionisation == "auto":
            on = (t[sel] < AUTO_BELOW_K) | (np.maximum(e_core, e_shell) >= DEEP_EV)
        else:
            on = np.ones(sel.sum(), dtype=bool)
        rows = np.flatnonzero(sel)[on]
        pc = pc[on]
        s_core = localised_share(v["core_doping_cm3"][rows], np.where(pc, acc[2], don[2]))
        s_shell = localised_share(v["shell_doping_cm3"][rows], np.where(pc, don[2], acc[2]))
        out["core_s"][rows], out["shell_s"][rows] = s_core, s_shell
        out["core_E"][rows] = e_core[on] * s_core
        out["shell_E"][rows] = e_shell[on] * s_shell
        out["core_g"][rows] = np.where(pc, acc[1], don[1])
        out["shell_g"][rows] = np.where(pc, don[1], acc[1])
        incomplete[rows] = True
    return incomplete, status, out


def ionisation_column(table, incomplete):
    """The ``ionisation`` output column: "full" or "incomplete" per valid row, "" elsewhere."""
    out = np.full(table.n, "", dtype=object)
    ok = table.ok
    out[ok] = "full"
    out[ok & incomplete] = "incomplete"
    return out
