"""Incomplete ionisation (docs/physics.md section 4.1): the ionised fraction against a textbook
worked example and the freeze-out limit, full ionisation recovered for a vanishing level and
above the Mott density, the depletion engine's V_bi0 against a scipy brentq neutrality solve,
the solver against an independent solve_bvp, and the option's flow through the engines."""

import io
import json
import math

import numpy as np
import pytest
from rich.console import Console
from scipy.optimize import brentq

import radialpn
from radialpn import Material, bulk_level, get_material, ionised_fraction, mott_density
from radialpn.cli import main

import reference_bvp

KB = 8.617333262e-5  # [eV/K], CODATA 2018 exact ratio


def test_neamen_fraction_of_electrons_still_in_donor_states():
    # Neamen, Semiconductor Physics and Devices, Example 4.7 (eq. 4.55; 4th ed., edition from memory,
    # the example's numbers and answer checked against a transcription): P in Si, N_d = 1e16 cm^-3,
    # T = 300 K with kT = 0.0259 eV, N_c = 2.8e19 cm^-3, E_c - E_d = 0.045 eV, g = 2: 0.41 % of the
    # electrons are still in the donor states. Boltzmann statistics and the dilute level (no Mott
    # reduction: mott_cm3 = inf) are the example's assumptions.
    kt = 0.0259
    nd, nc, ed = 1e16, 2.8e19, 0.045
    ec_minus_ef = bulk_level(nd, nc, kt / KB, "boltzmann", ionisation_eV=ed, degeneracy=2.0, mott_cm3=math.inf)
    still_bound = 1.0 - ionised_fraction(ec_minus_ef - ed, kt, 2.0)  # n_d / N_d, E_D - E_F = (E_c - E_F) - E_d
    # eq. 4.55 evaluated: 1 / (1 + N_c / (2 N_d) exp(-E_d / kT)); it drops a term of relative size
    # n_d / N_d = 0.4 %, hence 1 %
    eq455 = 1.0 / (1.0 + nc / (2 * nd) * math.exp(-ed / kt))
    assert still_bound == pytest.approx(eq455, rel=0.01)
    # the printed answer 0.41 % has two digits (+-1.2 %) on top of that approximation: 2 %
    assert still_bound == pytest.approx(0.0041, rel=0.02)
    # and the neutrality it came from: n = N_d+ (Boltzmann n = N_c exp(-(E_c - E_F)/kT)), to 1e-9
    assert nc * math.exp(-ec_minus_ef / kt) == pytest.approx(nd * (1 - still_bound), rel=1e-9)


def test_freeze_out_limit():
    # Deep freeze-out, n << N_d: n = sqrt(N_c N_d / g_D) exp(-E_d / 2kT) (Sze & Ng, Physics of
    # Semiconductor Devices, 3rd ed., sec. 1.4.2, low-temperature limit of the neutrality condition
    # with g_D = 2; from memory). Si-like donor, 15-25 K, Boltzmann, dilute level. Exactly,
    # n = sqrt(N_c N_d / 2) exp(-E_d / 2kT) sqrt(1 - n / N_d): the limit is off by n / 2N_d < 5e-4
    # here, hence 1e-3.
    si = get_material("Si")
    for t in (15.0, 20.0, 25.0):
        kt = KB * t
        nc = float(si.nc(t))
        nd = 1e16
        delta = bulk_level(nd, nc, t, "boltzmann", ionisation_eV=0.045, degeneracy=2.0, mott_cm3=math.inf)
        n = nc * math.exp(-delta / kt)
        assert n / nd < 1e-3
        assert n == pytest.approx(math.sqrt(nc * nd / 2.0) * math.exp(-0.045 / (2 * kt)), rel=1e-3)
        exact = math.sqrt(nc * nd / 2.0) * math.exp(-0.045 / (2 * kt)) * math.sqrt(1 - n / nd)
        assert n == pytest.approx(exact, rel=1e-6)  # the exact relation, to the root tolerance


def test_full_ionisation_recovered_for_vanishing_level_and_above_mott_density():
    # E_i -> 0 at low doping: the unionised share tends to g N / N_c (Boltzmann; Sze & Ng, 3rd ed.,
    # eq. 1.38 with E_F - E_D = kT ln(N / N_c)), so the level moves by at most kT g N / N_c.
    kt = KB * 300
    full = bulk_level(1e14, 4.7e17, 300.0, "fermi-dirac")
    inc = bulk_level(1e14, 4.7e17, 300.0, "fermi-dirac", ionisation_eV=1e-9, degeneracy=2.0, mott_cm3=1e22)
    assert abs(inc - full) <= kt * 2 * 1e14 / 4.7e17 * 1.01
    assert abs(inc - full) > 0  # not the full-ionisation branch itself
    # at and above the Mott density the level is metallic: full ionisation exactly (s = 0)
    for n in (5e18, 1e19, 1e20):
        assert bulk_level(n, 2.86e19, 77.0, ionisation_eV=0.045, mott_cm3=5e18) == bulk_level(n, 2.86e19, 77.0)
    # Mott density of the hydrogenic criterion for Si (45 meV, eps_r 11.9) against Pearson & Bardeen's
    # 5e18 cm^-3, above which they measured no activation energy for B in Si (Phys. Rev. 75, 865
    # (1949), abstract): the criterion is an order-of-magnitude rule, so a factor of 2
    assert 2.5e18 < mott_density(0.045, 11.9) < 1e19


def _brentq_level(N, dos, kt, e0, g, s):
    """E_band - E_F [eV] from N (1 - s + s / (1 + g exp((E_i - delta)/kT))) = dos F_1/2(-delta/kT),
    scipy brentq with F_1/2 from scipy quad (tests/reference_bvp.py), to 1e-14 eV."""
    e = e0 * s

    def f(delta):
        ion = N * (1 - s + s / (1 + g * math.exp((e - delta) / kt)))
        return ion - dos * float(reference_bvp.fermi_half(-delta / kt))

    return brentq(f, -1.0, 1.5, xtol=1e-14)


@pytest.mark.parametrize("material,core_type,na,nd,t", [
    ("GaN", "p", 1e19, 1e18, 300.0),  # deep Mg acceptor core at room temperature
    ("Si", "n", 3e17, 1e17, 77.0),  # cold shallow donor core, acceptor shell
    ("GaAs", "p", 5e17, 1e16, 120.0),  # Zn core; the shell's donors above their Mott density (full)
    ("Ge", "p", 1e16, 1e16, 40.0),
])
def test_depletion_vbi0_matches_brentq_neutrality(material, core_type, na, nd, t):
    # V_bi0 = E_g - (E_F - E_v)_core - (E_c - E_F)_shell, each from the neutrality of ionised dopants
    # and majority carriers (Sze & Ng, 3rd ed., eq. 1.38-1.39, minority carriers neglected as in the
    # engine), solved by scipy brentq. The engine's root tolerance is 1e-12 kT and the two F_1/2
    # tables agree to 1e-8 relative: 1 uV.
    m = get_material(material)
    d = dict(material=material, core_type=core_type, core_radius_nm=100, shell_thickness_nm=100,
             core_doping_cm3=na, shell_doping_cm3=nd, dit_cm2eV=0.0, temperature_K=t)
    got = radialpn.deplete(d, ionisation="incomplete")
    assert got["status"][0] == "ok" and got["ionisation"][0] == "incomplete"
    kt = KB * t
    core_kind, shell_kind = ("acceptor", "donor") if core_type == "p" else ("donor", "acceptor")
    core_dos, shell_dos = (m.nv(t), m.nc(t)) if core_type == "p" else (m.nc(t), m.nv(t))
    levels = []
    for n, kind, dos in ((na, core_kind, core_dos), (nd, shell_kind, shell_dos)):
        e0, g, nm = m.dopant(kind)
        s = max(0.0, 1 - (n / nm) ** (1 / 3))  # Pearson & Bardeen's N^(1/3) law, zero at the Mott density
        levels.append(_brentq_level(n, float(dos), kt, e0, g, s))
    want = float(m.band_gap(t)) - levels[0] - levels[1]
    assert got["vbi0_V"][0] == pytest.approx(want, abs=1e-6)
    full = radialpn.deplete(d, ionisation="full")["vbi0_V"][0]
    assert got["vbi0_V"][0] < full  # frozen-out dopants pull both levels towards mid-gap


BVP_CASES = [  # (material, core type, a, t, N_core, N_shell, D_it, T)
    ("GaN", "p", 60, 40, 1e19, 3e18, 1e12, 300.0),  # deep Mg core at room temperature
    ("Si", "p", 50, 40, 1e17, 3e17, 1e11, 77.0),  # cold B core and P shell
    ("GaAs", "n", 40, 60, 1e18, 2e17, 1e12, 100.0),  # mirrored: donor core above its Mott density, Zn shell
]


@pytest.mark.parametrize("case", BVP_CASES)
def test_solver_matches_solve_bvp_with_incomplete_ionisation(case):
    # scipy.integrate.solve_bvp with F_1/2 from scipy quad and the ionised dopants written out
    # (tests/reference_bvp.py), tol 1e-7: V_bi, V_bi0 and the surface bending within 0.1 mV (the
    # solver's grid error, docs/physics.md section 8.4). n-core designs go to the reference mirrored.
    name, ct, a, t, n_core, n_shell, dit, T = case
    m = get_material(name)
    d = dict(material=name, core_type=ct, core_radius_nm=a, shell_thickness_nm=t, core_doping_cm3=n_core,
             shell_doping_cm3=n_shell, dit_cm2eV=dit, temperature_K=T)
    got = radialpn.solve(d, ionisation="incomplete")
    assert got["status"][0] == "ok" and got["ionisation"][0] == "incomplete"
    prof = radialpn.training.solver_profile(d, ionisation="incomplete")
    y_of_r = prof["ev_eV"] * -1 if ct == "p" else prof["ec_eV"]  # mirrored-frame y, only a start
    guess = lambda r: np.interp(r, prof["r_nm"], y_of_r)  # noqa: E731
    eg = float(m.band_gap(T))
    nc, nv = (m.nc(T), m.nv(T)) if ct == "p" else (m.nv(T), m.nc(T))
    cnl = m.cnl_eV if ct == "p" else eg - m.cnl_eV
    kinds = ("acceptor", "donor") if ct == "p" else ("donor", "acceptor")
    dop = []
    for n, kind in zip((n_core, n_shell), kinds):
        e0, g, nm = m.dopant(kind)
        s = max(0.0, 1 - (n / nm) ** (1 / 3))
        dop.append((e0 * s, g, s))
    vbi, r, y = reference_bvp.solve(n_core, n_shell, a, t, m.permittivity_rel, eg, float(nc), float(nv), T, dit, cnl,
                                    guess, statistics="fermi-dirac", core_dopant=dop[0], shell_dopant=dop[1])
    assert got["vbi_V"][0] == pytest.approx(vbi, abs=1e-4)
    shell = r >= a
    assert got["surface_bending_V"][0] == pytest.approx(float(y[shell].max() - y[-1]), abs=1e-4)
    # V_bi0 against the neutral levels of the same reference charge model (brentq, minority
    # carriers included as in the solver): 1e-6 V as above
    kt = KB * T
    occ = reference_bvp.fermi_half

    def neutral(n, dos_maj, dos_min, level, g, s):
        f = lambda yy: (reference_bvp.ionised_acceptors(n, yy, level, g, s, kt)  # noqa: E731
                        - dos_maj * float(occ(-yy / kt)) + dos_min * float(occ((yy - eg) / kt)))
        return brentq(f, -1.0, eg + 1.0, xtol=1e-14)

    yc = neutral(n_core, float(nv), float(nc), *dop[0])
    ys = eg - neutral(n_shell, float(nc), float(nv), *dop[1])
    assert got["vbi0_V"][0] == pytest.approx(ys - yc, abs=1e-6)


def test_solver_converges_on_random_designs_with_incomplete_ionisation():
    # 300 random designs of every material, 77-500 K, dopings 1e15-1e20: every one converges
    # (the full check on 4,000 designs is in benchmarks/bench_solver.py --ionisation incomplete)
    rng = np.random.default_rng(11)
    n = 300
    d = dict(material=np.array(["GaAs", "InP", "InAs", "GaN", "Si", "Ge"])[rng.integers(0, 6, n)],
             core_type=np.where(rng.random(n) < 0.5, "p", "n"), core_radius_nm=10 ** rng.uniform(1, 2.5, n),
             shell_thickness_nm=10 ** rng.uniform(0.5, 2.5, n), core_doping_cm3=10 ** rng.uniform(15, 20, n),
             shell_doping_cm3=10 ** rng.uniform(15, 20, n), dit_cm2eV=10 ** rng.uniform(10, 14, n),
             temperature_K=rng.uniform(77, 500, n))
    out = radialpn.solve(d, ionisation="incomplete")
    assert not any(str(s).startswith("solver: no convergence") for s in out["status"])
    ok = out["status"] == "ok"
    assert ok.mean() > 0.7 and (out["ionisation"][ok] == "incomplete").all()


def test_auto_rule_and_bundle_domain_unchanged():
    # "auto": incomplete below 200 K and for GaN (Mg, 0.17 eV >= 0.1 eV) at any temperature; the bundles'
    # domain (GaAs/InP, 250-400 K) resolves to full ionisation and answers exactly as "full" does,
    # also in a batch that mixes in incomplete rows (same equations, bit for bit)
    rng = np.random.default_rng(3)
    n = 40
    d = dict(material=np.where(np.arange(n) % 2 == 0, "GaAs", "InP").astype(object), core_type="p",
             core_radius_nm=10 ** rng.uniform(1.2, 2.4, n), shell_thickness_nm=10 ** rng.uniform(0.5, 2.4, n),
             core_doping_cm3=10 ** rng.uniform(16, 19, n), shell_doping_cm3=10 ** rng.uniform(16, 19, n),
             dit_cm2eV=10 ** rng.uniform(10, 14, n), temperature_K=rng.uniform(250, 400, n))
    d["material"][:5] = "GaN"
    d["temperature_K"][5:10] = 100.0
    auto, full = radialpn.solve(d), radialpn.solve(d, ionisation="full")
    want = np.array(["incomplete"] * 10 + ["full"] * (n - 10), dtype=object)
    ok = auto["status"] == "ok"
    assert (auto["ionisation"][ok] == want[ok]).all() and ok[10:].all()
    for k in ("vbi_V", "vbi0_V", "surface_bending_V", "core_neutral_radius_nm", "shell_neutral_nm"):
        np.testing.assert_array_equal(auto[k][10:], full[k][10:])
    dep_auto, dep_full = radialpn.deplete(d), radialpn.deplete(d, ionisation="full")
    np.testing.assert_array_equal(dep_auto["vbi0_V"][10:], dep_full["vbi0_V"][10:])
    assert (dep_auto["vbi0_V"][:5] < dep_full["vbi0_V"][:5]).all()  # GaN:Mg holds V_bi0 down at 300 K


def test_engines_route_rows_whose_model_differs_from_the_bundles():
    row = dict(material="GaAs", core_type="p", core_radius_nm=60, shell_thickness_nm=40, core_doping_cm3=1e18,
               shell_doping_cm3=1e18, dit_cm2eV=1e12, temperature_K=300.0)
    sur = radialpn.predict(row, engine="surrogate")
    assert sur["status"][0] == "ok" and sur["ionisation"][0] == "full"  # default auto: the bundle answers
    refused = radialpn.predict(row, engine="surrogate", ionisation="incomplete")
    assert "the bundle learned full ionisation here" in refused["status"][0] and math.isnan(refused["vbi_V"][0])
    auto = radialpn.predict(row, ionisation="incomplete")
    assert auto["engine"][0] == "solver" and auto["ionisation"][0] == "incomplete"
    assert "full ionisation" in auto["engine_note"][0]
    # below 200 K the bundles learned incomplete ionisation (their training sets: "auto"), so a
    # cold row asked with "full" goes to the solver, and asked with "auto" stays with the bundle
    cold = dict(row, temperature_K=100.0)
    sur = radialpn.predict(cold, engine="surrogate")
    assert sur["status"][0] == "ok" and sur["ionisation"][0] == "incomplete"
    auto = radialpn.predict(cold, ionisation="full")
    assert auto["engine"][0] == "solver" and auto["ionisation"][0] == "full"
    assert "the bundle learned incomplete ionisation here" in auto["engine_note"][0]
    with pytest.raises(radialpn.DesignError, match="ionisation"):
        radialpn.predict(row, ionisation="partial")
    with pytest.raises(radialpn.DesignError, match="ionisation"):  # the bundle's own predict checks it too
        radialpn.load("GaAs", "p").predict(row, ionisation="Fully")


def test_material_without_dopant_levels():
    g = get_material("GaAs")
    key = "GaAs-nolevels-ion"
    if key.lower() not in [x.lower() for x in radialpn.material_names()]:
        radialpn.register_material(Material(key, g.band_gap_300_eV, g.varshni_alpha_eV_K, g.varshni_beta_K,
                                            g.permittivity_rel, g.nc_300_cm3, g.nv_300_cm3, g.cnl_eV))
    d = dict(material=key, core_type="p", core_radius_nm=60, shell_thickness_nm=40, core_doping_cm3=1e17,
             shell_doping_cm3=1e17, dit_cm2eV=0.0, temperature_K=77.0)
    assert radialpn.deplete(d)["ionisation"][0] == "full"  # auto: no levels, so full (and says so)
    res = radialpn.deplete(d, ionisation="incomplete")
    assert res["status"][0].startswith("ionisation: material") and "full" in res["status"][0]
    assert radialpn.solve(d, ionisation="incomplete")["status"][0] == res["status"][0]
    # a material file may give the levels: then they are used
    m = radialpn.material_from_dict("GaAs-levels-ion", {
        "band_gap_300_eV": 1.424, "varshni_alpha_eV_K": 5.405e-4, "varshni_beta_K": 204.0, "permittivity_rel": 12.9,
        "nc_300_cm3": 4.7e17, "nv_300_cm3": 9.0e18, "cnl_eV": 0.5, "donor_ionisation_eV": 0.0058,
        "acceptor_ionisation_eV": 0.031})
    assert m.dopant("acceptor")[:2] == (0.031, 4.0)
    with pytest.raises(radialpn.MaterialError, match="acceptor_degeneracy"):
        radialpn.material_from_dict("Bad-ion", {**{k: getattr(g, k) for k in (
            "band_gap_300_eV", "varshni_alpha_eV_K", "varshni_beta_K", "permittivity_rel", "nc_300_cm3", "nv_300_cm3",
            "cnl_eV")}, "acceptor_degeneracy": 0.0})


def test_cli_ionisation_flag():
    buf, out = io.StringIO(), io.StringIO()
    argv = ["ask", "--material", "Si", "--core-type", "p", "--core-radius", "60nm", "--shell-thickness", "40nm",
            "--core-doping", "1e17", "--shell-doping", "1e17", "--dit", "1e11", "--temperature", "300",
            "--ionisation", "incomplete", "--json"]
    assert main(argv, console=Console(file=buf, width=120, color_system=None), out=out) == 0
    row = json.loads(out.getvalue())
    assert row["ionisation"] == "incomplete" and row["engine"] == "solver"
    buf, out = io.StringIO(), io.StringIO()
    assert main(argv[:-3] + ["--json"], console=Console(file=buf, width=120, color_system=None), out=out) == 0
    row = json.loads(out.getvalue())
    assert row["ionisation"] == "full" and row["engine"] == "surrogate"  # auto at 300 K, shallow B and P
