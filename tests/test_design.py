"""The validation layer: unit suffixes, ranges, one-line errors naming field, range and value."""

import subprocess
import sys

import numpy as np
import pytest

from radialpn import DesignError, check_design, normalize_designs, parse_quantity

GOOD = dict(material="GaAs", core_type="p", core_radius_nm=60, shell_thickness_nm=40,
            core_doping_cm3=1e18, shell_doping_cm3=1e18, dit_cm2eV=1e12)


@pytest.mark.parametrize("column,text,value", [
    ("core_radius_nm", "60nm", 60.0), ("core_radius_nm", "0.06um", 60.0), ("core_radius_nm", "0.06 µm", 60.0),
    ("shell_thickness_nm", "400 Å", 40.0), ("core_doping_cm3", "1e18cm-3", 1e18),
    ("core_doping_cm3", "1e18 cm^-3", 1e18), ("core_doping_cm3", "1e24 m-3", 1e18),
    ("dit_cm2eV", "3e12 cm-2eV-1", 3e12), ("cnl_eV", "500meV", 0.5), ("temperature_K", "77K", 77.0),
])
def test_unit_suffixes(column, text, value):
    assert parse_quantity(column, text) == pytest.approx(value, rel=1e-12)


@pytest.mark.parametrize("field,bad,fragment", [
    ("core_radius_nm", 0, "core_radius_nm: allowed range [1, 100000] (got 0)"),
    ("core_radius_nm", "60 parsecs", "core_radius_nm: unknown unit 'parsecs'"),
    ("shell_thickness_nm", "thin", "shell_thickness_nm: expected a number"),
    ("core_doping_cm3", 1e25, "core_doping_cm3: allowed range [1e+12, 1e+21] (got 1e+25)"),
    ("shell_doping_cm3", -1, "shell_doping_cm3: allowed range"),
    ("dit_cm2eV", -3, "dit_cm2eV: allowed range [0, 1e+17] (got -3)"),
    ("cnl_eV", 42, "cnl_eV: allowed range [-1, 10] (got 42)"),
    ("temperature_K", 5, "temperature_K: allowed range [20, 1000] (got 5)"),
    ("interlayer_nm", 50, "interlayer_nm: must be at least 0.5 nm thinner"),
    ("material", "Unobtainium", "material: unknown material 'Unobtainium'"),
    ("core_type", "q", "core_type: must be p or n (got 'q')"),
    ("core_radius_nm", float("nan"), "core_radius_nm: empty or missing value"),
])
def test_each_bad_field_gets_one_clear_line(field, bad, fragment):
    with pytest.raises(DesignError) as err:
        check_design({**GOOD, field: bad})
    msg = str(err.value)
    assert fragment in msg and "\n" not in msg


def test_missing_required_field():
    d = dict(GOOD)
    del d["dit_cm2eV"]
    with pytest.raises(DesignError, match=r"dit_cm2eV: required, allowed range \[0, 1e\+17\]"):
        check_design(d)


def test_batch_keeps_every_row_and_reports_each():
    t = normalize_designs({**{k: [v] * 4 for k, v in GOOD.items()},
                           "core_radius_nm": [60, "x", -1, "80nm"], "core_type": ["p", "n", "p", "sideways"]})
    assert t.n == 4
    assert t.status[0] == "ok"
    assert t.status[1].startswith("core_radius_nm: expected a number")
    assert t.status[2].startswith("core_radius_nm: allowed range")
    assert t.status[3].startswith("core_type")


def test_inputs_as_rows_mapping_and_dataframe_agree():
    pd = pytest.importorskip("pandas")
    rows = [dict(GOOD), dict(GOOD, core_type="n", core_radius_nm=30)]
    cols = {k: [r[k] for r in rows] for k in GOOD}
    a, b, c = normalize_designs(rows), normalize_designs(cols), normalize_designs(pd.DataFrame(rows))
    for t in (b, c):
        np.testing.assert_array_equal(a.p_core, t.p_core)
        np.testing.assert_array_equal(a["core_radius_nm"], t["core_radius_nm"])


def test_import_radialpn_is_light():
    # The runtime must not pull heavy modules at import (brief: numpy only).
    code = ("import sys, radialpn; radialpn.deplete(dict(material='GaAs', core_type='p', core_radius_nm=50,"
            "shell_thickness_nm=30, core_doping_cm3=1e18, shell_doping_cm3=1e18, dit_cm2eV=1e12));"
            "print(' '.join(m for m in ('scipy','pandas','rich','sklearn','matplotlib') if m in sys.modules))")
    res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert res.stdout.strip() == ""
