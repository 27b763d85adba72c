"""Material table: required entries, temperature laws, sources, user files."""

import json

import numpy as np
import pytest

from radialpn import MaterialError, get_material, load_material_file, material_names, register_material


def test_required_materials_present_with_sources():
    for name in ("GaAs", "InP", "InAs", "GaN", "Si", "Ge"):
        m = get_material(name.lower())  # case-insensitive lookup
        row = m.at(300.0)
        for key in ("band_gap_eV", "permittivity_rel", "nc_cm3", "nv_cm3", "cnl_eV", "sources"):
            assert key in row
        assert all(row["sources"].values())


def test_gaas_room_temperature_values():
    # docs/physics.md section 2 and Sze & Ng, 3rd ed., App. G (from memory): E_g 1.424 eV,
    # eps_r 12.9, N_c 4.7e17, N_v 9.0e18. Exact: these are the table's anchors.
    m = get_material("GaAs")
    assert m.band_gap(300.0) == pytest.approx(1.424, abs=1e-12)
    assert (m.permittivity_rel, m.nc(300.0), m.nv(300.0)) == (12.9, 4.7e17, 9.0e18)


def test_varshni_shift():
    # Varshni shift between 0 K and 300 K for GaAs: alpha T^2/(T + beta) = 5.405e-4 * 300^2 /
    # 504 = 96.5 meV (Vurgaftman et al. 2001 parameters): E_g(0) = 1.424 + 0.0965.
    m = get_material("GaAs")
    assert m.band_gap(0.0) == pytest.approx(1.424 + 5.405e-4 * 300 ** 2 / 504, abs=1e-12)
    assert np.all(np.diff(m.band_gap(np.array([77.0, 200.0, 300.0, 500.0]))) < 0)  # gap shrinks with T


def test_dos_scales_as_t_three_halves():
    # N_c ~ T^(3/2) (Sze & Ng, 3rd ed., eq. 1.19), exact by construction: check the law, not a value.
    m = get_material("InP")
    assert m.nc(600.0) / m.nc(150.0) == pytest.approx(4.0 ** 1.5, rel=1e-12)


def test_user_material_from_toml_and_json(tmp_path):
    toml = tmp_path / "mine.toml"
    toml.write_text("""
[AlGaAs30]
band_gap_300_eV = 1.798
varshni_alpha_eV_K = 5.405e-4
varshni_beta_K = 204
permittivity_rel = 12.05
nc_300_cm3 = 7.0e17
nv_300_cm3 = 1.0e19
cnl_eV = 0.6
sources = { all = "demo values for a test" }
""")
    (m,) = load_material_file(toml)
    register_material(m)
    assert get_material("algaas30").band_gap(300.0) == pytest.approx(1.798)
    js = tmp_path / "mine.json"
    js.write_text(json.dumps({"Odd": {**{k: getattr(m, k) for k in (
        "band_gap_300_eV", "varshni_alpha_eV_K", "varshni_beta_K", "permittivity_rel",
        "nc_300_cm3", "nv_300_cm3", "cnl_eV")}}}))
    assert load_material_file(js)[0].name == "Odd"
    assert "AlGaAs30" in material_names()


@pytest.mark.parametrize("body,fragment", [
    ("[X]\nband_gap_300_eV = 1.0\n", "missing field"),
    ("[X]\nband_gap_300_eV = -1.0\nvarshni_alpha_eV_K=0\nvarshni_beta_K=1\npermittivity_rel=10\n"
     "nc_300_cm3=1e18\nnv_300_cm3=1e18\ncnl_eV=0.3\n", "band_gap_300_eV must lie in"),
    ("not toml [", "not valid"),
])
def test_bad_material_file(tmp_path, body, fragment):
    f = tmp_path / "bad.toml"
    f.write_text(body)
    with pytest.raises(MaterialError) as err:
        load_material_file(f)
    assert fragment in str(err.value) and "\n" not in str(err.value)


def test_unknown_material_names_known_ones():
    with pytest.raises(MaterialError, match="known: .*GaAs"):
        get_material("Unobtainium")


GOOD_FIELDS = ("varshni_alpha_eV_K = 5.405e-4\nvarshni_beta_K = 204\npermittivity_rel = 12.9\nnc_300_cm3 = 4.7e17\n"
               "nv_300_cm3 = 9.0e18\ncnl_eV = 0.5\n")


@pytest.mark.parametrize("body,fragment", [
    ("materials = 5\n", "expected one table per material"),
    ("[X]\nband_gap_300_eV = true\n" + GOOD_FIELDS, "must be a finite number"),
    ("[X]\nband_gap_300_eV = \"1.4\"\n" + GOOD_FIELDS, "must be a finite number"),
    ("[X]\nband_gap_300_eV = nan\n" + GOOD_FIELDS, "must be a finite number"),
    # E_g(T) = E_g(300) - alpha (T^2/(T+beta) - 300^2/(300+beta)) (Varshni, Physica 34, 149 (1967),
    # doi:10.1016/0031-8914(67)90062-6): with alpha = 5e-3 eV/K it is negative long before 1000 K
    ("[X]\nband_gap_300_eV = 0.5\n" + GOOD_FIELDS.replace("5.405e-4", "5e-3"), "band gap falls to"),
    ("[GaAs]\nband_gap_300_eV = 1.0\n" + GOOD_FIELDS, "built-in material cannot be redefined"),
])
def test_material_files_are_physical_and_cannot_redefine_built_ins(tmp_path, body, fragment):
    f = tmp_path / "m.toml"
    f.write_text(body)
    with pytest.raises(MaterialError) as err:
        for m in load_material_file(f):
            register_material(m)
    assert fragment in str(err.value) and "\n" not in str(err.value)
    assert get_material("GaAs").band_gap_300_eV == pytest.approx(1.424, abs=1e-3)  # built-in untouched


def test_deeply_nested_json_is_a_one_line_error(tmp_path):
    f = tmp_path / "deep.json"
    f.write_text("[" * 100_000 + "]" * 100_000)
    with pytest.raises(MaterialError) as err:
        load_material_file(f)
    assert "\n" not in str(err.value)
