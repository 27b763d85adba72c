"""One command from a spec to a validated bundle: dataset (resumable), fit, validate, card."""

from __future__ import annotations

from pathlib import Path

from .._bundle import read_bundle, write_bundle
from .._model import SurrogateModel, load_bundle

from ._card import render_card
from ._dataset import build_dataset
from ._fit import fit_bundle
from ._solver import SOLVER_VERSION
from ._spec import load_spec
from ._validate import validate


def library_versions() -> dict:
    """Versions of the libraries that fit a bundle (recorded in bundle.json as ``fitted_with``)."""
    from importlib.metadata import PackageNotFoundError, version

    out = {}
    for name in ("radialpn", "numpy", "scipy", "scikit-learn", "pandas"):
        try:
            out[name] = version(name)
        except PackageNotFoundError:
            out[name] = "not installed"
    return out


def train_bundle(spec_path, data_dir, out_dir, n_jobs=-1, validate_rows=6000, validate_seed=777,
                 log=print, progress=None, **fit_options) -> dict:
    """Spec -> dataset (resumable) -> fitted bundle -> validation on fresh solver runs -> card."""
    spec = load_spec(spec_path)
    build_dataset(spec, data_dir, n_jobs=n_jobs, progress=progress)
    meta, arrays = fit_bundle(spec, data_dir, log=log, **fit_options)
    meta.update(
        name=spec.name, material=spec.material, core_type=spec.core_type, statistics=spec.statistics,
        domain={v.name: [v.lo, v.hi] for v in spec.variables},
        transforms={v.name: v.transform for v in spec.variables}, fixed=dict(spec.fixed),
        solver_version=SOLVER_VERSION, spec_sha256=spec.digest(), fitted_with=library_versions(),
    )
    write_bundle(out_dir, meta, arrays, render_card(meta))
    report = validate(load_bundle(out_dir), validate_rows, validate_seed, n_jobs=n_jobs)
    meta["validation"] = report
    write_bundle(out_dir, meta, arrays, render_card(meta))
    log(f"bundle written to {out_dir}")
    return report


def validate_bundle(path, rows=6000, seed=777, n_jobs=-1, write=False) -> dict:
    """Validate an existing bundle on fresh solver runs. ``write=True`` stores the report in the
    bundle (only for a bundle you are building; the front end never does)."""
    meta, arrays = read_bundle(path)
    report = validate(SurrogateModel(meta, arrays, path), rows, seed, n_jobs=n_jobs)
    if write:
        meta["validation"] = report
        write_bundle(Path(path), meta, arrays, render_card(meta))
    return report
