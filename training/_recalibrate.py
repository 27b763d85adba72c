"""Recompute a bundle's conformal quantiles without refitting it: rebuild the calibration split
from its spec (uniform designs of their own seed, ``split_designs``), solve it, score the
bundle's own (unchanged) models on it and write the per-regime quantiles through the bundle
writer (new checksums, card re-rendered). The old validation report is dropped: it described
the old intervals; validate again afterwards."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from .._bundle import BundleError, read_bundle, write_bundle
from .._model import SMOOTH_DEX, SMOOTH_POINTS, SurrogateModel

from ._card import render_card
from ._dataset import split_designs
from ._fit import LEVEL, MIN_GROUP_ROWS, conformal_block
from ._solver import RECALIBRATES_FROM, SOLVER_VERSION, solve
from ._spec import load_spec


def recalibrate_bundle(path, spec_path, n_jobs: int = -1, solved: dict | None = None,
                       min_rows: int = MIN_GROUP_ROWS, log=print) -> dict:
    """Per-regime (Mondrian) conformal quantiles for the bundle in ``path`` from the calibration
    split of ``spec_path`` (the spec it was trained from: its SHA-256 must match). ``solved``:
    the solver's answers for that split, if already at hand. Returns the new ``conformal`` block."""
    path, spec = Path(path), load_spec(spec_path)
    meta, arrays = read_bundle(path)
    if meta.get("spec_sha256") != spec.digest():
        raise BundleError(f"bundle {path.name}: built from another spec than {spec_path}; recalibrate with its own")
    if meta.get("solver_version") not in (SOLVER_VERSION, *RECALIBRATES_FROM):
        raise BundleError(f"bundle {path.name}: fitted on solver {meta.get('solver_version')}, this is "
                          f"{SOLVER_VERSION}; retrain it (`radialpn train`)")
    old = dict(meta.get("conformal", {}))
    meta = json.loads(json.dumps(meta))
    meta.setdefault("conformal", {}).update(smooth_points=SMOOTH_POINTS, smooth_dex=SMOOTH_DEX)
    model = SurrogateModel(meta, arrays, path)  # scored with the runtime's default smoothing
    designs = split_designs(spec, "calibration")
    truth = solved if solved is not None else solve(designs, spec.statistics, n_jobs=n_jobs, ionisation=spec.ionisation)
    if len(truth["status"]) != len(designs["core_radius_nm"]):
        raise BundleError(f"bundle {path.name}: {len(truth['status'])} solved calibration rows for "
                          f"{len(designs['core_radius_nm'])} designs of the spec's calibration split")
    ok = np.flatnonzero(np.asarray(truth["status"]) == "ok")
    sc = model.conformal_scores({k: (v[ok] if np.ndim(v) else v) for k, v in designs.items()},
                                np.asarray(truth["vbi_V"], dtype=float)[ok])
    conformal = conformal_block(sc["tree"], sc["gp"], sc["group"], float(old.get("level", LEVEL)), min_rows,
                                (SMOOTH_POINTS, SMOOTH_DEX))
    log(f"{path.name}: pooled q_gbm {old.get('q_gbm', float('nan')):.4f} -> {conformal['q_gbm']:.4f}, "
        f"q_gp {old.get('q_gp', float('nan')):.4f} -> {conformal['q_gp']:.4f}; per regime: "
        + ", ".join(f"{r} {g['q_gbm']:.3f}/{g['q_gp']:.3f} ({g['rows']} rows{', pooled' if g['pooled'] else ''})"
                    for r, g in conformal["groups"].items()))
    meta = {k: v for k, v in meta.items() if k not in ("validation", "format", "format_version")}
    meta["conformal"] = conformal
    write_bundle(path, meta, arrays, render_card(meta))
    return conformal
