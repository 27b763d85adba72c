"""The terminal front end, rendered to strings: ask, batch, materials, demo, errors."""

import csv
import io
import json

import numpy as np
import pytest
from rich.console import Console

import radialpn
from radialpn.cli import main

ASK = ["ask", "--material", "GaAs", "--core-type", "p", "--core-radius", "60nm", "--shell-thickness", "0.04um",
       "--core-doping", "1e18", "--shell-doping", "1e18cm-3", "--dit", "1e12"]


def run(argv):
    buf, out = io.StringIO(), io.StringIO()
    code = main(argv, console=Console(file=buf, width=120, color_system=None), out=out)
    return code, buf.getvalue(), out.getvalue()


def test_ask_renders_answer_and_caution():
    code, text, _ = run(ASK)
    text = " ".join(text.split())
    assert code == 0
    assert "both-neutral" in text and "V_bi" in text and "confirm the design with measurements" in text


def test_ask_json_matches_library():
    code, _, out = run(ASK + ["--json", "--statistics", "boltzmann", "--engine", "depletion"])
    row = json.loads(out)
    lib = radialpn.deplete(dict(material="GaAs", core_type="p", core_radius_nm=60, shell_thickness_nm=40,
                                 core_doping_cm3=1e18, shell_doping_cm3=1e18, dit_cm2eV=1e12), "boltzmann")
    assert code == 0 and row["engine"] == "depletion" and row["status"] == "ok"
    assert row["vbi_V"] == lib["vbi_V"][0] and row["regime"] == lib["regime"][0]
    assert row["cnl_eV"] == 0.5 and row["temperature_K"] == 300.0  # defaults shown explicitly


@pytest.mark.parametrize("swap,fragment", [
    (("--core-radius", "0nm"), "--core-radius (core_radius_nm: allowed range [1, 100000] (got 0))"),
    (("--dit", "lots"), "--dit (dit_cm2eV: expected a number"),
    (("--material", "Kryptonite"), "--material (material: unknown material 'Kryptonite'"),
    # a negative value with a unit, written with a space, reaches the validation layer (argparse
    # alone took "-5nm" for an option and said "expected one argument")
    (("--core-radius", "-5nm"), "--core-radius (core_radius_nm: allowed range [1, 100000] (got -5))"),
    (("--shell-doping", "-1e18"), "--shell-doping (shell_doping_cm3: allowed range"),
])
def test_ask_bad_input_one_line_exit_2(swap, fragment):
    argv = list(ASK)
    argv[argv.index(swap[0]) + 1] = swap[1]
    code, text, _ = run(argv)
    assert code == 2 and fragment in text and text.count("\n") == 1 and "Traceback" not in text


def test_unknown_flag_one_line():
    code, text, _ = run(ASK + ["--colour", "blue"])
    assert code == 2 and text.startswith("radialpn: error: unrecognized arguments") and text.count("\n") == 1


@pytest.mark.parametrize("value", ["abc", "0", "-2", "1.5", "2 threads"])
def test_malformed_thread_count_is_one_line_before_any_work(monkeypatch, value):
    # RADIALPN_THREADS is ours: a value that is not a whole number >= 1 is refused, never
    # replaced by a default; OMP_NUM_THREADS is every OpenMP program's, whose runtimes pass
    # over an unusable value and read the first entry of a nested list ("3,1")
    monkeypatch.setenv("RADIALPN_THREADS", value)
    code, text, _ = run(ASK)
    assert code == 2 and text.count("\n") == 1
    assert "RADIALPN_THREADS: must be a whole number of threads >= 1" in text and repr(value) in text
    monkeypatch.setenv("RADIALPN_THREADS", "")  # empty counts as unset, as shells clear a variable
    assert run(ASK)[0] == 0
    monkeypatch.delenv("RADIALPN_THREADS")
    with pytest.raises(radialpn.SettingError, match="threads: must be a whole number"):
        radialpn.worker_threads(0)
    monkeypatch.setenv("OMP_NUM_THREADS", "3,1")
    assert radialpn.worker_threads() == 3
    monkeypatch.setenv("OMP_NUM_THREADS", "abc")
    assert radialpn.worker_threads() >= 1 and run(ASK)[0] == 0


def test_no_answer_exit_3():
    code, text, _ = run(["ask", "--material", "InAs", "--core-type", "p", "--core-radius", "50", "--shell-thickness",
                         "30", "--core-doping", "1e17", "--shell-doping", "1e17", "--dit", "1e12", "--engine", "depletion"])
    assert code == 3 and "surface accumulates" in text


def test_batch_keeps_rows_order_and_input_columns(tmp_path):
    src = tmp_path / "in.csv"
    rows = [
        dict(label="A", material="GaAs", core_type="p", core_radius_nm="60", shell_thickness_nm="40nm",
             core_doping_cm3="1e18", shell_doping_cm3="1e18", dit_cm2eV="1e12"),
        dict(label="B", material="GaAs", core_type="n", core_radius_nm="-5", shell_thickness_nm="40",
             core_doping_cm3="1e18", shell_doping_cm3="1e18", dit_cm2eV="1e12"),
        dict(label="C", material="InAs", core_type="p", core_radius_nm="50", shell_thickness_nm="30",
             core_doping_cm3="1e17", shell_doping_cm3="1e17", dit_cm2eV="1e12"),
        dict(label="D", material="GaAs", core_type="n", core_radius_nm="20", shell_thickness_nm="8",
             core_doping_cm3="1e17", shell_doping_cm3="3e18", dit_cm2eV="1e13"),
    ]
    with open(src, "w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)
    dst = tmp_path / "out.csv"
    code, text, _ = run(["batch", str(src), "-o", str(dst), "--engine", "depletion", "--statistics", "boltzmann"])
    assert code == 3  # every row written; B and C have no answer, so exit 3 without --keep-going
    got = list(csv.DictReader(open(dst)))
    assert [g["label"] for g in got] == ["A", "B", "C", "D"]
    for g, r in zip(got, rows):
        assert all(g[k] == v for k, v in r.items())  # input columns unchanged, as text
    assert got[0]["status"] == "ok" and float(got[0]["vbi_V"]) > 1.3
    assert got[1]["status"].startswith("core_radius_nm: allowed range") and got[1]["vbi_V"] == ""
    assert got[1]["engine"] == ""  # no engine saw a row whose input failed validation
    assert got[2]["status"].startswith("surface accumulates") and got[2]["engine"] == "depletion"
    assert got[3]["status"] == "ok" and got[3]["regime"] in radialpn.REGIMES
    assert "4 rows" in text


@pytest.mark.parametrize("name", ["out.json", "out.xlsx"])
def test_batch_refuses_an_output_suffix_it_would_not_honour(tmp_path, name):
    # CSV written into a .json or .xlsx file would be a silent default; refused before any work
    src = tmp_path / "in.csv"
    src.write_text("material,core_type,core_radius_nm,shell_thickness_nm,core_doping_cm3,shell_doping_cm3,dit_cm2eV\n"
                   "GaAs,p,60,40,1e18,1e18,1e12\n")
    code, text, _ = run(["batch", str(src), "-o", str(tmp_path / name)])
    assert code == 2 and text.count("\n") == 1 and "batch writes CSV" in text and "Parquet" in text
    assert not (tmp_path / name).exists()


def test_batch_missing_file_one_line(tmp_path):
    code, text, _ = run(["batch", str(tmp_path / "nope.csv")])
    assert code == 2 and "cannot read" in text and text.count("\n") == 1


def test_materials_json_keys_and_temperature():
    code, _, out = run(["materials", "--json", "--temperature", "77"])
    data = json.loads(out)
    assert code == 0 and {"GaAs", "InP", "InAs", "GaN", "Si", "Ge"} <= set(data)
    g = data["GaAs"]
    assert set(g) >= {"band_gap_eV", "permittivity_rel", "nc_cm3", "nv_cm3", "cnl_eV", "sources"}
    # N_c(77 K) = N_c(300 K) (77/300)^1.5 (Sze & Ng, 3rd ed., eq. 1.19); exact by construction
    assert g["nc_cm3"] == pytest.approx(4.7e17 * (77 / 300) ** 1.5, rel=1e-12)


def test_demo_runs():
    code, text, _ = run(["demo"])
    flat = " ".join(text.split())
    assert code == 0 and "Kestrel Bay Photonics" in flat and "critical dimensions" in flat
    assert "confirm the design with measurements" in flat


def test_user_materials_flag(tmp_path):
    f = tmp_path / "m.toml"
    f.write_text("[Demoide]\nband_gap_300_eV=1.5\nvarshni_alpha_eV_K=5e-4\nvarshni_beta_K=200\npermittivity_rel=12\n"
                 "nc_300_cm3=5e17\nnv_300_cm3=9e18\ncnl_eV=0.55\n")
    argv = ["--materials", str(f)] + ASK + ["--engine", "depletion"]
    argv[argv.index("GaAs")] = "demoide"
    code, text, _ = run(argv)
    assert code == 0 and "Demoide" in text


def test_ask_solver_engine_json_matches_library():
    from radialpn.training import solve

    code, _, out = run(ASK + ["--engine", "solver", "--json"])
    row = json.loads(out)
    lib = solve(dict(material="GaAs", core_type="p", core_radius_nm=60, shell_thickness_nm=40,
                     core_doping_cm3=1e18, shell_doping_cm3=1e18, dit_cm2eV=1e12))
    assert code == 0 and row["engine"] == "solver" and row["vbi_V"] == lib["vbi_V"][0]
    assert row["solver_version"] and row["iterations"] > 0


def test_profile_terminal_compare_and_png(tmp_path):
    png = tmp_path / "bands.png"
    argv = ["profile"] + ASK[1:] + ["--compare", "--png", str(png), "--width", "60"]
    code, text, _ = run(argv)
    flat = " ".join(text.split())
    assert code == 0 and "E_c" in flat and "depletion approx." in flat and "difference" in flat
    assert any(0x2800 < ord(ch) <= 0x28FF for ch in text)  # braille plot drawn
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_profile_json_arrays():
    code, _, out = run(["profile"] + ASK[1:] + ["--json"])
    data = json.loads(out)
    assert code == 0 and len(data["r_nm"]) == len(data["ec_eV"]) == len(data["region"])
    # E_c - E_v = E_g everywhere (same band gap, both edges from one potential): exact to rounding
    assert np.allclose(np.array(data["ec_eV"]) - np.array(data["ev_eV"]), 1.424, atol=1e-12)


def test_profile_refuses_what_the_solver_refuses(tmp_path):
    # a surface pinned 3 eV above E_v of GaAs (E_g 1.42 eV) puts the surface Fermi level inside
    # the conduction band beyond the parabolic-band limit (docs/physics.md section 8.6): `solve`
    # gives no number, so neither may `profile` (it drew the bands with V_bi 0.438 V before)
    design = dict(material="GaAs", core_type="p", core_radius_nm=45, shell_thickness_nm=30, core_doping_cm3=5e17,
                  shell_doping_cm3=2e18, dit_cm2eV=5e12, cnl_eV=3.0)
    status = radialpn.solve(design)["status"][0]
    assert status.startswith("outside the model")
    with pytest.raises(radialpn.RadialpnError, match="outside the model") as err:
        radialpn.profile(design)
    assert str(err.value) == status
    code, text, _ = run(["profile", "--material", "GaAs", "--core-type", "p", "--core-radius", "45nm",
                         "--shell-thickness", "30nm", "--core-doping", "5e17", "--shell-doping", "2e18",
                         "--dit", "5e12", "--cnl", "3"])
    assert code == 3 and "no answer" in text and "V_bi" not in text
    code, text, _ = run(["report", "--material", "GaAs", "--core-type", "p", "--core-radius", "45nm",
                         "--shell-thickness", "30nm", "--core-doping", "5e17", "--shell-doping", "2e18",
                         "--dit", "5e12", "--cnl", "3", "-o", str(tmp_path / "sheet.html")])
    assert code == 3 and "no answer" in text and not (tmp_path / "sheet.html").exists()


def test_batch_solver_engine(tmp_path):
    src = tmp_path / "in.csv"
    src.write_text("material,core_type,core_radius_nm,shell_thickness_nm,core_doping_cm3,shell_doping_cm3,dit_cm2eV\n"
                   "GaAs,p,60,40,1e18,1e18,1e12\nGaAs,n,5nm,1,1e20,1e15,1e15\nGaAs,p,oops,40,1e18,1e18,1e12\n")
    code, _, out = run(["batch", str(src), "--engine", "solver", "--keep-going"])
    got = list(csv.DictReader(io.StringIO(out)))
    assert code == 0 and len(got) == 3
    assert got[0]["engine"] == "solver" and got[0]["status"] == "ok"
    # 1e20 cm^-3 n-GaAs puts the Fermi level ~1 eV into the conduction band: beyond the
    # parabolic-band limit (docs/physics.md section 8.6), a reason and no number, exit still 0
    assert got[1]["status"].startswith("outside the model: the neutral core's Fermi level") and got[1]["vbi_V"] == ""
    assert got[2]["status"].startswith("core_radius_nm") and got[2]["vbi_V"] == ""
    assert float(got[0]["charge_residual"]) < 1e-6


SURR = ["ask", "--material", "GaAs", "--core-type", "p", "--core-radius", "45nm", "--shell-thickness", "30nm",
        "--core-doping", "5e17", "--shell-doping", "2e18", "--dit", "5e12"]


def test_ask_defaults_to_surrogate_with_interval_and_verify():
    code, _, out = run(SURR + ["--json", "--verify"])
    row = json.loads(out)
    assert code == 0 and row["engine"] == "surrogate" and row["in_domain"] is True
    assert row["vbi_low_V"] <= row["vbi_V"] <= row["vbi_high_V"] and 0 < row["regime_prob"] <= 1
    assert row["verify"]["status"] == "ok" and row["verify"]["regime"] in radialpn.REGIMES
    # the solver's answer lies within the bundle's stated accuracy (p99 error ~8 mV, card)
    assert abs(row["vbi_V"] - row["verify"]["vbi_V"]) < 0.02


def test_ask_outside_domain_no_answer():
    argv = list(SURR)
    argv[argv.index("45nm")] = "800nm"
    code, text, _ = run(argv + ["--engine", "surrogate"])
    text = " ".join(text.split())
    assert code == 3 and "outside the model's domain" in text and "engine 'auto' or 'solver' answers it" in text
    code, text, _ = run(argv)  # the default (auto) engine answers it with the solver and says so
    text = " ".join(text.split())
    assert code == 0 and "by the solver engine" in text and "core_radius_nm 800 not in [10, 300]" in text


def test_batch_surrogate_second_opinion(tmp_path):
    src = tmp_path / "in.csv"
    src.write_text("name,material,core_type,core_radius_nm,shell_thickness_nm,core_doping_cm3,shell_doping_cm3,dit_cm2eV\n"
                   "a,GaAs,p,60,40,1e18,1e18,1e12\nb,GaAs,n,45,30,5e17,2e18,5e12\nc,GaAs,p,900,40,1e18,1e18,1e12\n"
                   "d,Si,p,60,40,1e18,1e18,1e12\ne,InAs,p,60,40,1e18,1e18,1e12\n")
    code, _, out = run(["batch", str(src), "--engine", "surrogate", "--second-opinion", "--keep-going"])
    got = list(csv.DictReader(io.StringIO(out)))
    assert code == 0 and [g["name"] for g in got] == ["a", "b", "c", "d", "e"]
    assert got[0]["in_domain"] == "true" and float(got[0]["vbi_gp_V"]) > 0 and got[0]["status"] == "ok"
    assert got[2]["in_domain"] == "false" and got[2]["vbi_V"] == ""
    assert got[3]["status"] == "ok" and float(got[3]["vbi_gp_V"]) > 0  # Si has its bundle
    # InAs's own neutral level lies in its conduction band: its bundle covers 0.05-0.30 eV only
    assert "cnl_eV 0.5 not in [0.05, 0.3]" in got[4]["status"] and got[4]["vbi_V"] == ""


def test_models_lists_bundles():
    code, text, _ = run(["models"])
    assert code == 0 and "gaas-pcore" in text and "gaas-ncore" in text


def test_validate_never_changes_the_shipped_bundle(tmp_path):
    # validate reports; it must not rewrite the installed bundle's figures or checksums.
    path = {name: p for name, _, _, p in radialpn.available()}["gaas-pcore"]
    before = {f: (path / f).read_bytes() for f in ("bundle.json", "CARD.md", "SHA256SUMS")}
    report = tmp_path / "report.json"
    code, text, _ = run(["validate", "gaas-pcore", "--rows", "300", "--seed", "5", "-o", str(report)])
    assert code == 0 and "regime accuracy" in text and "confusion" in text
    assert json.loads(report.read_text())["rows"] == 300
    assert {f: (path / f).read_bytes() for f in before} == before
    # a report path that cannot be written is refused at once, not after the solver runs
    code, text, _ = run(["validate", "gaas-pcore", "--rows", "300", "-o", str(tmp_path / "no" / "r.json")])
    assert code == 2 and text.count("\n") == 1 and "-o/--report" in text and "does not exist" in text


def test_each_command_loads_its_own_module_only():
    # a command line builds the parser of its command's module alone (start-up time); the map
    # must name every command the full parser has, and each partial parser must know its command
    import argparse

    from radialpn.cli import COMMANDS, build_parser

    def commands(parser):
        sub = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
        return set(sub.choices)

    assert commands(build_parser()) == set(COMMANDS)
    for name in COMMANDS:
        assert name in commands(build_parser(name))


def test_ask_says_which_dopant_ionisation_answered():
    # GaN:Mg is ~0.17 eV deep (docs/physics.md 4.1), so the default rule answers it with
    # incomplete ionisation at 300 K; the shallow GaAs dopants at 300 K with full ionisation.
    gan = ["ask", "--material", "GaN", "--core-type", "p", "--core-radius", "100nm", "--shell-thickness", "50nm",
           "--core-doping", "3e18", "--shell-doping", "1e18", "--dit", "1e12", "--engine", "depletion"]
    code, text, _ = run(gan)
    assert code == 0 and "dopant ionisation" in text and "incomplete" in text
    code, text, _ = run(gan[:2] + ["GaAs"] + gan[3:])
    assert code == 0 and "dopant ionisation" in text and "incomplete" not in text
