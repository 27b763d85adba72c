"""One command from a spec to a validated bundle: dataset (resumable), fit, validate, card."""

from __future__ import annotations

from pathlib import Path

from .. import get_material
from .._bundle import read_bundle, write_bundle
from .._materials import material_parameters
from .._model import SurrogateModel

from ._card import render_card
from ._dataset import build_dataset, read_rows
from ._fit import fit_bundle
from ._recalibrate import recalibrate_bundle
from ._solver import SOLVER_VERSION, solve
from ._spec import load_spec
from ._validate import TARGET_MIN_ROWS, VALIDATE_SEED, score_targeted, targeted_designs, validate


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


def train_bundle(spec_path, data_dir, out_dir, n_jobs=-1, validate_rows=6000, validate_seed=VALIDATE_SEED,
                 log=print, progress=None, **fit_options) -> dict:
    """Spec -> dataset (resumable) -> fitted bundle -> validation on fresh solver runs -> card."""
    spec = load_spec(spec_path)
    build_dataset(spec, data_dir, n_jobs=n_jobs, progress=progress)
    meta, arrays = fit_bundle(spec, data_dir, log=log, **fit_options)
    meta.update(
        name=spec.name, material=spec.material, core_type=spec.core_type, statistics=spec.statistics,
        domain={v.name: [v.lo, v.hi] for v in spec.variables},
        transforms={v.name: v.transform for v in spec.variables}, fixed=dict(spec.fixed),
        material_parameters=material_parameters(get_material(spec.material)),
        offsets={v.name: v.offset for v in spec.variables if v.transform == "shifted-log"}, ionisation=spec.ionisation,
        solver_version=SOLVER_VERSION, spec_sha256=spec.digest(), fitted_with=library_versions(),
    )
    write_bundle(out_dir, meta, arrays, render_card(meta))
    # quantiles on the runtime's (smoothed) V_bi centre, from the calibration rows already solved
    recalibrate_bundle(out_dir, spec_path, solved=read_rows(data_dir, ("calibration",), columns=["vbi_V", "status"]),
                       log=log)
    meta = {k: v for k, v in read_bundle(out_dir)[0].items() if k not in ("format", "format_version")}
    report = validate_bundle(out_dir, validate_rows, validate_seed, n_jobs=n_jobs, targeted=True)
    meta["validation"] = report
    write_bundle(out_dir, meta, arrays, render_card(meta))
    log(f"bundle written to {out_dir}")
    return report


def validate_bundle(path, rows=6000, seed=None, n_jobs=-1, write=False, targeted=False) -> dict:
    """Validate an existing bundle on fresh solver runs. ``seed``: of the fresh designs; None
    (default) takes the seed of the bundle's recorded validation, else ``VALIDATE_SEED``, so that
    the same ``rows`` reproduce the card's figures. ``write=True`` stores the report in the
    bundle (only for a bundle you are building; the front end never does). ``targeted``: regimes
    the uniform sample predicts in fewer than ``TARGET_MIN_ROWS`` rows get a targeted check
    (``targeted_designs``, seed ``seed + 1``) under ``report["targeted"]``."""
    meta, arrays = read_bundle(path)
    model = SurrogateModel(meta, arrays, path)
    if seed is None:
        recorded = meta.get("validation", {}).get("seed") if isinstance(meta.get("validation"), dict) else None
        seed = recorded if isinstance(recorded, int) and not isinstance(recorded, bool) else VALIDATE_SEED
    report = validate(model, rows, seed, n_jobs=n_jobs)
    if targeted:
        rare = rare_regimes(report)
        if rare:
            d = targeted_designs(model, rare, seed + 1)
            report["targeted"] = score_targeted(model, d, solve(d, model.statistics, n_jobs=n_jobs,
                                                                       ionisation=model.ionisation_), seed + 1, rare)
    if write:
        meta["validation"] = report
        write_bundle(Path(path), meta, arrays, render_card(meta))
    return report


def rare_regimes(report: dict) -> list:
    """Regimes a validation report's uniform sample predicts in fewer than ``TARGET_MIN_ROWS``
    rows: too few to judge per-regime coverage to +-2 %."""
    return [r for r, x in report["coverage_by_predicted_regime"].items() if x["rows"] < TARGET_MIN_ROWS]


def recalibrate(spec_path, path, n_jobs=-1, validate_rows=6000, validate_seed=VALIDATE_SEED, log=print) -> dict:
    """New conformal quantiles for a bundle without refitting (``recalibrate_bundle``: solver runs
    on the calibration split only), then validation on fresh runs with a targeted check of rare
    regimes, stored in the bundle with its card. Returns the validation report."""
    recalibrate_bundle(path, spec_path, n_jobs=n_jobs, log=log)
    return validate_bundle(path, validate_rows, validate_seed, n_jobs=n_jobs, write=True, targeted=True)
