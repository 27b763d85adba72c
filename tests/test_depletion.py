"""Depletion engine against textbook formulas, an independent scipy implementation, limits,
continuity, the n/p mirror and the trends of the trade."""

import math

import numpy as np
import pytest

import radialpn
from radialpn import deplete, get_material
from scipy.constants import Boltzmann, elementary_charge, elementary_charge as Q, epsilon_0 as EPS0

from radialpn import Material

import reference_depletion

GAAS = get_material("GaAs")
KT = Boltzmann * 300.0 / elementary_charge  # kT [eV] at 300 K, CODATA via scipy.constants


def design(**kw):
    base = dict(material="GaAs", core_type="p", core_radius_nm=60.0, shell_thickness_nm=40.0,
                core_doping_cm3=1e18, shell_doping_cm3=1e18, dit_cm2eV=1e12)
    base.update(kw)
    return base


def one(statistics="boltzmann", **kw):
    out = deplete({k: [v] for k, v in design(**kw).items()}, statistics)
    assert out["status"][0] == "ok", out["status"][0]
    return {k: v[0] for k, v in out.items()}


def test_vbi0_textbook_boltzmann():
    # V_bi0 = (kT/q) ln(N_A N_D / n_i^2), n_i^2 = N_c N_v exp(-E_g/kT): Sze & Ng, Physics of
    # Semiconductor Devices, 3rd ed. (2007), eq. 2.10 and 1.24. Same statistics, so the only
    # difference is rounding: 1e-9 V.
    for na, nd in ((1e16, 1e18), (3e17, 2e17), (1e19, 5e16)):
        ni2 = GAAS.nc(300) * GAAS.nv(300) * math.exp(-GAAS.band_gap(300) / KT)
        r = one(core_doping_cm3=na, shell_doping_cm3=nd, core_radius_nm=2e4, shell_thickness_nm=2e4)
        assert r["vbi0_V"] == pytest.approx(KT * math.log(na * nd / ni2), abs=1e-9)


def test_fermi_dirac_raises_vbi0_when_degenerate():
    # Degenerate n-side (N_D > N_c): the Fermi level enters the band, so FD gives a larger V_bi0
    # than Boltzmann; each side adds kT (F^-1(N/N_dos) - ln(N/N_dos)) (Sze & Ng, 3rd ed.,
    # eq. 1.16 against 1.23). Same inverse on both sides: agree to 1e-9 V.
    from radialpn import fermi_half_inverse as inv
    nd = 5e18
    gap = one("fermi-dirac", shell_doping_cm3=nd)["vbi0_V"] - one(shell_doping_cm3=nd)["vbi0_V"]
    yn, yp = nd / GAAS.nc(300), 1e18 / GAAS.nv(300)
    expected = KT * (inv(yn) - math.log(yn)) + KT * (inv(yp) - math.log(yp))
    assert gap == pytest.approx(expected, abs=1e-9)
    assert gap > 0.05


def test_planar_widths_at_micrometre_radii():
    # Planar abrupt junction: x_p = sqrt(2 eps V N_D / (q N_A (N_A + N_D))) (Sze & Ng, 3rd ed.,
    # eq. 2.12-2.13). At a = 50 um the depletion (~100 nm) is 0.2 % of the radius; the cylinder's
    # curvature correction is of order x/a, so 1 % tolerance.
    na, nd = 2e17, 5e17
    a = 5e4
    r = one(core_doping_cm3=na, shell_doping_cm3=nd, core_radius_nm=a, shell_thickness_nm=a, dit_cm2eV=0)
    eps = GAAS.permittivity_rel * EPS0
    NA, ND = na * 1e6, nd * 1e6
    xp = math.sqrt(2 * eps * r["vbi0_V"] * ND / (Q * NA * (NA + ND))) * 1e9
    assert a - r["core_neutral_radius_nm"] == pytest.approx(xp, rel=1e-2)
    assert r["regime"] == "both-neutral" and r["vbi_V"] == r["vbi0_V"]


def test_full_depletion_radius_of_single_doped_wire():
    # A 1 nm core of negligible doping leaves an n-type wire of radius R. With the surface
    # pinned (huge D_it) its depletion reaches the axis at R_crit = sqrt(4 eps phi_s / (q N))
    # (docs/physics.md section 7; cylinder formula with r0 -> 0; Calarco et al., Nano Lett. 5, 981
    # (2005), from memory). Bisect on R for the regime change; the 1 nm core shifts it by < 1 %.
    nd = 1e17
    kw = dict(core_radius_nm=1.0, core_doping_cm3=1e12, shell_doping_cm3=nd, dit_cm2eV=1e16)
    phi_s = one(**kw, shell_thickness_nm=500.0)["surface_bending_V"]
    lo, hi = 2.0, 400.0
    for _ in range(50):
        mid = 0.5 * (lo + hi)
        shell_survives = one(**kw, shell_thickness_nm=mid)["shell_neutral_nm"] > 0
        lo, hi = (lo, mid) if shell_survives else (mid, hi)
    r_crit = math.sqrt(4 * GAAS.permittivity_rel * EPS0 * phi_s / (Q * nd * 1e6)) * 1e9
    assert 1.0 + hi == pytest.approx(r_crit, rel=1e-2)


def test_core_depletion_by_surface_through_thin_shell():
    # p-core with a 1 nm, barely doped shell: the pinned surface acts on the core itself, which
    # empties at a_crit = sqrt(4 eps phi / (q N_A)) with phi = E_cnl - (E_F - E_v) (docs/physics.md section 7
    # section 4, same cylinder formula, p-type). The 1 nm shell moves it by ~1 nm: 3 % tolerance.
    na = 1e17
    kw = dict(core_doping_cm3=na, shell_doping_cm3=1e12, shell_thickness_nm=1.0, dit_cm2eV=1e16)
    dp = KT * math.log(GAAS.nv(300) / na)
    phi = GAAS.cnl_eV - dp
    lo, hi = 2.0, 400.0
    for _ in range(50):
        mid = 0.5 * (lo + hi)
        lo, hi = (lo, mid) if one(**kw, core_radius_nm=mid)["core_neutral_radius_nm"] > 0 else (mid, hi)
    a_crit = math.sqrt(4 * GAAS.permittivity_rel * EPS0 * phi / (Q * na * 1e6)) * 1e9
    assert hi == pytest.approx(a_crit, rel=3e-2)


def test_dit_limits():
    # D_it -> 0: flat bands at the surface (docs/physics.md section 7). D_it -> infinity: E_F pinned at the
    # neutral level, so the bending equals E_g - (E_c - E_F) - E_cnl. Tolerances: D_it = 1e5
    # gives a bending of order q D_it phi / C_dep ~ 1e-9 V; D_it = 1e17 leaves E_F within
    # N_D W / D_it ~ 1e-4 eV of the neutral level.
    flat = one(dit_cm2eV=1e5, shell_thickness_nm=200.0)
    assert abs(flat["surface_bending_V"]) < 1e-6 and flat["regime"] == "both-neutral"
    assert one(dit_cm2eV=0.0)["surface_bending_V"] == pytest.approx(0.0, abs=1e-15)
    pinned = one(dit_cm2eV=1e17, shell_thickness_nm=200.0)
    dn = KT * math.log(GAAS.nc(300) / 1e18)
    assert pinned["surface_bending_V"] == pytest.approx(GAAS.band_gap(300) - dn - GAAS.cnl_eV, abs=1e-3)


def _reference_row(d):
    """tests/reference_depletion.py on one design row (p-core frame by hand, Boltzmann levels)."""
    out = reference_depletion.design_row(d, get_material(d["material"]))
    return out[:2]


def test_agrees_with_independent_scipy_solver():
    # Independent implementation (tests/reference_depletion.py: brentq + quad on raw radii).
    # Both are exact up to root tolerance and quadrature error (~1e-10 V); rows within 1e-3 of
    # a regime boundary are excluded from the regime check only. V_bi within 1e-6 V.
    rng = np.random.default_rng(20261201)
    n = 60
    rows = [dict(material="GaAs", core_type="pn"[i % 2], core_radius_nm=10 ** rng.uniform(1, 2.5),
                 shell_thickness_nm=10 ** rng.uniform(0.3, 2.5), core_doping_cm3=10 ** rng.uniform(16, 19),
                 shell_doping_cm3=10 ** rng.uniform(16, 19), dit_cm2eV=10 ** rng.uniform(10, 14))
            for i in range(n)]
    out = deplete(rows, "boltzmann")
    seen = set()
    for i, d in enumerate(rows):
        regime, vbi = _reference_row(d)
        seen.add(regime)
        assert out["vbi_V"][i] == pytest.approx(vbi, abs=1e-6), d
        if min(abs(out["core_margin"][i]), abs(out["shell_margin"][i])) > 1e-3:
            assert out["regime"][i] == regime, d
    assert seen == set(radialpn.REGIMES)  # the sample exercises every regime


def _scan(param, values, **kw):
    out = deplete({**{k: v for k, v in design(**kw).items()}, param: values}, "boltzmann")
    assert (out["status"] == "ok").all()
    return out


@pytest.mark.parametrize("core_type", ["p", "n"])
@pytest.mark.parametrize("param,lo,hi,kw", [
    ("shell_thickness_nm", 2.0, 200.0, dict(core_radius_nm=60.0, dit_cm2eV=3e12)),
    ("core_radius_nm", 5.0, 200.0, dict(shell_thickness_nm=60.0, core_doping_cm3=3e17)),
    ("core_radius_nm", 5.0, 200.0, dict(shell_thickness_nm=10.0, dit_cm2eV=1e13)),
])
def test_vbi_continuous_across_regime_boundaries(core_type, param, lo, hi, kw):
    # The depletion approximation's potential is continuous in the design (docs/physics.md section 7):
    # bisect each regime change to 1e-11 relative and require V_bi on both sides to agree to
    # 1e-6 V (dV/dx ~ 1e-2 V/nm at most near a boundary).
    xs = np.geomspace(lo, hi, 400)
    out = _scan(param, xs, core_type=core_type, **kw)
    changes = np.flatnonzero(out["regime"][1:] != out["regime"][:-1])
    assert changes.size >= 1
    for i in changes:
        a, b = xs[i], xs[i + 1]
        ra = out["regime"][i]
        for _ in range(60):
            m = 0.5 * (a + b)
            if _scan(param, [m], core_type=core_type, **kw)["regime"][0] == ra:
                a = m
            else:
                b = m
        va, vb = _scan(param, [a, b], core_type=core_type, **kw)["vbi_V"]
        assert abs(va - vb) < 1e-6


def test_n_core_equals_mirrored_p_core():
    # docs/physics.md section 1: an n-core design maps onto a p-core one by swapping N_c and N_v and
    # measuring the neutral level from the other band edge. Same equations: agree to 1e-9.
    mirror = Material("GaAs-mirror", GAAS.band_gap_300_eV, GAAS.varshni_alpha_eV_K, GAAS.varshni_beta_K,
                      GAAS.permittivity_rel, GAAS.nv_300_cm3, GAAS.nc_300_cm3, GAAS.band_gap_300_eV - GAAS.cnl_eV)
    radialpn.register_material(mirror)
    rng = np.random.default_rng(7)
    n = 200
    d = dict(core_radius_nm=10 ** rng.uniform(1, 2.5, n), shell_thickness_nm=10 ** rng.uniform(0.3, 2.5, n),
             core_doping_cm3=10 ** rng.uniform(16, 19, n), shell_doping_cm3=10 ** rng.uniform(16, 19, n),
             dit_cm2eV=10 ** rng.uniform(10, 14, n), temperature_K=rng.uniform(250, 400, n))
    ncore = deplete({**d, "material": "GaAs", "core_type": "n"})
    # the mirrored neutral level is measured from the conduction band at each row's temperature
    pcore = deplete({**d, "material": "GaAs-mirror", "core_type": "p",
                     "cnl_eV": GAAS.band_gap(d["temperature_K"]) - GAAS.cnl_eV})
    np.testing.assert_array_equal(ncore["regime"], pcore["regime"])
    for k in ("vbi_V", "vbi0_V", "core_neutral_radius_nm", "shell_neutral_nm", "surface_bending_V"):
        np.testing.assert_allclose(ncore[k], pcore[k], rtol=1e-9, atol=1e-12)


def _critical(param, values, **kw):
    """Smallest value of ``param`` on the grid at which the relevant region keeps a neutral part."""
    out = _scan(param, values, **kw)
    key = "shell_neutral_nm" if param == "shell_thickness_nm" else "core_neutral_radius_nm"
    ok = out[key] > 0
    return values[np.argmax(ok)] if ok.any() else np.inf


def test_trend_lower_dit_thinner_shell():
    # Common practice (nanowire growth): better passivation (lower D_it) lets a thinner shell
    # keep its neutral region. Strict on a 1 %-step grid across two decades of D_it.
    ts = np.geomspace(2, 500, 600)
    crit = [_critical("shell_thickness_nm", ts, dit_cm2eV=d, shell_doping_cm3=3e17) for d in (1e13, 1e12, 1e11)]
    assert crit[0] > crit[1] > crit[2]


def test_trend_higher_doping_thinner_core():
    # Common practice: a more heavily doped core keeps its neutral region down to a smaller radius.
    rs = np.geomspace(5, 500, 600)
    crit = [_critical("core_radius_nm", rs, core_doping_cm3=n) for n in (1e17, 1e18, 1e19)]
    assert crit[0] > crit[1] > crit[2]


def test_accumulating_surface_is_reported_not_answered():
    # docs/physics.md section 7: InAs's neutral level lies in the conduction band, its surface
    # accumulates electrons; the depletion model must say so instead of returning a number.
    out = deplete(dict(material="InAs", core_type="p", core_radius_nm=50, shell_thickness_nm=30,
                       core_doping_cm3=1e17, shell_doping_cm3=1e17, dit_cm2eV=1e12))
    assert out["status"][0].startswith("surface accumulates") and math.isnan(out["vbi_V"][0])



@pytest.mark.parametrize("bad", [0, -2, 1.5, True, "2", 10_000])
def test_thread_count_is_checked(bad):
    # one validation layer: a thread count outside [1, 256] is an error naming the field, never
    # a silent 1 (common practice for a worker-count argument)
    d = dict(material="GaAs", core_type="p", core_radius_nm=50, shell_thickness_nm=50, core_doping_cm3=1e18,
             shell_doping_cm3=1e18, dit_cm2eV=1e12)
    with pytest.raises(radialpn.DesignError, match="threads"):
        radialpn.deplete(d, threads=bad)
    assert radialpn.deplete(d, threads=2)["status"][0] == "ok"
