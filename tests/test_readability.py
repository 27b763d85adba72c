"""Issue 14: every command reads at 80 columns without colour, every empty answer says why,
and every design command exports machine-readable output (strict JSON, numeric CSV)."""

import csv
import io
import json
import re
from pathlib import Path

import numpy as np
from rich.console import Console

import radialpn
from radialpn.cli import main

PLAN = ["--material", "GaAs", "--core-type", "p", "--core-radius", "45nm", "--shell-thickness", "30nm",
        "--core-doping", "5e17", "--shell-doping", "2e18", "--dit", "5e12"]
WIRE = dict(material="GaAs", core_type="p", core_radius_nm=45.0, shell_thickness_nm=30.0, core_doping_cm3=5e17,
            shell_doping_cm3=2e18, dit_cm2eV=5e12)


def run(argv):
    buf, out = io.StringIO(), io.StringIO()
    code = main(argv, console=Console(file=buf, width=80, color_system=None), out=out)
    return code, buf.getvalue(), out.getvalue()


def strict(text):
    def bad(name):
        raise AssertionError(f"non-JSON constant {name}")
    return json.loads(text, parse_constant=bad)


def test_map_reads_without_colour_at_80_columns():
    code, text, _ = run(["map"] + PLAN + ["--x", "core-doping:1e17:1e19", "--y", "core-radius:20nm:150nm",
                                          "--cells", "36x10"])
    assert code == 0 and all(len(line) <= 80 for line in text.splitlines())
    lines = text.splitlines()
    start = lines.index(next(ln for ln in lines if ln.startswith("V_bi over")))
    panel = [ln[10:] for ln in lines[start + 1:start + 11]]
    # the V_bi panel carries a digit (or ◆) in every cell: readable with no colour at all
    assert all(re.fullmatch(r"[0-9◆·]{36}", row) for row in panel), panel
    # the digits follow V_bi: compare with the library's grid through the legend's (low, step)
    m = radialpn.regime_map(WIRE, ("core_doping_cm3", 1e17, 1e19), ("core_radius_nm", 20, 150), (36, 10))
    legend = next(ln for ln in lines if ln.strip().startswith("digit d"))
    lo, step = map(float, re.search(r"≥ ([0-9.]+) \+ d×([0-9.]+) V", legend).groups())
    v = m["vbi_V"][::-1]
    expect = np.minimum(((v - lo) / step).astype(int), 9)
    got = np.array([[int(c) if c.isdigit() else -1 for c in row] for row in panel])
    # the legend prints low and step to 1 mV, so a cell within 1 mV of a level edge may land one
    # digit either side: every digit within one of the exact level, nearly all equal
    ok = got >= 0
    assert np.all(np.abs(got[ok] - expect[ok]) <= 1) and np.mean(got[ok] == expect[ok]) > 0.95
    # x-axis labels never touch: every blank-separated token is one number (a collision such as
    # "2.5e+176.3e+17" would not parse), and there are at least three of them
    axis = lines[start + 12].split()
    assert len(axis) >= 3 and all(float(tok) > 0 for tok in axis)


def test_map_csv_numeric_in_every_numeric_column(tmp_path):
    path = tmp_path / "m.csv"
    code, _, _ = run(["map"] + PLAN + ["--x", "dit:1e10:1e13", "--y", "shell-thickness:5nm:60nm", "--cells", "4x3",
                                       "--csv", str(path)])
    rows = list(csv.DictReader(open(path)))
    assert code == 0 and len(rows) == 12
    for col in ("core_radius_nm", "shell_thickness_nm", "core_doping_cm3", "dit_cm2eV", "vbi_V", "temperature_K"):
        assert all(float(r[col]) == float(r[col]) for r in rows), col  # parses as a number, not "45nm"
    assert rows[0]["core_radius_nm"] == "45.0"


def test_size_says_why_and_what_would_change_it(tmp_path):
    code, text, _ = run(["size"] + PLAN + ["--no-confirm"])
    flat = " ".join(text.split())
    assert code == 0 and "none" in flat and "why:" in flat
    # the core is below its own critical radius: the reason names it and the core that would do
    crit = radialpn.critical_dimensions({**WIRE, "shell_thickness_nm": 300.0}, confirm=False)
    a = crit["core_radius_nm"]["value_nm"]
    assert f"critical radius {float(f'{a:.3g}'):g} nm" in flat and "a core >=" in flat
    assert all(len(line) <= 80 for line in text.splitlines())
    path = tmp_path / "size.csv"
    code, _, out = run(["size"] + PLAN + ["--no-confirm", "--json", "--csv", str(path)])
    data = strict(out)
    shell = next(d for d in data["dimensions"] if d["dimension"] == "shell_thickness_nm")
    assert shell["value_nm"] is None and "critical radius" in shell["reason"]
    rows = list(csv.DictReader(open(path)))
    assert [r["dimension"] for r in rows] == ["core_radius_nm", "shell_thickness_nm"] and rows[1]["value_nm"] == ""


def test_search_and_spread_export_and_explain(tmp_path):
    path = tmp_path / "s.csv"
    code, text, out = run(["search"] + PLAN + ["--vary", "shell-thickness:2nm:10nm", "--vbi-min", "1.3V",
                                               "--candidates", "2000", "--json"])
    data = strict(out)
    assert code == 3 and data["winners"] == [] and "the closest" in data["reason"] and "would" in data["reason"]
    code, text, _ = run(["search"] + PLAN + ["--vary", "core-radius:60nm:200nm", "--vary", "shell-thickness:20nm:100nm",
                                             "--candidates", "2000", "--top", "2", "--csv", str(path)])
    rows = list(csv.DictReader(open(path)))
    assert code == 0 and len(rows) == 2 and all(float(r["vbi_V"]) > 0 for r in rows)
    assert "…" not in text and all(len(line) <= 80 for line in text.splitlines())
    path = tmp_path / "sp.csv"
    code, _, out = run(["spread"] + PLAN + ["--spread", "shell-thickness=2nm", "--samples", "2000", "--json",
                                            "--csv", str(path)])
    data = strict(out)
    rows = list(csv.DictReader(open(path)))
    assert code == 0 and data["samples"] == 2000 and data["reason"] == ""
    assert {r["quantity"] for r in rows} >= {"yield", "regime_probability", "main_effect"}
    assert all(float(r["value"]) == float(r["value"]) for r in rows)


def test_tables_fit_80_columns_with_units():
    for argv in (["models"], ["materials"]):
        code, text, _ = run(argv)
        assert code == 0 and "…" not in text and all(len(line) <= 80 for line in text.splitlines()), argv
    _, text, _ = run(["materials"])
    assert "E_g [eV]" in text and "N_c [cm⁻³]" in text
    _, text, _ = run(["models"])
    # the same figures as the README's accuracy table (two decimals), read from the bundle
    # the figures are the bundle's own validation report, printed with two decimals
    v = json.loads((Path(dict((n, p) for n, _, _, p in radialpn.available())["gaas-pcore"]) / "bundle.json")
                   .read_text())["validation"]
    assert f"{100 * v['regime_accuracy']:.2f} %" in text and f"{v['vbi_mean_mV']:.2f} / {v['vbi_p99_mV']:.2f}" in text


def test_ask_verify_says_when_the_solver_answered_already():
    # InAs at its own neutral level lies outside its bundle, so auto answers with the solver:
    # --verify has nothing to compare and must say so instead of printing nothing
    argv = ["ask", "--material", "InAs", "--core-type", "p", "--core-radius", "60nm", "--shell-thickness", "40nm",
            "--core-doping", "1e17", "--shell-doping", "5e16", "--dit", "1e11", "--verify"]
    code, text, _ = run(argv)
    flat = " ".join(text.split())
    assert code == 0 and "by the solver engine" in flat and "gave this answer itself" in flat


def test_ask_drops_the_flag_once_verified():
    # a wire on the edge of the shell's depletion (regime probability 0.86 < 0.99): flagged
    # without --verify, settled with it
    argv = ["ask", "--material", "GaAs", "--core-type", "p", "--core-radius", "80nm", "--shell-thickness", "36.6nm",
            "--core-doping", "1e18", "--shell-doping", "2e18", "--dit", "5e12"]
    _, text, _ = run(argv)
    assert "confirm with --verify" in " ".join(text.split())
    _, text, _ = run(argv + ["--verify"])
    flat = " ".join(text.split())
    assert "confirm with --verify" not in flat and "the solver's check follows" in flat and "verify solver:" in flat
