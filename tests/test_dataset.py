"""Training sets: specs, sampling, determinism, resumption after kill -9, Dask scale-out."""

import glob
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from radialpn.training import DatasetError, SpecError, build_dataset, load_dataset, read_rows, spec_from_dict
from radialpn.training import boundary_distance

BASE = {
    "bundle": {"name": "t", "material": "GaAs", "core_type": "p", "seed": 11},
    "variables": {
        "core_radius_nm": {"min": 10, "max": 300, "transform": "log"},
        "shell_thickness_nm": {"min": 2, "max": 300, "transform": "log"},
        "core_doping_cm3": {"min": 1e16, "max": 1e19, "transform": "log"},
        "shell_doping_cm3": {"min": 1e16, "max": 1e19, "transform": "log"},
        "dit_cm2eV": {"min": 1e10, "max": 1e14, "transform": "log"},
    },
    "sizes": {"train": 1200, "refine_rounds": 2, "refine_fraction": 0.5, "calibration": 200, "test": 300,
              "shard_rows": 128},
}


def spec(**sizes):
    data = {**BASE, "sizes": {**BASE["sizes"], **sizes}}
    return spec_from_dict(data)


def shard_bytes(root):
    return {os.path.relpath(p, root): Path(p).read_bytes() for p in sorted(glob.glob(f"{root}/*/*.csv"))}


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    root = tmp_path_factory.mktemp("ds")
    build_dataset(spec(), root, n_jobs=1)
    return root


@pytest.mark.parametrize("patch,fragment", [
    ({"variables": {"core_radius_nm": {"min": 300, "max": 10}}}, "variables.core_radius_nm: need 1 <= min < max"),
    ({"variables": {"core_radius_nm": {"min": 10, "max": 300, "transform": "cubic"}}}, "transform: log, linear or shifted-log"),
    ({"variables": {"dit_cm2eV": {"min": 0, "max": 1e14, "transform": "log"}}}, "shifted-log takes min = 0"),
    ({"variables": {"dit_cm2eV": {"min": 0, "max": 1e14, "transform": "shifted-log"}}}, "variables.dit_cm2eV.offset: required"),
    ({"variables": {"dit_cm2eV": {"min": 1e10, "max": 1e14, "transform": "log", "offset": 1e10}}}, "only for transform"),
    ({"bundle": {"name": "t", "material": "GaAs", "core_type": "p", "seed": 1, "ionisation": "partial"}},
     "bundle.ionisation: full or auto"),
    ({"variables": {"wire_colour": {"min": 1, "max": 2}}}, "variables: 'wire_colour' is not a numeric design-table column"),
    ({"bundle": {"name": "t", "material": "GaAs", "core_type": "x", "seed": 1}}, "bundle.core_type: must be p or n"),
    ({"sizes": {"train": 5}}, "sizes.train: allowed range [100, 1e+08]"),
    ({"bundle": {"name": "../../x", "material": "GaAs", "core_type": "p", "seed": 1}}, "bundle.name: 1-64 letters"),
    ({"bundle": {"name": "t", "material": "GaAs", "core_type": "p", "seed": -1}}, "bundle.seed: a whole number"),
    ({"variables": {"core_radius_nm": {"min": "ten", "max": 300}}}, "variables.core_radius_nm.min: a finite number"),
    ({"variables": {"core_radius_nm": {"min": {"a": 1}, "max": 300}}}, "variables.core_radius_nm.min: a finite"),
    ({"fixed": {"interlayer_nm": "abc"}}, "fixed.interlayer_nm: a finite number"),
    ({"fixed": 5}, "fixed: expected a table"),
])
def test_spec_errors_name_the_key(patch, fragment):
    data = {k: (dict(v) if isinstance(v, dict) else v) for k, v in BASE.items()}
    for k, v in patch.items():
        data[k] = {**data[k], **v} if k in data and k != "bundle" and isinstance(v, dict) else v
    with pytest.raises(SpecError) as err:
        spec_from_dict(data)
    assert fragment in str(err.value) and "\n" not in str(err.value)


def test_shifted_log_reaches_zero_and_round_trips():
    # D_it from 0: x + offset s is log-uniform, so u = 0 gives exactly min = 0 and u = 1 gives
    # max; to_unit inverts from_unit (1e-12: a float64 log/exp round trip); and x = 2 s sits at
    # u = log10(3) / log10((max + s) / s) by the transform's definition (1e-12 relative)
    for offset in (1e10, 3e10, 7e9):  # 10**log10(s) - s rounds to 0 for the first only
        data = {**BASE, "variables": {**BASE["variables"],
                                      "dit_cm2eV": {"min": 0, "max": 1e14, "transform": "shifted-log", "offset": offset}}}
        var = [v for v in spec_from_dict(data).variables if v.name == "dit_cm2eV"][0]
        u = np.linspace(0, 1, 1001)
        x = var.from_unit(u)
        assert x[0] == 0.0 and x[-1] == pytest.approx(1e14, rel=1e-12) and (np.diff(x) > 0).all()
        np.testing.assert_allclose(var.to_unit(x), u, rtol=0, atol=1e-12)
        assert var.to_unit(2 * offset) == pytest.approx(np.log10(3) / np.log10((1e14 + offset) / offset), rel=1e-12)
    # a spec without the new keys keeps its digest (bundles built before them still recalibrate)
    assert "ionisation" not in spec().to_dict() and all("offset" not in v for v in spec().to_dict()["variables"])
    # pinned: the 0.2 GaAs p-core spec (git show 95711bd:models/specs/gaas-pcore.toml) digests as
    # its 0.2 bundle recorded, so the keys added since leave old specs' digests alone
    old = {"bundle": {"name": "gaas-pcore", "material": "GaAs", "core_type": "p", "statistics": "fermi-dirac",
                      "seed": 20261201},
           "variables": {**BASE["variables"], "cnl_eV": {"min": 0.30, "max": 0.70, "transform": "linear"},
                         "temperature_K": {"min": 250, "max": 400, "transform": "linear"}},
           "fixed": {"interlayer_nm": 0},
           "sizes": {"train": 200000, "refine_rounds": 2, "refine_fraction": 0.4, "calibration": 10000, "test": 6000,
                     "shard_rows": 2048}}
    assert spec_from_dict(old).digest().startswith("055e91cb")


def test_changed_material_is_not_resumed(tmp_path):
    # a dataset records its material's parameters: after the definition changes, the same spec
    # must not resume the shards solved with the old one
    import dataclasses

    import radialpn

    g = radialpn.get_material("GaAs")
    mine = radialpn.Material("GaAs-resume-test", g.band_gap_300_eV, g.varshni_alpha_eV_K, g.varshni_beta_K,
                             g.permittivity_rel, g.nc_300_cm3, g.nv_300_cm3, g.cnl_eV)
    radialpn.register_material(mine)
    s = spec_from_dict({**BASE, "bundle": {**BASE["bundle"], "material": "GaAs-resume-test"},
                        "sizes": {"train": 100, "refine_rounds": 0, "calibration": 0, "test": 0, "shard_rows": 64}})
    build_dataset(s, tmp_path, n_jobs=1)
    try:
        radialpn.register_material(dataclasses.replace(mine, permittivity_rel=13.5))
        with pytest.raises(DatasetError, match="another"):
            build_dataset(spec_from_dict({**BASE, "bundle": {**BASE["bundle"], "material": "GaAs-resume-test"},
                                          "sizes": {"train": 100, "refine_rounds": 0, "calibration": 0, "test": 0,
                                                    "shard_rows": 64}}), tmp_path, n_jobs=1)
    finally:
        radialpn.register_material(mine)


def test_rows_complete_with_version_and_status(built):
    df = load_dataset(built)
    assert len(df) == 1200 + 200 + 300 and df["row_id"].is_unique
    assert (df["solver_version"].astype(str) != "").all() and (df["status"] == "ok").all()
    assert set(df.groupby("split").size().to_dict().items()) == {("train", 1200), ("calibration", 200), ("test", 300)}


def test_same_seed_same_rows(built, tmp_path):
    build_dataset(spec(), tmp_path, n_jobs=2)  # another worker count too
    assert shard_bytes(built) == shard_bytes(tmp_path)


def test_held_out_sets_are_uniform_and_disjoint(built):
    # Uniform draws of their own seeds: no row shared with training, and each unit coordinate's
    # mean within 4 standard errors (sqrt(1/12/n)) of 1/2.
    s = spec()
    rows = {sp: read_rows(built, (sp,)) for sp in ("train", "test")}
    u_test = s.to_unit(rows["test"])
    assert np.all(np.abs(u_test.mean(0) - 0.5) < 4 * np.sqrt(1 / 12 / len(u_test)))
    train = {tuple(np.round(x, 9)) for x in s.to_unit(rows["train"])}
    assert not train & {tuple(np.round(x, 9)) for x in u_test}


def test_refinement_concentrates_near_boundaries(built):
    # Refined points lie closer to a point of another regime than the Sobol base does: their
    # median distance in the unit cube must be under 0.6 of the base's (measured below ~0.45).
    s = spec()
    rows = read_rows(built, ("train",))
    d = boundary_distance(s.to_unit(rows), np.asarray(rows["regime"]))
    rnd = np.asarray(rows["round"])
    assert np.median(d[rnd > 0]) < 0.6 * np.median(d[rnd == 0])


def test_other_spec_in_same_directory_refused(built):
    with pytest.raises(DatasetError, match="another spec"):
        build_dataset(spec(test=301), built)


def test_resume_after_kill_minus_nine(built, tmp_path):
    # Kill a real `radialpn dataset` run with SIGKILL once some shards exist, run it again, and
    # require exactly the rows of an uninterrupted run (byte-identical shards, no leftovers).
    spec_file = tmp_path / "spec.toml"
    spec_file.write_text("""
[bundle]
name = "t"
material = "GaAs"
core_type = "p"
seed = 11
[variables]
core_radius_nm = { min = 10, max = 300, transform = "log" }
shell_thickness_nm = { min = 2, max = 300, transform = "log" }
core_doping_cm3 = { min = 1e16, max = 1e19, transform = "log" }
shell_doping_cm3 = { min = 1e16, max = 1e19, transform = "log" }
dit_cm2eV = { min = 1e10, max = 1e14, transform = "log" }
[sizes]
train = 1200
refine_rounds = 2
refine_fraction = 0.5
calibration = 200
test = 300
shard_rows = 128
""")
    out = tmp_path / "run"
    cmd = [sys.executable, "-m", "cli", "dataset", str(spec_file), "-o", str(out), "--jobs", "1"]
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, cwd=Path(__file__).parents[1])
    deadline = time.time() + 60
    while time.time() < deadline and len(glob.glob(f"{out}/*/*.csv")) < 3:
        time.sleep(0.01)
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    partial = len(glob.glob(f"{out}/*/*.csv"))
    assert 3 <= partial < len(shard_bytes(built))  # really interrupted half-way
    res = subprocess.run(cmd, capture_output=True, text=True, cwd=Path(__file__).parents[1])
    assert res.returncode == 0, res.stderr
    assert shard_bytes(out) == shard_bytes(built)
    assert not glob.glob(f"{out}/*/.*.tmp")


def test_dask_cluster_gives_the_same_rows(built, tmp_path):
    distributed = pytest.importorskip("distributed")
    import joblib

    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) as cl, \
            distributed.Client(cl):
        with joblib.parallel_config(backend="dask"):
            build_dataset(spec(), tmp_path, n_jobs=-1)
    assert shard_bytes(tmp_path) == shard_bytes(built)


def test_manifest_is_deterministic_and_a_second_run_is_refused(built, tmp_path):
    # Same spec, same solver: the manifest's bytes match too (no timestamp), so a resumed or
    # repeated build is byte-identical in every file it writes.
    other = tmp_path / "again"
    build_dataset(spec(), other, n_jobs=1)
    assert (other / "manifest.json").read_bytes() == (Path(built) / "manifest.json").read_bytes()
    assert shard_bytes(other) == shard_bytes(built)
    import fcntl

    with open(other / ".lock", "a") as fh:  # as another run holding the folder would
        fcntl.flock(fh, fcntl.LOCK_EX | fcntl.LOCK_NB)
        with pytest.raises(DatasetError, match="another radialpn run is writing"):
            build_dataset(spec(), other, n_jobs=1)
