"""Depletion engine with an undoped interlayer (the p-i-n wire), its validity statuses and its
tunnelling columns: against an independent scipy implementation, the planar p-i-n diode of
the textbooks, the p-n engine in the limit of a vanishing interlayer, the reference solver, and
the bounds every `ok` row keeps over edge designs."""

import math

import numpy as np
import pytest
from scipy.constants import Boltzmann, elementary_charge as Q, epsilon_0 as EPS0

import radialpn
from radialpn import Material, deplete, get_material, solve

import reference_depletion

GAAS = get_material("GaAs")
KT = Boltzmann * 300.0 / Q  # kT [eV] at 300 K, CODATA via scipy.constants


def _reference_row(d):
    """tests/reference_depletion.py on one design row (p-core frame by hand, Boltzmann levels)."""
    out = reference_depletion.design_row(d, get_material(d["material"]))
    return out


def test_interlayer_agrees_with_independent_scipy_solver():
    # tests/reference_depletion.py: raw radii, brentq, and every drop (the interlayer's too)
    # integrated from the Gauss's-law field with quad. Both are exact up to root tolerance and
    # quadrature error (~1e-10 V): V_bi within 1e-6 V; the peak field within 1e-6 relative (the
    # reference takes the maximum of its field on a grid through the interfaces). Rows within
    # 1e-3 of a regime boundary are excluded from the regime check only.
    rng = np.random.default_rng(20261202)
    rows = []
    for i in range(64):
        t = 10 ** rng.uniform(0.5, 2.5)
        rows.append(dict(material="GaAs", core_type="pn"[i % 2], core_radius_nm=10 ** rng.uniform(1, 2.5),
                         shell_thickness_nm=t, interlayer_nm=t * rng.uniform(0.05, 0.8),
                         core_doping_cm3=10 ** rng.uniform(16, 19), shell_doping_cm3=10 ** rng.uniform(16, 19),
                         dit_cm2eV=10 ** rng.uniform(10, 14)))
    out = deplete(rows, "boltzmann")
    seen = set()
    for i, d in enumerate(rows):
        assert out["status"][i] == "ok", (d, out["status"][i])
        regime, vbi, peak = _reference_row(d)
        seen.add(regime)
        assert out["vbi_V"][i] == pytest.approx(vbi, abs=1e-6), d
        assert out["peak_field_V_per_cm"][i] == pytest.approx(peak / 100.0, rel=1e-6), d
        if min(abs(out["core_margin"][i]), abs(out["shell_margin"][i])) > 1e-3:
            assert out["regime"][i] == regime, d
    assert seen == set(radialpn.REGIMES)  # the sample exercises every regime with an interlayer


@pytest.mark.parametrize("d_nm", [20.0, 100.0, 400.0])
def test_planar_pin_limit_at_micrometre_radii(d_nm):
    # Planar p-i-n diode in the depletion approximation: the field is constant across the
    # i-layer of width d, so V_bi0 = (q N_A / 2 eps) [x_p^2 (1 + N_A/N_D) + 2 d x_p] with
    # N_A x_p = N_D x_n, peak field q N_A x_p / eps, and V_bi0 = (kT/q) ln(N_A N_D / n_i^2) as for
    # the p-n diode (Neamen, Semiconductor Physics and Devices, 4th ed., ch. 7, the p-i-n
    # problems, from memory; d = 0 gives Sze & Ng, 3rd ed., eq. 2.12-2.13). At a = 50 um the
    # depletion (< 0.5 um) is under 1 % of the radius; the curvature correction is of order x/a:
    # 1 % tolerance.
    na, nd, a = 2e17, 5e17, 5e4
    r = deplete(dict(material="GaAs", core_type="p", core_radius_nm=a, shell_thickness_nm=a, interlayer_nm=d_nm,
                     core_doping_cm3=na, shell_doping_cm3=nd, dit_cm2eV=0.0), "boltzmann")
    assert r["status"][0] == "ok" and r["regime"][0] == "both-neutral"
    eps = GAAS.permittivity_rel * EPS0
    NA, ND, d = na * 1e6, nd * 1e6, d_nm * 1e-9
    vn = 2 * eps * r["vbi0_V"][0] / (Q * NA)
    xp = (-d + math.sqrt(d * d + (1 + NA / ND) * vn)) / (1 + NA / ND)
    assert a - r["core_neutral_radius_nm"][0] == pytest.approx(xp * 1e9, rel=1e-2)
    assert r["junction_edge_nm"][0] - a - d_nm == pytest.approx(NA / ND * xp * 1e9, rel=1e-2)  # x_n
    assert r["peak_field_V_per_cm"][0] == pytest.approx(Q * NA * xp / eps / 100, rel=1e-2)
    # both regions neutral: V_bi is the bulk V_bi0, exactly (Sze & Ng, 3rd ed., eq. 2.10)
    ni2 = GAAS.nc(300) * GAAS.nv(300) * math.exp(-GAAS.band_gap(300) / KT)
    assert r["vbi_V"][0] == r["vbi0_V"][0] == pytest.approx(KT * math.log(na * nd / ni2), abs=1e-9)


def _random(n, seed, **extra):
    rng = np.random.default_rng(seed)
    d = dict(material="GaAs", core_type=np.where(rng.random(n) < 0.5, "p", "n"),
             core_radius_nm=10 ** rng.uniform(1, 2.5, n), shell_thickness_nm=10 ** rng.uniform(0.3, 2.5, n),
             core_doping_cm3=10 ** rng.uniform(16, 19, n), shell_doping_cm3=10 ** rng.uniform(16, 19, n),
             dit_cm2eV=10 ** rng.uniform(10, 14, n), temperature_K=rng.uniform(250, 400, n))
    d.update(extra)
    return d


def test_vanishing_interlayer_gives_the_pn_engine():
    # The interlayer adds a drop E_peak * t_i to the junction: t_i = 1e-9 nm at fields below
    # 1e8 V/m moves V_bi by < 1e-10 V, so interlayer -> 0 must give the p-n answer to 1e-9 V
    # (and the same regimes). interlayer_nm = 0 itself takes b = a exactly (ln beta = 0).
    d = _random(4000, 21)
    pn, tiny = deplete(d), deplete({**d, "interlayer_nm": 1e-9})
    ok = pn["status"] == "ok"
    assert ok.sum() > 3000
    np.testing.assert_array_equal(pn["status"], tiny["status"])
    np.testing.assert_array_equal(pn["regime"][ok], tiny["regime"][ok])
    for k in ("vbi_V", "surface_bending_V"):
        np.testing.assert_allclose(tiny[k][ok], pn[k][ok], rtol=0, atol=1e-9)


def test_interlayer_n_core_equals_mirrored_p_core():
    # docs/physics.md section 1: an n-core design is the p-core mirror (N_c <-> N_v, neutral
    # level from the other band edge); the interlayer is undoped either way. Same equations: 1e-9.
    mirror = Material("GaAs-mirror-pin", GAAS.band_gap_300_eV, GAAS.varshni_alpha_eV_K, GAAS.varshni_beta_K,
                      GAAS.permittivity_rel, GAAS.nv_300_cm3, GAAS.nc_300_cm3, GAAS.band_gap_300_eV - GAAS.cnl_eV)
    radialpn.register_material(mirror)
    d = _random(300, 8)
    d.pop("core_type")
    d["interlayer_nm"] = d["shell_thickness_nm"] * np.random.default_rng(9).uniform(0, 0.6, 300)
    d["interlayer_nm"] = np.where(d["shell_thickness_nm"] - d["interlayer_nm"] < 0.5, 0.0, d["interlayer_nm"])
    ncore = deplete({**d, "core_type": "n"})
    pcore = deplete({**d, "material": "GaAs-mirror-pin", "core_type": "p",
                     "cnl_eV": GAAS.band_gap(d["temperature_K"]) - GAAS.cnl_eV})
    np.testing.assert_array_equal(ncore["regime"], pcore["regime"])
    for k in ("vbi_V", "core_neutral_radius_nm", "shell_neutral_nm", "surface_bending_V", "peak_field_V_per_cm"):
        np.testing.assert_allclose(ncore[k], pcore[k], rtol=1e-9, atol=1e-12)


def test_interlayer_agrees_with_reference_solver_at_high_doping():
    # As tests/test_solver.py's high-doping check, with 1-20 nm interlayers: designs 0.25 from a
    # regime boundary, neutral regions and doped shells over 5 nm. The depletion approximation
    # drops the majority tails at the depletion edges, worth ~2 kT/q in the barrier (Sze & Ng,
    # 3rd ed., sec. 2.2.1, the 2kT/q term of the depletion width): same regime, V_bi within
    # 3 kT/q. The peak field scales as sqrt(V_bi0 - 2kT/q), about 2 % at these dopings, plus the
    # carriers the undoped layer holds: within 6 %.
    rng = np.random.default_rng(3)
    n = 300
    d = _random(n, 3, temperature_K=300.0, core_doping_cm3=10 ** rng.uniform(18.5, 19.5, n),
                shell_doping_cm3=10 ** rng.uniform(18.5, 19.5, n), dit_cm2eV=10 ** rng.uniform(11, 13.5, n),
                shell_thickness_nm=10 ** rng.uniform(0.7, 2.5, n))
    d["interlayer_nm"] = np.clip(10 ** rng.uniform(0, 1.3, n), 0.0, d["shell_thickness_nm"] - 1.0)
    da, sv = deplete(d, "boltzmann"), solve(d, "boltzmann")
    away = (np.abs(da["core_margin"]) > 0.25) & (np.abs(da["shell_margin"]) > 0.25)
    away &= (da["core_neutral_radius_nm"] == 0) | (da["core_neutral_radius_nm"] > 5)
    away &= (da["shell_neutral_nm"] == 0) | (da["shell_neutral_nm"] > 5)
    away &= (da["status"] == "ok") & (sv["status"] == "ok") & (d["shell_thickness_nm"] - d["interlayer_nm"] > 5)
    assert away.sum() > 150
    assert len(set(da["regime"][away])) >= 3
    assert np.mean(da["regime"][away] == sv["regime"][away]) == 1.0
    assert np.max(np.abs(da["vbi_V"][away] - sv["vbi_V"][away])) < 3 * KT
    ratio = sv["peak_field_V_per_cm"][away] / da["peak_field_V_per_cm"][away]
    assert np.all(np.abs(ratio - 1) < 0.06)


def test_interlayer_lowers_the_junction_field_and_tunnelling():
    # Common practice (p-i-n design): an undoped layer spreads V_bi over a wider region, so the
    # peak field and the tunnelling estimate fall monotonically with its thickness; the estimate
    # is Kane's expression at that field (radialpn's tunnelling model, same as the solver's).
    il = np.linspace(0.0, 30.0, 31)
    out = deplete(dict(material="GaAs", core_type="p", core_radius_nm=100.0, shell_thickness_nm=60.0,
                       core_doping_cm3=1e19, shell_doping_cm3=1e19, dit_cm2eV=1e11, interlayer_nm=il))
    assert (out["status"] == "ok").all()
    assert np.all(np.diff(out["peak_field_V_per_cm"]) < 0) and np.all(np.diff(out["tunnel_log10"]) < 0)
    assert out["tunnel_log10"][0] > radialpn.TUNNEL_RISK_LOG10 > out["tunnel_log10"][-1]


def _edge_designs(n, seed):
    """Designs at the edges of the stated domain: every material, 77-500 K, dopings and D_it to
    the validation limits, interlayers up to most of the shell, an eighth of each range at
    either end."""
    rng = np.random.default_rng(seed)

    def ends(lo, hi):
        x = 10 ** rng.uniform(np.log10(lo), np.log10(hi), n)
        e = rng.random(n)
        return np.where(e < 0.125, lo, np.where(e < 0.25, hi, x))

    shell = ends(0.5, 1e3)
    il = np.where(rng.random(n) < 0.3, 0.0, np.minimum(ends(0.1, 1e3), np.maximum(shell - 0.6, 0.0)))
    t = np.where(rng.random(n) < 0.2, rng.choice([77.0, 500.0], n), rng.uniform(77.0, 500.0, n))
    names = np.array(radialpn.material_names())
    return dict(material=names[rng.integers(0, names.size, n)], core_type=np.where(rng.random(n) < 0.5, "p", "n"),
                core_radius_nm=ends(1.0, 1e3), shell_thickness_nm=shell, interlayer_nm=il,
                core_doping_cm3=ends(1e12, 1e21), shell_doping_cm3=ends(1e12, 1e21),
                dit_cm2eV=np.where(rng.random(n) < 0.15, 0.0, ends(1e8, 1e17)), temperature_K=t)


def test_ok_rows_keep_the_bounds_over_edge_designs():
    # Issue 10's bounds for the depletion engine: every `ok` row has 0 <= V_bi <= V_bi0 + 1 mV
    # (the built-in potential cannot exceed the bulk Fermi-level difference when the surface
    # depletes: Sze & Ng, 3rd ed., sec. 2.2, eq. 2.10; the engine refuses accumulating
    # surfaces) and finite margins, extents, peak field and tunnelling estimate; every other
    # row says why. 40,000 designs (about 0.3 s).
    d = _edge_designs(40_000, 20261202)
    out = deplete(d)
    ok = out["status"] == "ok"
    assert ok.sum() > 10_000 and (d["interlayer_nm"][ok] > 0).sum() > 5_000
    assert set(radialpn.material_names()) == set(d["material"][ok])
    assert np.all(out["vbi_V"][ok] >= 0.0) and np.all(out["vbi_V"][ok] <= out["vbi0_V"][ok] + 1e-3)
    for k in ("vbi_V", "vbi0_V", "core_margin", "shell_margin", "core_neutral_radius_nm", "shell_neutral_nm",
              "junction_edge_nm", "surface_bending_V", "peak_field_V_per_cm", "tunnel_log10"):
        assert np.all(np.isfinite(out[k][ok])), k
    assert all(isinstance(s, str) and len(s) > 10 for s in out["status"][~ok])
    assert np.all(np.isnan(out["vbi_V"][~ok]))


def test_degenerate_rows_carry_the_solvers_validity_status():
    # docs/physics.md section 9 (parabolic bands): InAs at 1e20 cm^-3 and 77 K puts the shell's
    # Fermi level far inside the conduction band, beyond DEGENERACY_GAP_FRACTION of the gap; the
    # depletion engine and the solver refuse it with the same text.
    d = dict(material="InAs", core_type="p", core_radius_nm=50.0, shell_thickness_nm=40.0, core_doping_cm3=1e17,
             shell_doping_cm3=1e20, dit_cm2eV=0.0, temperature_K=77.0)
    da, sv = deplete(d), solve(d)
    assert da["status"][0].startswith("outside the model: the neutral shell's Fermi level lies")
    assert da["status"][0] == sv["status"][0]


@pytest.mark.parametrize("kw", [dict(dit_cm2eV=1e11), dict(shell_thickness_nm=25.0, dit_cm2eV=1e13),
                                dict(core_radius_nm=12.0, shell_thickness_nm=20.0, dit_cm2eV=1e13),
                                dict(core_type="n", core_radius_nm=15.0, dit_cm2eV=1e12)])
def test_depletion_profile_with_interlayer(kw):
    # The band profile is rebuilt from the same balances (surrogate/_profiles.py). Continuity
    # through r = a and r = b: 8001 points put 0.015 nm between neighbours, where a field under
    # 1e8 V/m moves E_v by < 1.5e-3 eV, while a wrong offset at an interface would be a step of
    # the interlayer's drop (~0.1 V): every step under 3e-3 eV. Its extrema give the engine's
    # V_bi (max of the core's E_v minus min of the shell's, p-core frame; a quadratic extremum
    # on this grid is off by ~1e-6 V): 1e-4 V.
    d = dict(material="GaAs", core_type="p", core_radius_nm=60.0, shell_thickness_nm=60.0, interlayer_nm=8.0,
             core_doping_cm3=1e18, shell_doping_cm3=1e18)
    d.update(kw)
    prof = radialpn.depletion_profile(d, "boltzmann", points=8001)
    r, ev = prof["r_nm"], prof["ev_eV"] if d["core_type"] == "p" else -prof["ec_eV"]
    steps = np.abs(np.diff(ev))
    assert steps.max() < 3e-3
    a, b = d["core_radius_nm"], d["core_radius_nm"] + d["interlayer_nm"]
    assert set(prof["region"][(r > a + 0.1) & (r < b - 0.1)]) == {"interlayer"}
    core, shell = r <= a, r >= b
    assert ev[core].max() - ev[shell].min() == pytest.approx(prof["vbi_V"], abs=1e-4)
    ref = deplete({k: [v] for k, v in d.items()}, "boltzmann")
    assert prof["vbi_V"] == pytest.approx(ref["vbi_V"][0], abs=1e-12) and prof["regime"] == ref["regime"][0]
