"""Bundles are checked as data: damaged values with re-computed checksums, oversized or
decompression-bomb files and special files are refused with a BundleError before anything
answers (the checksums guard against accidents; these checks against values that make no sense)."""

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
