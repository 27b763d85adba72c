"""Surrogate runtime and bundles: exact export of the fitted models, safe loading, the API,
domain flags, the light import, and the round trip solver -> data -> fit -> surrogate."""

import dataclasses
import json
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import radialpn
from radialpn import BundleError, load_bundle
from radialpn.training import (GaussianProcess, TreeEnsemble, bundle_checksums, conformal_quantile, export_gp,
                                export_hgb, fit_temperature, mondrian_quantiles, read_bundle, validate_model,
                                write_bundle)

ROOT = Path(__file__).resolve().parents[1]
#: the shipped bundles: every material of the table, both core types (models/specs)
SHIPPED = tuple(f"{m}-{c}core" for m in ("gaas", "inp", "si", "ge", "gan", "inas") for c in "pn")
DESIGN = dict(material="GaAs", core_type="p", core_radius_nm=60.0, shell_thickness_nm=40.0, core_doping_cm3=1e18,
              shell_doping_cm3=1e18, dit_cm2eV=1e12, cnl_eV=0.5, temperature_K=300.0)


def test_exported_trees_reproduce_sklearn_including_missing_values():
    # The numpy walk and the rebuilt compiled path must give scikit-learn's own raw scores
    # (same additive model, same splits): 1e-12 absolute.
    from sklearn.ensemble import HistGradientBoostingClassifier, HistGradientBoostingRegressor

    rng = np.random.default_rng(0)
    X = rng.normal(size=(3000, 5))
    X[rng.random(X.shape) < 0.05] = np.nan
    y = np.nansum(X[:, :2], 1) + 0.1 * rng.normal(size=3000)
    reg = HistGradientBoostingRegressor(max_iter=40, max_depth=6).fit(X, y)
    clf = HistGradientBoostingClassifier(max_iter=20).fit(X, np.digitize(y, [-1, 0, 1]))
    for est in (reg, clf):
        ens = TreeEnsemble(export_hgb(est))
        want = est._raw_predict(X)
        want = want.T if want.shape[0] != X.shape[0] else want
        np.testing.assert_allclose(ens.raw_numpy(X), want, rtol=0, atol=1e-12)
        # every walk raw() picks by batch size: one row, a few (float thresholds), a chunk and
        # many chunks (threshold ranks), with and without missing values
        full = ~np.isnan(X).any(1)
        for rows in (X[full][:1], X[full][:8], X[full][:200], X[full], X[:8], X):
            got = ens.raw(rows)
            ref = est._raw_predict(rows)
            np.testing.assert_allclose(got, ref.T if ref.shape[0] != rows.shape[0] else ref, rtol=0, atol=1e-12)
    stacked = TreeEnsemble.stack([TreeEnsemble(export_hgb(reg)), TreeEnsemble(export_hgb(clf))])
    both = stacked.raw_numpy(X)
    np.testing.assert_allclose(both[:, :1], reg._raw_predict(X).reshape(-1, 1), atol=1e-12)


def test_exported_gp_matches_sklearn():
    # Same kernel, same training points: mean and std equal scikit-learn's GaussianProcessRegressor
    # (Rasmussen & Williams 2006, alg. 2.1) to float64 rounding (1e-8 relative). The kernel is
    # fixed and well conditioned (cond ~ 1e4), so the comparison tests formulas, not rounding.
    from sklearn.gaussian_process import GaussianProcessRegressor
    from sklearn.gaussian_process.kernels import ConstantKernel, Matern, WhiteKernel

    rng = np.random.default_rng(1)
    X = rng.random((200, 3))
    y = np.sin(3 * X[:, 0]) + X[:, 1] ** 2
    k = ConstantKernel(1.0) * Matern([0.3, 0.4, 0.5], nu=2.5) + WhiteKernel(1e-3)
    gpr = GaussianProcessRegressor(k, normalize_y=True, optimizer=None).fit(X, y)
    gp = GaussianProcess(export_gp(gpr, X, y, X))
    Z = rng.random((50, 3))
    m, s = gp.predict(Z)
    m_ref, s_ref = gpr.predict(Z, return_std=True)
    np.testing.assert_allclose(m, m_ref, rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(s, s_ref, rtol=1e-6, atol=1e-9)


def test_conformal_quantile_and_temperature():
    # Split conformal: with scores 1..99 and level 0.95 the ceil(100 * 0.95) = 95th smallest
    # (Lei et al. 2018). Temperature scaling: a model 3x overconfident recovers T ~ 3.
    assert conformal_quantile(np.arange(1.0, 100.0)) == 95.0
    rng = np.random.default_rng(2)
    logits = rng.normal(size=(20000, 4)) * 2
    p = np.exp(logits) / np.exp(logits).sum(1, keepdims=True)
    y = np.array([rng.choice(4, p=row) for row in p])
    assert fit_temperature(3 * logits, y) == pytest.approx(3.0, rel=0.05)  # 20k draws: ~2 % noise


def test_mondrian_quantiles_rank_and_fallback():
    # Per group the ceil((n_g + 1) 0.95)-th smallest score (Vovk, Gammerman & Shafer 2005, ch. 4):
    # group 0 holds 1..99 -> 95th; group 1 holds 19 scores, rank ceil(20 * 0.95) = 19 exists but
    # 19 < min_rows -> pooled; with min_rows=1 it gets its own 19th; group 2 (18 scores, rank 19
    # does not exist) falls back to the pooled quantile whatever min_rows says; group 3 is empty.
    s = np.concatenate([np.arange(1.0, 100.0), 100 + np.arange(1.0, 20.0), 200 + np.arange(1.0, 19.0)])
    g = np.repeat([0, 1, 2], [99, 19, 18])
    pooled, q, rows, own = mondrian_quantiles(s, g, 4, min_rows=50)
    assert pooled == conformal_quantile(s) and list(rows) == [99, 19, 18, 0]
    assert q[0] == 95.0 and list(own) == [True, False, False, False] and (q[1:] == pooled).all()
    _, q, _, own = mondrian_quantiles(s, g, 4, min_rows=1)
    assert q[1] == 119.0 and list(own) == [True, True, False, False] and q[2] == pooled


def test_mondrian_covers_each_group_where_pooled_does_not():
    # Two groups with noise of different scale (0.5 and 2): one pooled quantile over-covers the
    # quiet group and under-covers the loud one; per-group quantiles cover both at 95 %. 20,000
    # fresh draws per group: binomial sd 0.15 %, tolerance 1 % (~6 sd, plus the calibration
    # quantile's own noise at 5,000 rows, sd ~0.3 %).
    rng = np.random.default_rng(11)
    def draw(n):
        g = rng.integers(0, 2, n)
        return np.abs(rng.normal(size=n)) * np.where(g == 0, 0.5, 2.0), g
    s, g = draw(10000)
    pooled, q, _, own = mondrian_quantiles(s, g, 2)
    t, h = draw(40000)
    assert own.all()
    for k in (0, 1):
        assert np.mean(t[h == k] <= q[k]) == pytest.approx(0.95, abs=0.01)
    assert np.mean(t[h == 0] <= pooled) > 0.99 and np.mean(t[h == 1] <= pooled) < 0.93


@pytest.fixture(scope="module")
def shipped():
    found = {name: path for name, _, _, path in radialpn.available()}
    assert set(SHIPPED) <= set(found)
    return found


def test_bundle_integrity_errors(shipped, tmp_path):
    src = shipped["gaas-pcore"]
    cases = {}
    for case in ("flip", "truncate", "foreign", "nosums", "pickle"):
        d = tmp_path / case
        shutil.copytree(src, d)
        cases[case] = d
    data = bytearray((cases["flip"] / "arrays.npz").read_bytes())
    data[len(data) // 2] ^= 0xFF
    (cases["flip"] / "arrays.npz").write_bytes(bytes(data))
    with open(cases["truncate"] / "arrays.npz", "r+b") as fh:
        fh.truncate(1000)
    meta, arrays = read_bundle(src)
    (cases["nosums"] / "SHA256SUMS").unlink()
    write_bundle(cases["foreign"], meta, arrays, "card")
    foreign = json.loads((cases["foreign"] / "bundle.json").read_text())
    foreign["format"] = "something-else"
    (cases["foreign"] / "bundle.json").write_text(json.dumps(foreign))
    (cases["foreign"] / "SHA256SUMS").write_text(bundle_checksums(cases["foreign"]))
    # a pickled object inside an otherwise valid, re-checksummed bundle must not be unpickled
    arrays_p = dict(arrays, evil=np.array([{"x": 1}], dtype=object))
    with open(cases["pickle"] / "arrays.npz", "wb") as fh:
        np.savez(fh, **arrays_p)
    (cases["pickle"] / "SHA256SUMS").write_text(bundle_checksums(cases["pickle"]))
    expect = {"flip": "fails its SHA-256 check", "truncate": "fails its SHA-256 check",
              "foreign": "not a radialpn model bundle", "nosums": "SHA256SUMS missing", "pickle": "unreadable"}
    for case, fragment in expect.items():
        with pytest.raises(BundleError) as err:
            load_bundle(cases[case])
        assert fragment in str(err.value) and "\n" not in str(err.value), case


def test_predict_api_forms_and_columns(shipped):
    pd = pytest.importorskip("pandas")
    m = radialpn.load("GaAs", "p")
    rows = [DESIGN, dict(DESIGN, core_radius_nm=25.0)]
    a = m.predict(rows)
    b = m.predict({k: [r[k] for r in rows] for k in DESIGN})
    c = m.predict(pd.DataFrame(rows))
    for out in (b, c):
        np.testing.assert_array_equal(a["vbi_V"], out["vbi_V"])
    for col in radialpn.OUTPUT_COLUMNS + ("regime_prob", "vbi_low_V", "vbi_high_V", "in_domain"):
        assert col in a and len(a[col]) == 2
    assert (a["vbi_low_V"] <= a["vbi_V"]).all() and (a["vbi_V"] <= a["vbi_high_V"]).all()
    assert a["engine"][0] == "surrogate" and a["in_domain"].all()


def test_outside_domain_flagged_not_extrapolated(shipped):
    g = radialpn.get_material("GaAs")
    if "gaas-nobundle-sur" not in [x.lower() for x in radialpn.material_names()]:
        radialpn.register_material(radialpn.Material("GaAs-nobundle-sur", g.band_gap_300_eV, g.varshni_alpha_eV_K,
                                                     g.varshni_beta_K, g.permittivity_rel, g.nc_300_cm3,
                                                     g.nv_300_cm3, g.cnl_eV))
    out = radialpn.predict([dict(DESIGN, core_radius_nm=800.0), dict(DESIGN, material="GaAs-nobundle-sur"), DESIGN],
                           engine="surrogate")
    assert not out["in_domain"][0] and "core_radius_nm 800 not in [10, 300]" in out["status"][0]
    assert np.isnan(out["vbi_V"][0]) and out["regime"][0] == ""
    assert "no surrogate bundle for GaAs-nobundle-sur" in out["status"][1] and out["status"][2] == "ok"


def test_shipped_bundles_agree_with_fresh_solver_runs(shipped):
    # 800 fresh designs per bundle (a seed the bundles never saw): the acceptance
    # bounds with room for sampling noise at n = 800 (regime >= 98.5 %: the card's 99.8 % minus
    # ~3 sigma; mean error <= 3 mV; coverage >= 92 %: 95 % minus ~3.5 sigma).

    for name in SHIPPED:
        v = validate_model(load_bundle(shipped[name]), n=800, seed=4242, n_jobs=1)
        assert v["regime_accuracy"] >= 0.985, name
        assert v["vbi_mean_mV"] <= 3.0, name
        assert v["interval_coverage"] >= 0.92, name


def test_recalibration_rebuilds_the_shipped_quantiles_from_the_spec_alone(shipped, tmp_path):
    # The calibration split is fixed by the spec (its own seed), the solver is deterministic and
    # the trees are unchanged, so recalibrating a copy must give the shipped conformal block
    # exactly (same 10,000 rows, same ranks); the copy is rewritten with valid checksums.
    from radialpn.training import recalibrate_bundle

    d = tmp_path / "b"
    shutil.copytree(shipped["gaas-pcore"], d)
    got = recalibrate_bundle(d, ROOT / "models" / "specs" / "gaas-pcore.toml", n_jobs=1, log=lambda m: None)
    want = json.loads((shipped["gaas-pcore"] / "bundle.json").read_text())["conformal"]
    # The GP's quantiles come from BLAS kernel sums whose blocking (so rounding) depends on the
    # row count and thread count: 3e-12 relative measured, 1e-9 allowed. The trees' quantiles are
    # ratios of solver errors (~mV) to interval scales; the shipped ones were computed before the
    # Newton stop rule moved solver answers by up to 4e-11 V (tests/test_solver.py), which moves
    # them by ~2e-9 relative: 1e-7 allowed. Row counts, groups and pooling are exact.
    def scalars(block):
        out = {k: v for k, v in block.items() if k not in ("q_gp", "q_gbm", "groups")}
        out["groups"] = {g: {k: v for k, v in d.items() if k not in ("q_gp", "q_gbm")} for g, d in block["groups"].items()}
        return out

    assert scalars(got) == scalars(want) and set(want["groups"]) == set(radialpn.REGIMES)
    assert got["q_gp"] == pytest.approx(want["q_gp"], rel=1e-9)
    assert got["q_gbm"] == pytest.approx(want["q_gbm"], rel=1e-7)
    for g in want["groups"]:
        assert got["groups"][g]["q_gp"] == pytest.approx(want["groups"][g]["q_gp"], rel=1e-9), g
        assert got["groups"][g]["q_gbm"] == pytest.approx(want["groups"][g]["q_gbm"], rel=1e-7), g
    meta, _ = read_bundle(d)
    assert "validation" not in meta and load_bundle(d).name == "gaas-pcore"


def test_card_states_targets_and_caution(shipped):
    for name in SHIPPED:
        card = (shipped[name] / "CARD.md").read_text()
        assert "design estimates, not measurements" in card and "## Validation" in card and "## Limits" in card
        meta = json.loads((shipped[name] / "bundle.json").read_text())
        v = meta["validation"]
        assert v["rows"] >= 5000 and meta["conformal"]["calibration_rows"] >= 2000


def test_runtime_import_is_light():
    code = ("import sys, radialpn; m = radialpn.load('GaAs', 'p'); m.predict(dict(material='GaAs', core_type='p',"
            "core_radius_nm=60, shell_thickness_nm=40, core_doping_cm3=1e18, shell_doping_cm3=1e18, dit_cm2eV=1e12),"
            " second_opinion=True); print(' '.join(x for x in ('scipy', 'pandas', 'rich', 'sklearn', 'matplotlib')"
            " if x in sys.modules))")
    res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=ROOT)
    assert res.stdout.strip() == ""


def test_round_trip_solver_data_fit_surrogate(tmp_path):
    # The whole pipeline on a small domain of a user material (the one-command path of
    # docs/bundles.md, with the solver's worker processes): solver -> dataset -> fit -> bundle ->
    # predictions on fresh solver runs within the bundle's own stated error bound (its 95 %
    # intervals): with 1000 fresh rows coverage >= 92 % (95 % minus ~4 sigma), and regime
    # accuracy >= 97 %. D_it runs from 0 and the temperature crosses the 200 K at which "auto"
    # turns incomplete ionisation on.
    user = [m for m in radialpn.load_material_file(ROOT / "examples" / "AlGaAs.toml")][0]
    mine = radialpn.material_from_dict("RoundTrip-AlGaAs", {
        **{k: getattr(user, k) for k in ("band_gap_300_eV", "varshni_alpha_eV_K", "varshni_beta_K", "permittivity_rel",
                                         "nc_300_cm3", "nv_300_cm3", "cnl_eV")},
        "donor_ionisation_eV": 0.006, "acceptor_ionisation_eV": 0.03})
    radialpn.register_material(mine)
    spec = tmp_path / "small.toml"
    spec.write_text("""
[bundle]
name = "roundtrip"
material = "RoundTrip-AlGaAs"
core_type = "p"
ionisation = "auto"
seed = 5
[variables]
core_radius_nm = { min = 20, max = 200, transform = "log" }
shell_thickness_nm = { min = 5, max = 200, transform = "log" }
core_doping_cm3 = { min = 1e17, max = 1e19, transform = "log" }
dit_cm2eV = { min = 0, max = 1e13, transform = "shifted-log", offset = 1e11 }
temperature_K = { min = 150, max = 350 }
[fixed]
shell_doping_cm3 = 1e18
cnl_eV = 0.6
interlayer_nm = 0
[sizes]
train = 6000
refine_rounds = 1
refine_fraction = 0.3
calibration = 2000
test = 100
shard_rows = 1024
""")
    from radialpn.training import train_bundle

    report = train_bundle(spec, tmp_path / "data", tmp_path / "bundle", n_jobs=2, validate_rows=1000,
                          validate_seed=99, log=lambda m: None, gp_points=(200, 400, 200))
    assert report["regime_accuracy"] >= 0.97
    assert report["interval_coverage"] >= 0.92
    m = load_bundle(tmp_path / "bundle")
    design = dict(DESIGN, material="RoundTrip-AlGaAs", core_doping_cm3=3e18, cnl_eV=0.6, dit_cm2eV=0.0)
    assert m.predict(design)["in_domain"][0] and m.predict(dict(design, temperature_K=160.0))["status"][0] == "ok"
    # the bundle holds the material it was trained for: a changed definition is refused, by field
    radialpn.register_material(dataclasses.replace(mine, permittivity_rel=13.0))
    try:
        with pytest.raises(BundleError, match="permittivity_rel = 12.05 .* now gives 13.0: retrain it"):
            load_bundle(tmp_path / "bundle")
    finally:
        radialpn.register_material(mine)


def test_surface_is_flat_without_surface_states():
    # D_it = 0: no surface charge, so by Gauss's law no field at R and no bending (docs/physics.md
    # section 8.6; the solver gives exactly 0). The bending model's residual was up to 1.4 mV there.
    rng = np.random.default_rng(1)
    n = 500
    d = dict(material="GaAs", core_type="p", core_radius_nm=10 ** rng.uniform(1, 2.4, n),
             shell_thickness_nm=10 ** rng.uniform(0.5, 2.4, n), core_doping_cm3=10 ** rng.uniform(16, 19, n),
             shell_doping_cm3=10 ** rng.uniform(16, 19, n), dit_cm2eV=0.0)
    batch = radialpn.predict(d, engine="surrogate")
    one = radialpn.predict({k: (v[0] if np.ndim(v) else v) for k, v in d.items()}, engine="surrogate")
    assert (batch["status"] == "ok").all() and (batch["surface_bending_V"] == 0.0).all()
    assert one["surface_bending_V"][0] == 0.0
