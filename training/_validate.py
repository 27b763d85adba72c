"""Validate a bundle on fresh solver runs: designs drawn uniformly in the bundle's domain with
a seed of their own, solved by the reference solver, answered by the surrogate, compared."""

from __future__ import annotations

import time

import numpy as np

from .. import REGIMES
from .._model import SurrogateModel

from ._solver import SOLVER_VERSION, solve

BOUNDARY_BAND_LN = (float(np.log(0.5)), float(np.log(1.5)))  #: "near": max majority in [N/4, 3N/4]


def fresh_designs(model: SurrogateModel, n: int, seed: int) -> dict:
    rng = np.random.default_rng(seed)
    cols = {"material": model.material, "core_type": model.core_type}
    for col, (lo, hi) in model.domain.items():
        u = rng.random(n)
        log = model.meta["transforms"].get(col) == "log"
        cols[col] = 10 ** (np.log10(lo) + u * (np.log10(hi) - np.log10(lo))) if log else lo + u * (hi - lo)
    for col, v in model.fixed.items():
        cols[col] = np.full(n, float(v))
    return cols


def validate(model: SurrogateModel, n: int = 6000, seed: int = 777, n_jobs: int = -1) -> dict:
    """Metrics of ``model`` against ``n`` fresh solver runs (>= 5000 recommended)."""
    d = fresh_designs(model, n, seed)
    t = time.perf_counter()
    truth = solve(d, model.statistics, n_jobs=n_jobs)
    t_solver = time.perf_counter() - t
    model.predict({k: (v[:1] if np.ndim(v) else v) for k, v in d.items()}, True)  # warm
    t = time.perf_counter()
    pred = model.predict(d, second_opinion=True)
    t_sur = time.perf_counter() - t
    ok = (truth["status"] == "ok") & (pred["status"] == "ok")
    y, p = truth["regime"][ok], pred["regime"][ok]
    lo, hi = BOUNDARY_BAND_LN
    near = (((truth["core_majority_ln"] > lo) & (truth["core_majority_ln"] < hi))
            | ((truth["shell_majority_ln"] > lo) & (truth["shell_majority_ln"] < hi)))[ok]
    err = np.abs(pred["vbi_V"] - truth["vbi_V"])[ok]
    gp_err = np.abs(pred["vbi_gp_V"] - truth["vbi_V"])[ok]
    tv = truth["vbi_V"][ok]
    cover = (tv >= pred["vbi_low_V"][ok]) & (tv <= pred["vbi_high_V"][ok])
    gp_cover = (tv >= pred["vbi_gp_low_V"][ok]) & (tv <= pred["vbi_gp_high_V"][ok])
    flag = pred["confirm_with_solver"][ok]
    conf = [[int(((y == a) & (p == b)).sum()) for b in REGIMES] for a in REGIMES]
    by_regime = {r: {"rows": int((y == r).sum()),
                     "gbm_mean_mV": float(1e3 * err[y == r].mean()) if (y == r).any() else None,
                     "gp_mean_mV": float(1e3 * gp_err[y == r].mean()) if (y == r).any() else None}
                 for r in REGIMES}
    return {
        "rows": int(n), "answered": int(ok.sum()), "seed": seed, "solver_version": SOLVER_VERSION,
        "regime_accuracy": float((y == p).mean()),
        "regime_accuracy_near_boundary": float((y[near] == p[near]).mean()) if near.any() else None,
        "near_boundary_rows": int(near.sum()), "confusion": {"labels": list(REGIMES), "rows_true_cols_pred": conf},
        "vbi_mean_mV": float(1e3 * err.mean()), "vbi_p99_mV": float(1e3 * np.percentile(err, 99)),
        "vbi_max_mV": float(1e3 * err.max()),
        "interval_level": float(model.meta["conformal"]["level"]), "interval_coverage": float(cover.mean()),
        "interval_mean_width_mV": float(1e3 * (pred["vbi_high_V"] - pred["vbi_low_V"])[ok].mean()),
        "gp_vbi_mean_mV": float(1e3 * gp_err.mean()), "gp_vbi_p99_mV": float(1e3 * np.percentile(gp_err, 99)),
        "gp_interval_coverage": float(gp_cover.mean()), "by_regime": by_regime,
        "flagged_rate": float(flag.mean()),
        "flagged_gbm_mean_mV": float(1e3 * err[flag].mean()) if flag.any() else None,
        "unflagged_gbm_mean_mV": float(1e3 * err[~flag].mean()) if (~flag).any() else None,
        "flagged_regime_accuracy": float((y[flag] == p[flag]).mean()) if flag.any() else None,
        "unflagged_regime_accuracy": float((y[~flag] == p[~flag]).mean()) if (~flag).any() else None,
        "solver_rows_per_s": float(n / t_solver), "surrogate_rows_per_s_with_gp": float(n / t_sur),
    }
