"""Model features: the design variables in their natural transforms plus what the depletion
engine says about the design (the physics does most of the work; the trees learn what the
approximation misses). One definition, used to fit the surrogates and to run them."""

from __future__ import annotations

import numpy as np

from ._constants import EPS0, K_B_EV, NM, Q
from ._depletion import deplete_table, material_arrays
from ._design import REGIMES, DesignTable

FEATURES_VERSION = 2  #: bump when a feature changes: bundles record the version they need
#: D_it enters as log10(D_it + DIT_FLOOR) so that D_it = 0 (a passivated surface) is an ordinary
#: point; at 1e9 cm^-2 eV^-1 the surface charge is below 1 % of the lightest depletion charge of
#: any shipped domain (q D_it kT ~ 4e7 e/cm^2 against q N w >= 1e10 e/cm^2) [cm^-2 eV^-1]
DIT_FLOOR = 1e9
FEATURE_NAMES = (
    "log10_core_radius_nm", "log10_shell_thickness_nm", "log10_core_doping_cm3", "log10_shell_doping_cm3",
    "log10_dit_cm2eV", "cnl_eV", "temperature_K",
    "da_vbi_V", "da_vbi0_V", "da_vbi_fraction", "da_core_margin", "da_shell_margin", "da_surface_bending_V",
    "da_surface_barrier_V", "da_regime", "log10_core_radius_debye", "log10_shell_thickness_debye",
    "da_core_neutral_debye", "da_shell_neutral_debye",
)


def features(table: DesignTable, statistics: str = "fermi-dirac", ionisation: str = "full"):
    """Feature matrix X (n, len(FEATURE_NAMES)) [mixed units, see names] and the depletion
    engine's output mapping for the rows of a validated table. Rows the engine cannot answer
    get NaN depletion features (the trees route missing values). ``ionisation``: the dopant
    ionisation model of the depletion engine, the one the bundle's training set was solved with
    ("full", or "auto": incomplete where ``_ionisation`` turns it on)."""
    # features as defined before the validity limits
    v = table.values
    mat = material_arrays(table.material, v["temperature_K"], statistics)
    da = deplete_table(table, statistics, ionisation=ionisation, validity=False, mat=mat)
    a, t = v["core_radius_nm"], v["shell_thickness_nm"]
    na, nd = v["core_doping_cm3"], v["shell_doping_cm3"]
    cnl = np.where(np.isnan(v["cnl_eV"]), mat["cnl_eV"], v["cnl_eV"])
    eps = mat["permittivity_rel"] * EPS0
    kt = K_B_EV * v["temperature_K"]
    with np.errstate(all="ignore"):
        ld_core = np.sqrt(eps * kt / (Q * na * 1e6)) / NM  # Debye lengths [nm]
        ld_shell = np.sqrt(eps * kt / (Q * nd * 1e6)) / NM
        code = np.full(table.n, np.nan)
        for i, r in enumerate(REGIMES):
            code[da["regime"] == r] = i
        X = np.column_stack([
            np.log10(a), np.log10(t), np.log10(na), np.log10(nd), np.log10(v["dit_cm2eV"] + DIT_FLOOR), cnl,
            v["temperature_K"], da["vbi_V"], da["vbi0_V"], da["vbi_V"] / da["vbi0_V"], da["core_margin"],
            da["shell_margin"], da["surface_bending_V"], da["surface_barrier_V"], code, np.log10(a / ld_core),
            np.log10(t / ld_shell), da["core_margin"] * a / ld_core, da["shell_margin"] * t / ld_shell,
        ])
    return X, da
