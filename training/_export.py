"""Fitted scikit-learn estimators to plain arrays (the bundle format of surrogate/_trees.py and
surrogate/_gp.py). Uses the estimators' fitted attributes; nothing is pickled."""

from __future__ import annotations

import numpy as np


def export_hgb(est) -> dict:
    """HistGradientBoosting{Regressor,Classifier} -> tree arrays (numeric splits only)."""
    feats, thr, left, right, miss, val, roots, cls = [], [], [], [], [], [], [], []
    offset = 0
    depth = 0
    for per_iter in est._predictors:
        for k, pred in enumerate(per_iter):
            nodes = pred.nodes
            if nodes["is_categorical"].any():
                raise ValueError("categorical splits are not supported by the bundle format")
            n = nodes.size
            idx = np.arange(offset, offset + n)
            leaf = nodes["is_leaf"].astype(bool)
            feats.append(np.where(leaf, 0, nodes["feature_idx"]).astype(np.int32))
            thr.append(np.where(leaf, np.inf, nodes["num_threshold"]))
            left.append(np.where(leaf, idx, nodes["left"].astype(np.int64) + offset).astype(np.int32))
            right.append(np.where(leaf, idx, nodes["right"].astype(np.int64) + offset).astype(np.int32))
            miss.append(nodes["missing_go_to_left"].astype(bool))
            val.append(np.where(leaf, nodes["value"], 0.0))
            roots.append(offset)
            cls.append(k)
            depth = max(depth, int(nodes["depth"].max()))
            offset += n
    return {
        "feature": np.concatenate(feats), "threshold": np.concatenate(thr), "left": np.concatenate(left),
        "right": np.concatenate(right), "missing_left": np.concatenate(miss), "value": np.concatenate(val),
        "roots": np.array(roots, dtype=np.int32), "tree_class": np.array(cls, dtype=np.int32),
        "baseline": np.asarray(est._baseline_prediction, dtype=np.float64).ravel(), "depth": np.int64(depth),
    }


def export_gp(gpr, X_mean, y_mean_set, X_std) -> dict:
    """A fitted GaussianProcessRegressor (ConstantKernel * Matern + WhiteKernel, normalize_y) to
    arrays: mean from (X_mean, alpha), std from the Cholesky inverse of the smaller X_std set.

    The std subset is a subset of the mean set, so its posterior variance is no smaller than
    the full set's: conservative (Rasmussen & Williams, GPML, 2006, sec. 2.2; monotone in data).
    """
    k = gpr.kernel_
    const, matern, white = k.k1.k1, k.k1.k2, k.k2
    jitter = float(np.ravel(gpr.alpha)[0]) if np.ndim(gpr.alpha) else float(gpr.alpha)  # sklearn's diagonal
    K = k(X_mean) + jitter * np.eye(X_mean.shape[0])
    L = np.linalg.cholesky(K)
    y = (y_mean_set - gpr._y_train_mean) / gpr._y_train_std
    alpha = np.linalg.solve(L.T, np.linalg.solve(L, y))
    Ks = k(X_std) + jitter * np.eye(X_std.shape[0])
    Ls = np.linalg.cholesky(Ks)
    Linv = np.linalg.solve(Ls, np.eye(Ls.shape[0]))  # float64: float32 cancels in the variance
    return {
        "X": X_mean.astype(np.float64), "alpha": alpha, "Xs": X_std.astype(np.float64), "Linv": Linv,
        "length_scale": np.atleast_1d(np.asarray(matern.length_scale, dtype=np.float64)),
        "params": np.array([const.constant_value, matern.nu, white.noise_level,
                            float(np.ravel(gpr._y_train_mean)[0]), float(np.ravel(gpr._y_train_std)[0])]),
    }
