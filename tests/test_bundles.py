"""Bundles are checked as data: damaged values with re-computed checksums, oversized or
decompression-bomb files and special files are refused with a BundleError before anything
answers (the checksums guard against accidents; these checks against values that make no sense);
and a shipped card's figures are reproduced by `validate`'s defaults."""

import json
import os
import shutil
import zipfile

import numpy as np
import pytest

import radialpn
from radialpn.training import bundle_checksums, read_bundle, write_bundle


@pytest.fixture(scope="module")
def source():
    return {name: path for name, _, _, path in radialpn.available()}["gaas-pcore"]


def _copy(src, tmp_path, name):
    d = tmp_path / name
    shutil.copytree(src, d)
    return d


def _rewrite(d, meta=None, arrays=None):
    m, a = read_bundle(d)
    write_bundle(d, meta(m) if meta else m, arrays(a) if arrays else a, "card")


def _bad_meta(change):
    def f(m):
        m = json.loads(json.dumps(m))
        change(m)
        for k in ("format", "format_version"):
            m.pop(k)
        return m
    return f


CASES = {
    "negative interval quantile": (_bad_meta(lambda m: m["conformal"].update(q_gbm=-1.9)), None, "q_gbm"),
    "zero temperature": (_bad_meta(lambda m: m.update(temperature=0)), None, "temperature"),
    "widened domain": (_bad_meta(lambda m: m["domain"].update(core_radius_nm=[10, 3000])), None,
                       "wider than the data"),
    "domain outside the design table": (_bad_meta(lambda m: m["domain"].update(dit_cm2eV=[-1, 1e14])), None,
                                        "not inside"),
    "unknown material": (_bad_meta(lambda m: m.update(material="Kryptonite")), None, "unknown material"),
    "NaN leaf values": (None, lambda a: {**a, "vbi/value": np.full_like(a["vbi/value"], np.nan)}, "NaN"),
    "split on a missing feature": (None, lambda a: {**a, "vbi/feature": a["vbi/feature"] + 100}, "feature"),
    "negative per-regime quantile": (_bad_meta(lambda m: m["conformal"]["groups"]["both-neutral"].update(q_gbm=-1.0)),
                                     None, "conformal.groups.both-neutral.q_gbm"),
    "infinite per-regime GP quantile": (_bad_meta(lambda m: m["conformal"]["groups"]["all-depleted"].update(
        q_gp=float("inf"))), None, "conformal.groups.all-depleted.q_gp"),
    "a regime without its quantiles": (_bad_meta(lambda m: m["conformal"]["groups"].pop("core-depleted")), None,
                                       "one entry per regime"),
    "group size not a count": (_bad_meta(lambda m: m["conformal"]["groups"]["shell-depleted"].update(rows="many")),
                               None, "conformal.groups.shell-depleted.rows"),
    "smoothing out of range": (_bad_meta(lambda m: m["conformal"].update(smooth_points=0)), None,
                               "conformal.smooth_points"),
    "unknown grouping": (_bad_meta(lambda m: m["conformal"].update(groups_by="material")), None, "groups_by"),
    "shifted-log without its offset": (_bad_meta(lambda m: m["offsets"].pop("dit_cm2eV")), None, "offsets.dit_cm2eV"),
    "unknown transform": (_bad_meta(lambda m: m["transforms"].update(core_radius_nm="cubic")), None,
                          "transform of 'core_radius_nm'"),
    "other material parameters": (_bad_meta(lambda m: m["material_parameters"].update(band_gap_300_eV=1.5)), None,
                                  "band_gap_300_eV = 1.5 (its training set); the material table now gives 1.424"),
    "unknown ionisation model": (_bad_meta(lambda m: m.update(ionisation="partial")), None, "ionisation must be"),
    # a walk takes `depth` steps: 1e9 would hang every answer
    "tree deeper than its nodes": (None, lambda a: {**a, "vbi/depth": np.array(10 ** 9)}, "depth"),
    "depth not a number": (None, lambda a: {**a, "vbi/depth": np.array([3, 4])}, "inconsistent"),
}


@pytest.mark.parametrize("case", sorted(CASES))
def test_damaged_values_with_good_checksums_are_refused(source, tmp_path, case):
    meta, arrays, fragment = CASES[case]
    d = _copy(source, tmp_path, "b")
    _rewrite(d, meta, arrays)
    with pytest.raises(radialpn.BundleError) as err:
        radialpn.load_bundle(d)
    assert fragment in str(err.value) and "\n" not in str(err.value)


def test_decompression_bomb_is_refused_before_inflating(source, tmp_path):
    # 400 MB of zeros compress to ~0.4 MB: the inflated size in the zip directory is read and
    # refused (limit 256 MB) without decompressing anything.
    d = _copy(source, tmp_path, "bomb")
    with zipfile.ZipFile(d / "arrays.npz", "w", zipfile.ZIP_DEFLATED) as z:
        with z.open("big.npy", "w", force_zip64=True) as fh:
            block = np.zeros(1 << 20, dtype=np.uint8).tobytes()
            for _ in range(400):
                fh.write(block)
    (d / "SHA256SUMS").write_text(bundle_checksums(d))
    with pytest.raises(radialpn.BundleError, match="inflates to more than"):
        radialpn.load_bundle(d)


def test_special_files_are_not_read(source, tmp_path):
    # A checksum file linked to an endless device must be refused, not read until memory runs out.
    d = _copy(source, tmp_path, "dev")
    (d / "SHA256SUMS").unlink()
    os.symlink("/dev/zero", d / "SHA256SUMS")
    with pytest.raises(radialpn.BundleError, match="not a regular file"):
        radialpn.load_bundle(d)


def test_load_refuses_unknown_core_type_and_material():
    with pytest.raises(radialpn.DesignError, match="core_type"):
        radialpn.load("GaAs", "pizza")
    with pytest.raises(radialpn.MaterialError):
        radialpn.load("Kryptonite", "p")


def test_bundle_without_a_later_material_field_loads(source, tmp_path):
    # a Material field added in a later release is absent from older bundles: it matches at its
    # default (NaN for a Mott density), so they keep loading; a required field may not be absent
    d = _copy(source, tmp_path, "older")
    _rewrite(d, _bad_meta(lambda m: m["material_parameters"].pop("acceptor_mott_cm3")))
    assert radialpn.load_bundle(d).name == "gaas-pcore"
    _rewrite(d, _bad_meta(lambda m: m["material_parameters"].pop("band_gap_300_eV")))
    with pytest.raises(radialpn.BundleError, match="band_gap_300_eV = missing"):
        radialpn.load_bundle(d)


def test_bundle_without_per_regime_quantiles_loads_with_the_pooled_one(source, tmp_path):
    # A bundle written before per-regime calibration (no conformal.groups) stays loadable: every
    # regime then uses the pooled quantile it was calibrated with, so its intervals are exactly
    # q_gbm * scale (checked against the per-regime bundle's own scale, 1e-12 V: same arithmetic).
    d = _copy(source, tmp_path, "old")
    _rewrite(d, _bad_meta(lambda m: m["conformal"].pop("groups")))
    old, new = radialpn.load_bundle(d), radialpn.load_bundle(source)
    design = dict(material="GaAs", core_type="p", core_radius_nm=60.0, shell_thickness_nm=40.0,
                  core_doping_cm3=1e18, shell_doping_cm3=1e18, dit_cm2eV=1e12)
    a, b = old.predict(design), new.predict(design)
    code = list(radialpn.REGIMES).index(b["regime"][0])
    half_old, half_new = (a["vbi_high_V"] - a["vbi_low_V"]) / 2, (b["vbi_high_V"] - b["vbi_low_V"]) / 2
    q = json.loads((source / "bundle.json").read_text())["conformal"]
    assert a["vbi_V"][0] == b["vbi_V"][0]
    assert half_old[0] * q["groups"][b["regime"][0]]["q_gbm"] == pytest.approx(half_new[0] * q["q_gbm"], abs=1e-12)
    assert q["groups"][list(radialpn.REGIMES)[code]]["q_gbm"] != q["q_gbm"]  # so the check above can fail


def test_validate_by_default_reproduces_the_shipped_card():
    # `validate` with the card's row count and no seed draws the card's own fresh designs (the
    # seed recorded in its report), so a user can reproduce the shipped figures. gaas-pcore's
    # designs answer identically under solvers 1.2 and 1.3 (3,000 fresh designs compared), so the
    # figures agree to rounding: 1e-9 on ratios and mV means.
    from radialpn.training import validate_bundle

    path = {name: p for name, _, _, p in radialpn.available()}["gaas-pcore"]
    card = json.loads((path / "bundle.json").read_text())["validation"]
    got = validate_bundle(path, rows=card["rows"], n_jobs=2)
    assert got["seed"] == card["seed"]
    for key in ("regime_accuracy", "interval_coverage", "vbi_mean_mV", "vbi_p99_mV", "flagged_rate"):
        assert got[key] == pytest.approx(card[key], rel=1e-9, abs=1e-9), key


def test_deeply_nested_json_is_refused(source, tmp_path):
    # 100,000 nested lists exceed the JSON parser's recursion limit: a BundleError, never a
    # RecursionError from `load` or from listing the bundles
    import hashlib

    d = _copy(source, tmp_path, "deep")
    (d / "bundle.json").write_text("[" * 100_000 + "]" * 100_000)
    sums = (d / "SHA256SUMS").read_text().splitlines()
    digest = hashlib.sha256((d / "bundle.json").read_bytes()).hexdigest()
    (d / "SHA256SUMS").write_text("\n".join(f"{digest}  bundle.json" if ln.endswith("bundle.json") else ln
                                            for ln in sums) + "\n")
    with pytest.raises(radialpn.BundleError, match="nested too deeply"):
        radialpn.load_bundle(d)
