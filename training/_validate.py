"""Validate a bundle on fresh solver runs: designs drawn uniformly in the bundle's domain with
a seed of their own, solved by the reference solver, answered by the surrogate, compared."""

from __future__ import annotations

import time

import numpy as np

from .. import REGIMES
from .._model import INTERVAL_TIE_V, SurrogateModel

from ._solver import SOLVER_VERSION, solve
from ._spec import Variable

TIE_V = INTERVAL_TIE_V  #: a solver answer this close to an interval end counts as inside [V]
BOUNDARY_BAND_LN = (float(np.log(0.5)), float(np.log(1.5)))  #: "near": max majority in [N/4, 3N/4]


VALIDATE_SEED = 20261202  #: fresh designs of the shipped bundles' validation (not the calibration or test seeds)


def fresh_designs(model: SurrogateModel, n: int, seed: int) -> dict:
    """``n`` designs drawn uniformly over a bundle's domain as its spec sampled it (log10(x),
    log10(x + offset) or x uniform for "log", "shifted-log" and "linear" columns), its fixed
    columns held, from a generator of its own ``seed``."""
    rng = np.random.default_rng(seed)
    cols = {"material": model.material, "core_type": model.core_type}
    offsets = model.meta.get("offsets", {})
    for col, (lo, hi) in model.domain.items():
        tr = model.meta["transforms"].get(col, "linear")
        var = Variable(col, lo, hi, tr, float(offsets.get(col, 0.0)) if tr == "shifted-log" else 0.0)
        cols[col] = var.from_unit(rng.random(n))  # the spec's own map from the unit interval
    for col, v in model.fixed.items():
        cols[col] = np.full(n, float(v))
    return cols


def wilson_interval(k: int, n: int, z: float = 1.959964) -> tuple:
    """95 % score interval of a binomial proportion k / n (Wilson, J. Am. Stat. Assoc. 22, 209
    (1927), doi:10.1080/01621459.1927.10502953): the range of true coverages a sample of n rows
    cannot tell apart from the observed one."""
    if n <= 0:
        return (None, None)
    p = k / n
    c = (p + z * z / (2 * n)) / (1 + z * z / n)
    h = z / (1 + z * z / n) * np.sqrt(p * (1 - p) / n + z * z / (4 * n * n))
    return (float(c - h), float(c + h))


def coverage_table(truth_vbi, low, high, gp_low, gp_high, labels, names) -> dict:
    """Interval coverage, its Wilson 95 % interval and the mean width [mV] per label."""
    cover = (truth_vbi >= low - TIE_V) & (truth_vbi <= high + TIE_V)
    gp_cover = (truth_vbi >= gp_low - TIE_V) & (truth_vbi <= gp_high + TIE_V)
    out = {}
    for r in names:
        m = labels == r
        n = int(m.sum())
        out[r] = {"rows": n, "coverage": float(cover[m].mean()) if n else None,
                  "coverage_ci95": list(wilson_interval(int(cover[m].sum()), n)),
                  "mean_width_mV": float(1e3 * (high - low)[m].mean()) if n else None,
                  "gp_coverage": float(gp_cover[m].mean()) if n else None}
    return out


def validate(model: SurrogateModel, n: int = 6000, seed: int = VALIDATE_SEED, n_jobs: int = -1) -> dict:
    """Metrics of ``model`` against ``n`` fresh solver runs (>= 5000 recommended)."""
    d = fresh_designs(model, n, seed)
    t = time.perf_counter()
    truth = solve(d, model.statistics, n_jobs=n_jobs, ionisation=model.ionisation_)
    return score(model, d, truth, seed, time.perf_counter() - t)


def score(model: SurrogateModel, d: dict, truth: dict, seed, t_solver: float) -> dict:
    """The validation report of ``model`` on designs ``d`` the solver answered (``truth``)."""
    n = len(truth["status"])
    model.predict({k: (v[:1] if np.ndim(v) else v) for k, v in d.items()}, True)  # warm
    t = time.perf_counter()
    pred = model.predict(d, second_opinion=True)
    t_sur = time.perf_counter() - t
    # what `--confirm` re-answers: the flag of a prediction without the second opinion (the
    # default); the solver's answer to those rows is the reference itself
    confirm = model.predict(d)["confirm_with_solver"]
    ok = (truth["status"] == "ok") & (pred["status"] == "ok")
    y, p = truth["regime"][ok], pred["regime"][ok]
    lo, hi = BOUNDARY_BAND_LN
    near = (((truth["core_majority_ln"] > lo) & (truth["core_majority_ln"] < hi))
            | ((truth["shell_majority_ln"] > lo) & (truth["shell_majority_ln"] < hi)))[ok]
    err = np.abs(pred["vbi_V"] - truth["vbi_V"])[ok]
    gp_err = np.abs(pred["vbi_gp_V"] - truth["vbi_V"])[ok]
    tv = truth["vbi_V"][ok]
    cover = (tv >= pred["vbi_low_V"][ok] - TIE_V) & (tv <= pred["vbi_high_V"][ok] + TIE_V)
    ends = tuple(pred[k][ok] for k in ("vbi_low_V", "vbi_high_V", "vbi_gp_low_V", "vbi_gp_high_V"))
    outside = (tv < -TIE_V) | (tv > pred["vbi0_V"][ok] + TIE_V)
    gp_cover = (tv >= pred["vbi_gp_low_V"][ok] - TIE_V) & (tv <= pred["vbi_gp_high_V"][ok] + TIE_V)
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
        "interval_coverage_ci95": list(wilson_interval(int(cover.sum()), int(cover.size))),
        "coverage_by_regime": coverage_table(tv, *ends, y, REGIMES),
        "coverage_by_predicted_regime": coverage_table(tv, *ends, p, REGIMES),
        "coverage_by_material": coverage_table(tv, *ends, np.full(y.size, model.material, dtype=object),
                                               (model.material,)),
        # clipping the interval to [0, V_bi0] can only lose coverage on rows whose truth is outside
        "truth_outside_bounds_rate": float(outside.mean()),
        "truth_outside_bounds_uncovered": int((outside & ~cover).sum()),
        "flagged_rate": float(flag.mean()),
        "flagged_gbm_mean_mV": float(1e3 * err[flag].mean()) if flag.any() else None,
        "unflagged_gbm_mean_mV": float(1e3 * err[~flag].mean()) if (~flag).any() else None,
        "flagged_regime_accuracy": float((y[flag] == p[flag]).mean()) if flag.any() else None,
        "unflagged_regime_accuracy": float((y[~flag] == p[~flag]).mean()) if (~flag).any() else None,
        "confirm_rate": float(confirm[ok].mean()),
        "confirm_regime_accuracy": float(((y == p) | confirm[ok]).mean()),
        "confirm_vbi_mean_mV": float(1e3 * np.where(confirm[ok], 0.0, err).mean()),
        "confirm_vbi_p99_mV": float(1e3 * np.percentile(np.where(confirm[ok], 0.0, err), 99)),
        "solver_rows_per_s": float(n / t_solver), "surrogate_rows_per_s_with_gp": float(n / t_sur),
    }


TARGET_POOL = 40000  #: uniform designs screened for a targeted check
TARGET_MIN_ROWS = 1200  #: a regime with fewer uniform validation rows gets a targeted check
TARGET_ROWS = 2000  #: solver runs per regime in a targeted check (Wilson 95 % half-width ~1 % at 95 %)


def targeted_designs(model: SurrogateModel, regimes, seed: int, rows: int = TARGET_ROWS,
                     pool: int = TARGET_POOL) -> dict:
    """Designs for a targeted coverage check of rare regimes: ``pool`` uniform designs (as
    ``fresh_designs``, own seed), of which the first ``rows`` the bundle predicts in each of
    ``regimes`` are kept. Selecting on the predicted regime draws from exactly the group the
    per-regime (Mondrian) quantile is calibrated for, so coverage there is judged with
    ``rows`` rows instead of the few a uniform sample gives."""
    d = fresh_designs(model, pool, seed)
    pred = model.predict(d)["regime"]
    pick = np.sort(np.concatenate([np.flatnonzero(pred == r)[:rows] for r in regimes] or [np.zeros(0, int)]))
    return {k: (v[pick] if np.ndim(v) else v) for k, v in d.items()}


def score_targeted(model: SurrogateModel, d: dict, truth: dict, seed, regimes) -> dict:
    """Coverage per predicted and per true regime on a targeted sample (``targeted_designs``)."""
    pred = model.predict(d)
    ok = (truth["status"] == "ok") & (pred["status"] == "ok")
    tv = truth["vbi_V"][ok]
    lo, hi = pred["vbi_low_V"][ok], pred["vbi_high_V"][ok]
    none = np.full(tv.size, np.nan)
    table = coverage_table(tv, lo, hi, none, none, pred["regime"][ok], tuple(regimes))
    by_true = coverage_table(tv, lo, hi, none, none, truth["regime"][ok], REGIMES)
    for t in (table, by_true):
        for x in t.values():
            x.pop("gp_coverage")
    return {"seed": seed, "pool": TARGET_POOL, "regimes": list(regimes), "answered": int(ok.sum()),
            "coverage_by_predicted_regime": table, "coverage_by_regime": {r: x for r, x in by_true.items() if x["rows"]}}
