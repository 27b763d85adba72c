"""Generate examples/growth_series.csv: an INVENTED shell-thickness series of GaAs p-core/n-shell
wires (reactor run "B-17" of a made-up lab), simulated by radialpn's reference solver at values
chosen here and hidden from the calibration: D_it 4e12 cm^-2 eV^-1, neutral level 0.58 eV and
an active shell doping of 1.5e18 cm^-3 against the intended 2e18. Noise is added at the sigma
written in each *_sigma column. Not a measurement: a demonstration of `radialpn calibrate`.

    python examples/make_growth_series.py
    radialpn calibrate examples/growth_series.csv --unknown dit --unknown cnl --unknown shell-doping
"""

import csv
import pathlib

import numpy as np

import radialpn

HIDDEN = {"dit_cm2eV": 4e12, "cnl_eV": 0.58, "shell_doping_cm3": 1.5e18}
INTENDED_SHELL_DOPING = 2e18
SIGMA = {"vbi_V": 0.03, "surface_bending_V": 0.025}

rng = np.random.default_rng(17)
shells = np.round(np.geomspace(6, 110, 20), 1)
design = {"material": "GaAs", "core_type": "p", "core_radius_nm": 60.0, "shell_thickness_nm": shells,
          "core_doping_cm3": 1e18}
sol = radialpn.solve({**design, **HIDDEN})
rows = []
for i, t in enumerate(shells):
    neutral = sol["regime"][i] in ("both-neutral", "core-depleted")
    row = {"wire": f"B17-{i + 1:02d}", "material": "GaAs", "core_type": "p", "core_radius_nm": 60,
           "shell_thickness_nm": t, "core_doping_cm3": "1e18", "shell_doping_cm3": f"{INTENDED_SHELL_DOPING:g}",
           "shell_keeps_neutral": "yes" if neutral else "no",  # EBIC: a neutral shell region seen or not
           "surface_bending_V": "", "surface_bending_V_sigma": "", "vbi_V": "", "vbi_V_sigma": ""}
    if i % 3 != 2:  # Kelvin-probe map on two wires in three
        row["surface_bending_V"] = f"{sol['surface_bending_V'][i] + rng.normal(0, SIGMA['surface_bending_V']):.3f}"
        row["surface_bending_V_sigma"] = SIGMA["surface_bending_V"]
    if i % 2 == 0:  # built-in voltage on every other wire
        row["vbi_V"] = f"{sol['vbi_V'][i] + rng.normal(0, SIGMA['vbi_V']):.3f}"
        row["vbi_V_sigma"] = SIGMA["vbi_V"]
    rows.append(row)
out = pathlib.Path(__file__).with_name("growth_series.csv")
with out.open("w", newline="", encoding="utf-8") as fh:
    w = csv.DictWriter(fh, fieldnames=list(rows[0]))
    w.writeheader()
    w.writerows(rows)
print(f"wrote {out} ({len(rows)} wires)")
