"""Bulk Fermi levels by exact charge neutrality, both carriers counted.

In a neutral region of an acceptor-doped semiconductor (the mirrored p-core frame; a donor
region is its mirror image) the Fermi level y = E_F - E_v solves

    N_A^-(y) - p(y) + n(y) = 0,   p = N_v F(-y/kT),   n = N_c F((y - E_g)/kT)

with F the Fermi-Dirac integral of order 1/2 (or exp for Boltzmann statistics) and N_A^- the
ionised acceptors (all of them, or N_A (1 - u) with the unionised share u of ``_ionisation``)
(Sze & Ng, Physics of Semiconductor Devices, 3rd ed., 2007, sec. 1.4, the neutrality condition
of a doped semiconductor; doi:10.1002/0470068329; section and DOI from memory).
The depletion engine's bulk levels count the majority carriers alone (p = N_A), which is exact
to a share of order (n_i / N)^2 in V_bi0; where the intrinsic density n_i approaches the doping
(germanium or InAs near 500 K, lightly doped) the majority-only level drifts towards the wrong
band and V_bi0 comes out tens of mV low. The reference solver uses these levels, and so does
the surrogate's upper bound on V_bi (``vbi0_bound``).
"""

from __future__ import annotations

import numpy as np

from ._depletion import material_arrays, prepare
from ._design import DesignTable
from ._ionisation import row_dopants, unionised
from ._materials import get_material
from ._roots import solve_bracketed
from ._statistics import intrinsic_density, occupancy, reduced_level

#: where n_i is below this share of both dopings the majority-only V_bi0 is kept: its error is
#: of order kT (n_i / N)^2 < 5e-14 V at 500 K, below the exact level's own root tolerance [1]
INTRINSIC_SHARE = 1e-6
LEVEL_XTOL = 1e-13  #: bracketed root tolerance of the bulk level [eV]


def neutral_level(N, dos_major, dos_minor, Eg, kt, statistics, level=None, degeneracy=None, share=None):
    """E_F - E_majority-band-edge solving exact neutrality majority - minority = ionised dopants
    [eV], returned as y = E_F - E_v of a p-type region with ``N`` acceptors [m^-3] (mirrored
    frame), band densities of states ``dos_major``, ``dos_minor`` [m^-3], gap ``Eg`` [eV] and
    ``kt`` [eV]. With ``level`` (E_i [eV]), ``degeneracy`` [1] and ``share`` [1] the acceptors are
    ionised by N- = N (1 - u(x)), x = (y - E_i)/kT (``_ionisation.unionised``); otherwise fully."""
    p = dict(N=N, Nv=dos_major, Nc=dos_minor, Eg=Eg, kT=kt)
    if share is not None:
        p.update(E=level, g=degeneracy, s=share)

    def f(y, q):  # increasing in y: N- - (p - n)
        fp, dfp = occupancy(-y / q["kT"], statistics)
        fn, dfn = occupancy((y - q["Eg"]) / q["kT"], statistics)
        val, der = q["N"] - q["Nv"] * fp + q["Nc"] * fn, (q["Nv"] * dfp + q["Nc"] * dfn) / q["kT"]
        if "s" in q:
            u, du = unionised((y - q["E"]) / q["kT"], q["g"], q["s"])
            val, der = val - q["N"] * u, der - q["N"] * du / q["kT"]
        return val, der

    # bracket wide enough for any degeneracy: the majority-only level (minority carriers can only
    # lower |y|) lies below the root; a fixed -3 eV clipped degenerate narrow-gap levels (issue 10)
    with np.errstate(all="ignore"):
        deep = kt * reduced_level(N / dos_major, 1.0, statistics)
    majority = -np.where(np.isfinite(deep), deep, 0.0)
    lo = np.minimum(-3.0, majority - 1.0)
    hi = Eg + 3.0
    # started at the majority-only level, next to the root: from the bracket's middle, Newton on
    # these exponentials moves about kT per step and at 77 K ran out of steps with the Fermi
    # level 0.1 eV off (Boltzmann InAs and Ge, about 2 rows in 1,000)
    with np.errstate(all="ignore"):
        y, _ = solve_bracketed(f, p, lo, hi, x0=np.clip(majority, lo, hi), xtol=LEVEL_XTOL)
    return y


def exact_levels(table: DesignTable, prob: dict, dopants, statistics: str) -> dict:
    """Exact-neutrality bulk levels of the mirrored p-core problem ``prob`` (``_depletion.prepare``
    of ``table``): ``y_core``, ``y_shell`` (E_F - E_v of the neutral core and shell [eV]) and
    the arrays they came from, ``kT`` [eV] and the core's majority/minority band densities of
    states ``Nv``, ``Nc`` [m^-3]. ``dopants``: ``_ionisation.row_dopants`` data, or None (full)."""
    v = table.values
    mat = material_arrays(table.material, v["temperature_K"], statistics)
    pc, ok = table.p_core, table.ok
    kt = np.where(ok, mat["kT_eV"], 0.025)
    nv = np.where(ok, np.where(pc, mat["nv_cm3"], mat["nc_cm3"]), 1e18) * 1e6  # majority band of the core
    nc = np.where(ok, np.where(pc, mat["nc_cm3"], mat["nv_cm3"]), 1e18) * 1e6
    ion_c = ion_s = {}
    if dopants is not None:
        ion_c = dict(level=dopants["core_E"], degeneracy=dopants["core_g"], share=np.where(ok, dopants["core_s"], 0.0))
        ion_s = dict(level=dopants["shell_E"], degeneracy=dopants["shell_g"], share=np.where(ok, dopants["shell_s"], 0.0))
    y_core = neutral_level(prob["NA"], nv, nc, prob["Eg"], kt, statistics, **ion_c)
    y_shell = prob["Eg"] - neutral_level(prob["ND"], nc, nv, prob["Eg"], kt, statistics, **ion_s)
    return dict(y_core=y_core, y_shell=y_shell, kT=kt, Nv=nv, Nc=nc)


def vbi0_bound(table: DesignTable, vbi0_V, statistics: str, ionisation: str = "full") -> np.ndarray:
    """V_bi0 [V] by exact neutrality (``exact_levels``) for the rows of ``table`` whose intrinsic
    density exceeds ``INTRINSIC_SHARE`` of either doping; elsewhere the majority-only ``vbi0_V``
    [V] the depletion engine gave. What the reference solver reports as V_bi0, so the bound
    0 <= V_bi <= V_bi0 that the surrogate enforces is the solver's."""
    vbi0 = np.array(vbi0_V, dtype=float, copy=True)
    if table.n == 0:
        return vbi0
    v = table.values
    if table.n == 1:  # one design (the warm single query): plain floats
        if not table.ok[0]:
            return vbi0
        m, t = get_material(str(table.material[0])), float(v["temperature_K"][0])
        ni = float(intrinsic_density(m.band_gap(t), m.nc(t), m.nv(t), t))
        near = np.array([ni > INTRINSIC_SHARE * min(float(v["core_doping_cm3"][0]), float(v["shell_doping_cm3"][0]))])
    else:
        mat = material_arrays(table.material, v["temperature_K"], statistics)
        with np.errstate(all="ignore"):
            ni = intrinsic_density(mat["band_gap_eV"], mat["nc_cm3"], mat["nv_cm3"], v["temperature_K"])
            near = table.ok & (ni > INTRINSIC_SHARE * np.minimum(v["core_doping_cm3"], v["shell_doping_cm3"]))
    if not near.any():
        return vbi0
    rows = np.flatnonzero(near)
    sub = table.take(rows)
    incomplete, _, dop = row_dopants(sub, ionisation)
    dop = dop if incomplete.any() else None
    prob, _ = prepare(sub, statistics, dop)
    lv = exact_levels(sub, prob, dop, statistics)
    vbi0[rows] = lv["y_shell"] - lv["y_core"]
    return vbi0
