"""The interlayer as a variable of every design question (map, size, search, spread), the
tunnelling risk in map and search, and which engine answered; through the API and the CLI."""

import io
import json

import numpy as np
import pytest
from rich.console import Console

import radialpn
from radialpn.cli import main

WIRE = dict(material="GaAs", core_type="p", core_radius_nm=100.0, shell_thickness_nm=60.0, core_doping_cm3=1e19,
            shell_doping_cm3=1e19, dit_cm2eV=1e12)
FLAGS = ["--material", "GaAs", "--core-type", "p", "--core-radius", "100nm", "--core-doping", "1e19",
         "--shell-doping", "1e19", "--dit", "1e12"]
THR = radialpn.TUNNEL_RISK_LOG10


def run(argv):
    buf, out = io.StringIO(), io.StringIO()
    code = main(argv, console=Console(file=buf, width=100, color_system=None), out=out)
    return code, buf.getvalue(), out.getvalue()


def test_map_over_the_interlayer_marks_tunnelling_risk():
    # The map's cells are the engine's answers at the grid points (same engine, same inputs:
    # exact), and a cell is at risk exactly where the estimate lies above TUNNEL_RISK_LOG10.
    # Common practice (p-i-n design): along a row the interlayer only lowers the risk.
    m = radialpn.regime_map(WIRE, ("interlayer_nm", 0, 30), ("shell_doping_cm3", 1e17, 1e19), (12, 5),
                            engine="depletion")
    assert m["answered_by"] == {"depletion": 60}
    direct = radialpn.deplete(m["designs"])
    np.testing.assert_array_equal(m["tunnel_log10"].ravel(), direct["tunnel_log10"])
    np.testing.assert_array_equal(m["tunnel_risk"], m["tunnel_log10"] > THR)
    assert m["tunnel_risk"][-1, 0] and not m["tunnel_risk"][-1, -1] and not m["tunnel_risk"][0].any()
    assert np.all(np.diff(m["tunnel_risk"].astype(int), axis=1) <= 0)


def test_map_auto_says_which_engine_answered():
    # Shipped bundles are trained at interlayer 0: under auto the solver answers the rest, and
    # the map says so; the surrogate's cells carry no tunnelling estimate (NaN, never at risk).
    m = radialpn.regime_map(WIRE, ("interlayer_nm", 0, 20), ("shell_thickness_nm", 40, 80), (4, 2))
    assert m["answered_by"] == {"solver": 6, "surrogate": 2}
    assert np.isnan(m["tunnel_log10"][:, 0]).all() and np.isfinite(m["tunnel_log10"][:, 1:]).all()
    assert not m["tunnel_risk"][:, 0].any()


def test_search_leaves_out_candidates_at_tunnelling_risk():
    # Default: no winner lies above the threshold, and the count of those left out is reported;
    # allowing the risk brings smaller (riskier) designs back. Depletion engine: exact columns.
    base = {k: v for k, v in WIRE.items() if k != "shell_thickness_nm"}
    vary = {"shell_thickness_nm": (5, 100), "interlayer_nm": (0, 30)}
    safe = radialpn.search(base, vary, candidates=20_000, engine="depletion", confirm=False)
    free = radialpn.search(base, vary, candidates=20_000, engine="depletion", confirm=False, avoid_tunnelling=False)
    assert safe["winners"]["objective"].size == 5 and np.all(safe["winners"]["tunnel_log10"] <= THR)
    assert safe["tunnelling_excluded"] > 0 and safe["tunnelling_unchecked"] == 0
    assert free["feasible"] == safe["feasible"] + safe["tunnelling_excluded"]
    assert free["winners"]["objective"][0] <= safe["winners"]["objective"][0]
    assert np.any(free["winners"]["tunnel_log10"] > THR)
    assert set(safe["winners"]["engine"]) == {"depletion"} and safe["answered_by"] == free["answered_by"]
    # without an interlayer to vary every feasible candidate tunnels: the reason says what would help
    none = radialpn.search(base, {"shell_thickness_nm": (5, 100)}, candidates=5_000, engine="depletion")
    assert not none["winners"]["objective"].size and "tunnelling risk" in none["reason"]


def test_size_the_interlayer_with_the_depletion_engine():
    # critical_dimensions(sized=...interlayer_nm): the thickest interlayer keeping 90 % of V_bi0
    # and the thinnest whose tunnelling estimate is at or below the threshold; checked against
    # the engine itself 0.05 nm either side (40 bisection steps on a 60 nm range leave ~1e-10 nm).
    r = radialpn.critical_dimensions(WIRE, engine="depletion", confirm=False, sized=("interlayer_nm",))
    assert "core_radius_nm" not in r and "shell_thickness_nm" not in r
    il = r["interlayer_nm"]
    assert 0 < il["tunnel_free_nm"] < il["value_nm"] < 59.5 and il["engine"] == il["tunnel_engine"] == "depletion"
    out = radialpn.deplete({**WIRE, "interlayer_nm": [il["value_nm"] - 0.05, il["value_nm"] + 0.05,
                                                      il["tunnel_free_nm"] - 0.05, il["tunnel_free_nm"] + 0.05]})
    kept = out["vbi_V"] >= 0.9 * out["vbi0_V"]
    assert kept[0] and not kept[1]
    assert out["tunnel_log10"][2] > THR >= out["tunnel_log10"][3]


def test_size_interlayer_confirmed_by_the_solver_and_refusals():
    # Under auto the interlayer rows are the solver's (bundles fixed at 0): the solver check
    # meets the target 0.5 nm below and misses it 0.5 nm above. A shell with no room for an
    # interlayer gets a reason, and an unknown sized name a one-line error.
    r = radialpn.critical_dimensions({**WIRE, "shell_doping_cm3": 3e18}, sized=("interlayer_nm",))
    il = r["interlayer_nm"]
    assert il["engine"] == "solver" and il["confirmed"] is True
    thin = radialpn.critical_dimensions({**WIRE, "shell_thickness_nm": 0.5}, engine="depletion",
                                        sized=("interlayer_nm",))["interlayer_nm"]
    assert np.isnan(thin["value_nm"]) and "no room for an interlayer" in thin["reason"]
    with pytest.raises(radialpn.DesignError, match="sized"):
        radialpn.critical_dimensions(WIRE, sized=("interlayer",))
    with pytest.raises(radialpn.DesignError, match="sized"):  # a sweep traces core and shell only: no silent drop
        radialpn.critical_dimensions(WIRE, sized=("interlayer_nm",), sweep=("shell_doping_cm3", 1e17, 1e18))


def test_spread_of_the_interlayer():
    # A tolerance on the interlayer: samples stay in its allowed range (>= 0) and the answer
    # says which engine answered and what share of the runs is at tunnelling risk; a thick
    # interlayer (24 nm +- 1 nm; risk ends near 20 nm) keeps the junction out of risk, a thin one (2 +- 1 nm) does not.
    thick = radialpn.spread({**WIRE, "interlayer_nm": 24.0}, {"interlayer_nm": "1nm"}, samples=4000, engine="depletion")
    thin = radialpn.spread({**WIRE, "interlayer_nm": 2.0}, {"interlayer_nm": "1nm"}, samples=4000, engine="depletion")
    assert thick["answered_by"] == {"depletion": 4000} and thick["tunnelling_risk"] == 0.0
    assert thin["tunnelling_risk"] == 1.0 and thick["answered"] == thin["answered"] == 4000


def test_cli_design_commands_take_the_interlayer():
    code, text, _ = run(["map"] + FLAGS + ["--shell-thickness", "60nm", "--x", "interlayer:0nm:30nm", "--y",
                                           "shell-doping:1e17:1e19", "--cells", "12x5", "--engine", "depletion"])
    assert code == 0 and "tunnelling risk over interlayer_nm" in text and "⚑" in text
    assert "answered by the depletion engine (60 cells)" in " ".join(text.split())
    code, _, out = run(["map"] + FLAGS + ["--shell-thickness", "60nm", "--x", "interlayer:0nm:30nm", "--y",
                                          "shell-doping:1e17:1e19", "--cells", "4x2", "--engine", "depletion", "--json"])
    grid = json.loads(out)
    assert code == 0 and grid["answered_by"] == {"depletion": 8} and len(grid["tunnel_risk"]) == 2
    code, text, out = run(["size"] + FLAGS + ["--shell-thickness", "60nm", "--sized", "shell,interlayer",
                                              "--engine", "depletion", "--no-confirm", "--json"])
    dims = {d["dimension"]: d for d in json.loads(out)["dimensions"]}
    assert code == 0 and set(dims) == {"shell_thickness_nm", "interlayer_nm", "interlayer_nm_tunnel_free"}
    assert dims["interlayer_nm_tunnel_free"]["value_nm"] < dims["interlayer_nm"]["value_nm"]
    code, text, _ = run(["size"] + FLAGS + ["--shell-thickness", "60nm", "--sized", "interlayer", "--engine",
                                            "depletion", "--no-confirm"])
    assert code == 0 and "thickest interlayer" in text and "out of tunnelling risk" in " ".join(text.split())
    assert run(["size"] + FLAGS + ["--shell-thickness", "60nm", "--sized", "core,wall"])[0] == 2
    assert run(["size"] + FLAGS + ["--sized", "interlayer", "--sweep", "shell-doping:1e17:1e18"])[0] == 2
    # the solver's checks land in the columns that name their side: a thicker interlayer leaves
    # less doped shell, so V_bi 0.5 nm above the critical value is below V_bi 0.5 nm under it
    code, _, out = run(["size"] + FLAGS + ["--shell-thickness", "60nm", "--sized", "interlayer", "--engine",
                                           "depletion", "--json"])
    il = {d["dimension"]: d for d in json.loads(out)["dimensions"]}["interlayer_nm"]
    assert code == 0 and il["solver_vbi_above_V"] < il["solver_vbi_below_V"]
    vary = ["--vary", "shell-thickness:5nm:100nm", "--vary", "interlayer:0nm:30nm", "--candidates", "5000",
            "--engine", "depletion"]
    code, text, _ = run(["search"] + FLAGS + vary)
    assert code == 0 and "left out; --allow-tunnelling keeps them" in " ".join(text.split())
    code, _, out = run(["search"] + FLAGS + vary + ["--allow-tunnelling", "--json"])
    assert code == 0 and json.loads(out)["avoid_tunnelling"] is False
    code, text, _ = run(["spread"] + FLAGS + ["--shell-thickness", "60nm", "--interlayer", "24nm", "--spread",
                                              "interlayer=1nm", "--samples", "2000", "--engine", "depletion"])
    assert code == 0 and "interlayer_nm" in text and "tunnelling risk" in text
