"""Scans of one design along a single input, the reference solver as judge (issue 11 item 1):
between adjacent points the surrogate's V_bi must move the way the solver's does, to within the
interval half-width it states, and must not jump where the solver is smooth."""

import numpy as np
import pytest

import radialpn

BASE = dict(core_radius_nm=60.0, shell_thickness_nm=40.0, core_doping_cm3=1e18, shell_doping_cm3=1e18,
            dit_cm2eV=1e12, cnl_eV=0.5, temperature_K=300.0)
#: the solver counts as smooth at a step where its own step is at most this share of the stated
#: half-width: there the surrogate has no business jumping by more than the half-width
SMOOTH_SHARE = 0.25
SCANS = {  # (material, core type, column, points, other values): steps far below the interval width
    "GaAs p shell 5-80 nm by 0.05 nm": ("GaAs", "p", "shell_thickness_nm", np.round(np.arange(5.0, 80.0001, 0.05), 4), {}),
    "GaAs p core 10-150 nm by 0.1 nm": ("GaAs", "p", "core_radius_nm", np.round(np.arange(10.0, 150.0001, 0.1), 4), {}),
    "GaAs p shell doping 1e16-1e19": ("GaAs", "p", "shell_doping_cm3", np.geomspace(1e16, 1e19, 1500), {}),
    "InP n shell 5-80 nm, lighter doping": ("InP", "n", "shell_thickness_nm", np.round(np.arange(5.0, 80.0001, 0.05), 4),
                                            dict(core_doping_cm3=3e17, shell_doping_cm3=2e17, cnl_eV=None)),
    # D_it from 0 (a passivated surface) up through the shifted-log transform's offset
    "GaAs p D_it 0-2e11 by 2e8": ("GaAs", "p", "dit_cm2eV", np.linspace(0.0, 2e11, 1001), dict(core_radius_nm=40.0)),
    # cold: the bundles learned incomplete ionisation below 200 K
    "Si p shell 5-80 nm at 120 K": ("Si", "p", "shell_thickness_nm", np.round(np.arange(5.0, 80.0001, 0.05), 4),
                                    dict(temperature_K=120.0, cnl_eV=None, core_doping_cm3=3e17, shell_doping_cm3=3e17)),
}


#: scans that the shipped bundles are known to miss, with the reason (none since the 0.3 bundles)
KNOWN: dict = {}


@pytest.mark.parametrize("name", [pytest.param(n, marks=pytest.mark.xfail(strict=True, reason=KNOWN[n]))
                                  if n in KNOWN else n for n in sorted(SCANS)])
def test_scan_moves_with_the_solver(name):
    material, core, col, xs, over = SCANS[name]
    d = {**BASE, **{k: v for k, v in over.items() if v is not None}, "material": material, "core_type": core, col: xs}
    if over.get("cnl_eV", 0) is None:
        d.pop("cnl_eV")  # the material's own neutral level
    sur = radialpn.predict(d, engine="surrogate")
    ref = radialpn.solve(d, n_jobs=1)
    assert (sur["status"] == "ok").all() and (ref["status"] == "ok").all()
    ds, dr = np.diff(sur["vbi_V"]), np.diff(ref["vbi_V"])
    half = 0.5 * (sur["vbi_high_V"] - sur["vbi_low_V"])
    h = np.minimum(half[1:], half[:-1])  # the smaller stated half-width of the two neighbours [V]
    # 1. every step follows the solver's step to within the stated half-width
    worst = np.argmax(np.abs(ds - dr) - h)
    assert (np.abs(ds - dr) <= h).all(), (f"{col} {xs[worst]:g} -> {xs[worst + 1]:g}: surrogate moves "
                                          f"{1e3 * ds[worst]:+.2f} mV, solver {1e3 * dr[worst]:+.3f} mV, "
                                          f"half-width {1e3 * h[worst]:.2f} mV")
    # 2. where the solver is smooth (its step at most SMOOTH_SHARE of the half-width) the
    #    surrogate never jumps by more than the stated half-width
    smooth = np.abs(dr) <= SMOOTH_SHARE * h
    assert smooth.mean() > 0.5  # the solver is smooth along most of each scan, so check 2 is not vacuous
    assert (np.abs(ds[smooth]) <= h[smooth]).all()
