"""Fit a surrogate bundle from a training set (issue 5 of the project's design).

Models (scikit-learn, exported to plain arrays):
- regime: HistGradientBoostingClassifier on the features of surrogate/_features.py, class
  probabilities calibrated by temperature scaling on the calibration split (Guo et al., ICML
  2017, "On calibration of modern neural networks", sec. 4.2);
- V_bi: HistGradientBoostingRegressor for the residual (solver V_bi - depletion V_bi);
- difficulty: a small regressor of log|residual| fitted on 2-fold out-of-fold residuals;
  V_bi intervals are normalised split-conformal, [pred - q s(x), pred + q s(x)] with q the
  ceil((n+1)(1-alpha))-th smallest of |y - pred| / s(x) on the calibration split (Lei et al.,
  J. Am. Stat. Assoc. 113, 1094 (2018), doi:10.1080/01621459.2017.1307116, sec. 5.2), one q per
  predicted regime (Mondrian conformal prediction, ``mondrian_quantiles``);
- second opinion: a Gaussian process (ConstantKernel * anisotropic Matern 5/2 + WhiteKernel)
  for the same residual on a Sobol prefix of the training set (space-filling), its std rescaled
  by its own conformal quantile;
- the other output columns (neutral extents, surface bending): residual regressors.
"""

from __future__ import annotations

import time
import warnings

import numpy as np

from .. import INPUT_COLUMNS, REGIMES, normalize_designs
from .._features import FEATURE_NAMES, FEATURES_VERSION, features

from ._dataset import load_dataset
from ._export import export_gp, export_hgb

LEVEL = 0.95  #: interval coverage the conformal quantiles target
# Sizes: a tree costs ~16 ns per row in batch, so ~450 trees in all keep 1e5 rows/s
# (benchmarks/bench_surrogate.py); accuracy measured by `radialpn validate`.
# Depth <= 12 bounds the level-synchronous numpy walk of a single query.
# At learning rate 0.3 the regime classifier's held-out accuracy swung between 97.4 and 99.8 %
# from one iteration to the next on the 77-500 K GaAs n-core set; 100 rows per leaf keeps it at
# 99.7-99.8 % throughout (same trees, same speed). V_bi: 255 leaves (depth 12) against 127
# (depth 10) took the held-out mean error from 1.58 to 1.25 mV and the 99th percentile from 9.6
# to 7.6 mV there (twice the data gave nothing: the error is the trees' bias, not noise); 511
# leaves gave 1.08 / 7.0 mV for twice the nodes again (bundle size and walk time).
REGIME_MODEL = dict(max_iter=45, learning_rate=0.3, max_leaf_nodes=63, max_depth=10, min_samples_leaf=100)  # x4 classes
VBI_MODEL = dict(max_iter=100, learning_rate=0.1, max_leaf_nodes=255, max_depth=12)
DIFFICULTY_MODEL = dict(max_iter=30, learning_rate=0.2, max_leaf_nodes=31, max_depth=10)
AUX_MODEL = dict(max_iter=20, learning_rate=0.35, max_leaf_nodes=63, max_depth=10)
#: a predicted-regime group needs this many calibration rows for its own conformal quantile
#: (at 200 rows the coverage of a 95 % quantile has sd ~1.5 %); smaller groups use the pooled one
MIN_GROUP_ROWS = 200
GP_FIT_POINTS = 1024  #: hyperparameters are fitted on this Sobol prefix
GP_MEAN_POINTS = 2048  #: the mean uses this prefix
GP_STD_POINTS = 512  #: the std uses this prefix (conservative, ~2 MB float64 inverse)
DIFFICULTY_FLOOR_V = 2e-4  #: |residual| floor before the log [V]
AUX_TARGETS = ("core_neutral_radius_nm", "shell_neutral_nm", "surface_bending_V")


def _frame_features(df, statistics, ionisation="full"):
    table = normalize_designs({c: df[c].to_numpy() for c in INPUT_COLUMNS if c in df})
    X, da = features(table, statistics, ionisation)
    return X, da


def _usable(frame, X, da):
    """(frame, X, da) restricted to rows with finite features and a depletion answer."""
    keep = np.isfinite(X).all(1) & (np.asarray(da["status"]) == "ok")
    if keep.all():
        return frame, X, da
    return frame[keep].reset_index(drop=True), X[keep], {k: np.asarray(v)[keep] for k, v in da.items()}


def conformal_quantile(scores: np.ndarray, level: float = LEVEL) -> float:
    """The ceil((n+1) level)-th smallest score (split conformal, Lei et al. 2018)."""
    s = np.sort(scores[np.isfinite(scores)])
    k = int(np.ceil((s.size + 1) * level))
    return float(s[min(k, s.size) - 1])


def mondrian_quantiles(scores: np.ndarray, groups: np.ndarray, n_groups: int, level: float = LEVEL,
                       min_rows: int = MIN_GROUP_ROWS) -> tuple:
    """Per-group split-conformal quantiles (Mondrian conformal prediction).

    Each group g (a category known before the answer, here the bundle's predicted regime)
    gets the ceil((n_g + 1) level)-th smallest of its own n_g finite ``scores``, which gives
    coverage >= ``level`` conditionally on the group for exchangeable data (Vovk, Gammerman &
    Shafer, Algorithmic Learning in a Random World, Springer 2005, doi:10.1007/b106715, ch. 4,
    Mondrian conformal predictors (section number from memory); first in Vovk, Lindsay,
    Nouretdinov & Gammerman, "Mondrian confidence machine", technical report, Royal Holloway
    University of London, 2003). The rank exists only when ceil((n_g + 1) level) <= n_g, and a quantile of
    a few rows is noisy (its coverage is Beta(k, n_g + 1 - k) distributed, sd ~
    sqrt(level (1 - level) / n_g)), so a group with fewer than ``min_rows`` finite scores
    falls back to the pooled quantile of all rows (marginal guarantee only).

    ``groups``: integer codes in [0, n_groups). Returns (pooled q, per-group q [n_groups],
    per-group row counts [n_groups], per-group own-quantile flags [n_groups]).
    """
    scores, groups = np.asarray(scores, dtype=float), np.asarray(groups)
    fin = np.isfinite(scores)
    pooled = conformal_quantile(scores, level)
    q, rows, own = np.full(n_groups, pooled), np.zeros(n_groups, dtype=int), np.zeros(n_groups, dtype=bool)
    for g in range(n_groups):
        s = scores[fin & (groups == g)]
        rows[g] = s.size
        if s.size >= max(min_rows, 1) and int(np.ceil((s.size + 1) * level)) <= s.size:
            q[g], own[g] = conformal_quantile(s, level), True
    return pooled, q, rows, own


def conformal_block(tree_scores, gp_scores, groups, level: float = LEVEL, min_rows: int = MIN_GROUP_ROWS,
                    smoothing: tuple = (1, 0.0)) -> dict:
    """bundle.json's ``conformal`` block from calibration scores of the trees and the GP,
    grouped by predicted regime (codes into ``REGIMES``); ``smoothing``: (points, decades) of the
    V_bi centre the tree scores were computed with (surrogate/_model.py ``SMOOTH_POINTS``)."""
    q_gbm, qg, rows, own = mondrian_quantiles(tree_scores, groups, len(REGIMES), level, min_rows)
    q_gp, qp, _, own_gp = mondrian_quantiles(gp_scores, groups, len(REGIMES), level, min_rows)
    own &= own_gp  # a group uses its own quantiles for both models or the pooled ones for both
    qg, qp = np.where(own, qg, q_gbm), np.where(own, qp, q_gp)
    return {"level": level, "q_gbm": q_gbm, "q_gp": q_gp, "calibration_rows": int(np.isfinite(tree_scores).sum()),
            "groups_by": "predicted_regime", "min_group_rows": int(min_rows),
            "smooth_points": int(smoothing[0]), "smooth_dex": float(smoothing[1]),
            "groups": {r: {"rows": int(rows[i]), "q_gbm": float(qg[i]), "q_gp": float(qp[i]),
                           "pooled": bool(not own[i])} for i, r in enumerate(REGIMES)}}


def fit_temperature(raw: np.ndarray, y: np.ndarray) -> float:
    """Temperature T minimising the negative log-likelihood of softmax(raw / T) (golden section
    on log T in [-3, 3])."""
    def nll(logt):
        z = raw / np.exp(logt)
        z = z - z.max(1, keepdims=True)
        return float(-(z[np.arange(y.size), y] - np.log(np.exp(z).sum(1))).mean())

    lo, hi = -3.0, 3.0
    g = (np.sqrt(5.0) - 1) / 2
    for _ in range(60):
        a, b = hi - g * (hi - lo), lo + g * (hi - lo)
        lo, hi = (lo, b) if nll(a) < nll(b) else (a, hi)
    return float(np.exp(0.5 * (lo + hi)))


def fit_bundle(spec, data_dir, log=print, seed: int = 0, gp_points=(GP_FIT_POINTS, GP_MEAN_POINTS, GP_STD_POINTS)) -> tuple:
    """Fit every model of a bundle. Returns (meta dict, arrays dict) ready for ``write_bundle``.
    ``gp_points``: Sobol-prefix sizes for the GP's hyperparameters, mean and std."""
    gp_fit, gp_mean, gp_std = gp_points
    from sklearn.ensemble import HistGradientBoostingClassifier, HistGradientBoostingRegressor
    from sklearn.gaussian_process import GaussianProcessRegressor
    from sklearn.exceptions import ConvergenceWarning
    from sklearn.gaussian_process.kernels import ConstantKernel, Matern, WhiteKernel

    t0 = time.perf_counter()
    train = load_dataset(data_dir, ("train",))
    cal = load_dataset(data_dir, ("calibration",))
    train, cal = train[train["status"] == "ok"].reset_index(drop=True), cal[cal["status"] == "ok"].reset_index(drop=True)
    X, da = _frame_features(train, spec.statistics, spec.ionisation)
    Xc, dac = _frame_features(cal, spec.statistics, spec.ionisation)
    # the runtime answers only designs whose depletion features exist (an accumulating surface,
    # say, has none and goes to the solver), so the models are fitted and calibrated on those
    (train, X, da), n_train = _usable(train, X, da), len(train)
    (cal, Xc, dac), n_cal = _usable(cal, Xc, dac), len(cal)
    if len(train) < 100 or len(cal) < 20:
        from ._dataset import DatasetError

        raw = load_dataset(data_dir, ("train",))
        why = next((s for s in raw["status"] if s != "ok"), "no rows")
        raise DatasetError(f"dataset {data_dir}: only {len(train)} training and {len(cal)} calibration designs have "
                           f"a solver answer and depletion features (need 100 and 20); first refusal: {why}")
    if n_train - len(train) or n_cal - len(cal):
        log(f"left out {n_train - len(train):,} training and {n_cal - len(cal):,} calibration rows without "
            "depletion features (the runtime sends such designs to the solver)")
    code = {r: i for i, r in enumerate(REGIMES)}
    y, yc = train["regime"].map(code).to_numpy(), cal["regime"].map(code).to_numpy()
    res, resc = train["vbi_V"].to_numpy() - da["vbi_V"], cal["vbi_V"].to_numpy() - dac["vbi_V"]
    log(f"features: {X.shape[0]:,} training rows, {Xc.shape[0]:,} calibration rows ({time.perf_counter() - t0:.1f} s)")
    arrays, meta = {}, {}

    clf = HistGradientBoostingClassifier(**REGIME_MODEL, early_stopping=False, random_state=seed).fit(X, y)
    raw_c = clf._raw_predict(Xc)
    raw_c = raw_c.T if raw_c.shape[0] != Xc.shape[0] else raw_c
    temperature = fit_temperature(raw_c, yc)
    arrays.update({f"regime/{k}": v for k, v in export_hgb(clf).items()})
    log(f"regime classifier: {len(clf._predictors)} iterations, temperature {temperature:.3f}")

    reg = HistGradientBoostingRegressor(**VBI_MODEL, early_stopping=False, random_state=seed).fit(X, res)
    arrays.update({f"vbi/{k}": v for k, v in export_hgb(reg).items()})
    folds = np.arange(X.shape[0]) % 2
    oof = np.empty_like(res)
    for f in (0, 1):
        m = HistGradientBoostingRegressor(**VBI_MODEL, early_stopping=False, random_state=seed)
        m.fit(X[folds != f], res[folds != f])
        oof[folds == f] = m.predict(X[folds == f])
    diff = HistGradientBoostingRegressor(**DIFFICULTY_MODEL, early_stopping=False, random_state=seed)
    diff.fit(X, np.log(np.abs(res - oof) + DIFFICULTY_FLOOR_V))
    arrays.update({f"difficulty/{k}": v for k, v in export_hgb(diff).items()})
    scale_c = np.exp(diff.predict(Xc))
    tree_scores = np.abs(resc - reg.predict(Xc)) / scale_c
    group_c = clf.classes_[raw_c.argmax(1)]  # predicted regime (code): the Mondrian taxonomy
    log(f"V_bi regressor and difficulty model; pooled conformal q = {conformal_quantile(tree_scores):.3f} "
        f"({time.perf_counter() - t0:.1f} s)")

    for target in AUX_TARGETS:
        m = HistGradientBoostingRegressor(**AUX_MODEL, early_stopping=False, random_state=seed)
        m.fit(X, train[target].to_numpy() - da[target])
        arrays.update({f"aux_{target}/{k}": v for k, v in export_hgb(m).items()})

    # Gaussian process on the Sobol prefix (round 0 rows come first, in sequence order)
    base = np.flatnonzero(train["round"].to_numpy() == 0)
    ok = np.isfinite(X).all(1)
    base = base[ok[base]]
    mu, sd = X[base[:gp_mean]].mean(0), X[base[:gp_mean]].std(0) + 1e-12
    Z = (X - mu) / sd
    kernel = ConstantKernel(1.0, (1e-3, 1e3)) * Matern(np.ones(X.shape[1]), (1e-2, 1e3), nu=2.5) + \
        WhiteKernel(1e-2, (1e-8, 1.0))
    gpr = GaussianProcessRegressor(kernel, normalize_y=True, random_state=seed, n_restarts_optimizer=0)
    with warnings.catch_warnings():  # length scales at a bound just mean "irrelevant feature"
        warnings.simplefilter("ignore", ConvergenceWarning)
        gpr.fit(Z[base[:gp_fit]], res[base[:gp_fit]])
    gp = export_gp(gpr, Z[base[:gp_mean]], res[base[:gp_mean]], Z[base[:gp_std]])
    arrays.update({f"gp/{k}": v for k, v in gp.items()})
    arrays["gp/x_mean"], arrays["gp/x_scale"] = mu, sd
    from .._gp import GaussianProcess

    gm, gs = GaussianProcess(gp).predict((Xc - mu) / sd)
    # scores of the unsmoothed trees: `train_bundle` recalibrates on the runtime's smoothed centre
    conformal = conformal_block(tree_scores, np.abs(resc - gm) / gs, group_c)
    log(f"Gaussian process: {gpr.kernel_}; pooled conformal q = {conformal['q_gp']:.3f} "
        f"({time.perf_counter() - t0:.1f} s)")

    ref = np.flatnonzero(np.isfinite(Xc).all(1))[:64]  # reference rows to verify fast paths at load
    arrays["ref/X"] = Xc[ref]
    for name in ("regime", "vbi", "difficulty"):
        est = {"regime": clf, "vbi": reg, "difficulty": diff}[name]
        r = est._raw_predict(Xc[ref])
        arrays[f"ref/{name}_raw"] = r.T if r.shape[0] != ref.size else r
    meta.update(
        features_version=FEATURES_VERSION, feature_names=list(FEATURE_NAMES), temperature=temperature,
        conformal=conformal,
        models={"regime": REGIME_MODEL, "vbi": VBI_MODEL, "difficulty": DIFFICULTY_MODEL, "aux": AUX_MODEL,
                "gp": {"kernel": str(gpr.kernel_), "fit_points": min(gp_fit, base.size),
                       "mean_points": min(gp_mean, base.size), "std_points": min(gp_std, base.size)}},
        data={"training_rows": int(X.shape[0]), "calibration_rows": int(Xc.shape[0])},
        fit_seconds=time.perf_counter() - t0,
    )
    return meta, arrays
