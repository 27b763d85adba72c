"""Gradient-boosted tree ensembles stored as plain arrays and evaluated without executing
anything from the model file.

Arrays (one entry per node of all trees, concatenated): ``feature`` (int32), ``threshold``
(float64), ``left``/``right`` (int32, global node indices; a leaf points to itself),
``missing_left`` (bool: NaN goes left), ``value`` (float64, leaf contribution incl. shrinkage);
per tree: ``roots`` (int32) and ``tree_class`` (int32); per output: ``baseline`` (float64).
The raw score of output k is baseline[k] + the sum of the leaf values of the trees of class k
(the additive model of Friedman, Ann. Statist. 29, 1189 (2001), doi:10.1214/aos/1013203451).

Evaluation: a level-synchronous walk of all trees at once in numpy (fast for single rows and
small batches). If scikit-learn is installed, its compiled tree predictor is rebuilt from the
same arrays for large batches, and used only after it reproduces the numpy result on the
bundle's reference rows.
"""

from __future__ import annotations

import os

import numpy as np

NUMPY_CHUNK = 1 << 17  #: rows x trees per numpy step
ACCEL_MIN_ROWS = 512  #: batches at least this large use the compiled predictor when available


class TreeEnsemble:
    """An additive tree model with ``n_outputs`` raw scores (1 for regression, K classes)."""

    def __init__(self, arrays: dict):
        self.feature = np.ascontiguousarray(arrays["feature"], dtype=np.int32)
        self.threshold = np.ascontiguousarray(arrays["threshold"], dtype=np.float64)
        self.left = np.ascontiguousarray(arrays["left"], dtype=np.int32)
        self.right = np.ascontiguousarray(arrays["right"], dtype=np.int32)
        self.missing_left = np.ascontiguousarray(arrays["missing_left"], dtype=bool)
        self.value = np.ascontiguousarray(arrays["value"], dtype=np.float64)
        self.roots = np.ascontiguousarray(arrays["roots"], dtype=np.int32)
        self.tree_class = np.ascontiguousarray(arrays["tree_class"], dtype=np.int32)
        self.baseline = np.ascontiguousarray(arrays["baseline"], dtype=np.float64)
        self.depth = int(arrays["depth"])
        n = self.feature.size
        for name in ("left", "right"):
            idx = getattr(self, name)
            if idx.size != n or idx.min(initial=0) < 0 or idx.max(initial=0) >= n:
                raise ValueError(f"tree arrays: {name} indices out of range")
        if self.roots.max(initial=0) >= n or self.tree_class.max(initial=0) >= self.baseline.size:
            raise ValueError("tree arrays: roots or classes out of range")
        self.child = np.ascontiguousarray(np.column_stack([self.left, self.right]))  # [node, go right]
        self.onehot = np.zeros((self.roots.size, self.baseline.size))
        self.onehot[np.arange(self.roots.size), self.tree_class] = 1.0
        self._accel = None  # None: untried; False: unavailable; else list of predictors per class

    @classmethod
    def stack(cls, ensembles) -> "TreeEnsemble":
        """One ensemble whose outputs are those of ``ensembles`` side by side: a single walk
        then answers all of them (what a single query needs)."""
        arrays = {k: [] for k in ("feature", "threshold", "left", "right", "missing_left", "value", "roots",
                                  "tree_class", "baseline")}
        nodes = outputs = 0
        for e in ensembles:
            for k in ("feature", "threshold", "missing_left", "value", "baseline"):
                arrays[k].append(getattr(e, k))
            arrays["left"].append(e.left + nodes)
            arrays["right"].append(e.right + nodes)
            arrays["roots"].append(e.roots + nodes)
            arrays["tree_class"].append(e.tree_class + outputs)
            nodes += e.feature.size
            outputs += e.baseline.size
        merged = {k: np.concatenate(v) for k, v in arrays.items()}
        merged["depth"] = max(e.depth for e in ensembles)
        return cls(merged)

    @property
    def n_outputs(self) -> int:
        return self.baseline.size

    def raw_numpy(self, X: np.ndarray) -> np.ndarray:
        """Raw scores (n, n_outputs) by the numpy walk."""
        n, T = X.shape[0], self.roots.size
        out = np.empty((n, self.n_outputs))
        step = max(1, NUMPY_CHUNK // max(T, 1))
        d = X.shape[1]
        for s in range(0, n, step):
            x = np.ascontiguousarray(X[s:s + step], dtype=np.float64)
            m = x.shape[0]
            node = np.broadcast_to(self.roots, (m, T)).copy()
            base = (np.arange(m) * d)[:, None]
            flat = x.ravel()
            if np.isnan(flat).any():  # missing values: route by each node's learned direction
                for _ in range(self.depth):
                    xv = flat[base + self.feature[node]]
                    right = np.where(np.isnan(xv), ~self.missing_left[node], xv > self.threshold[node])
                    node = self.child[node, right.view(np.int8)]
            else:  # one gather, one compare, one step per level (NaN > t is False only with NaN)
                for _ in range(self.depth):
                    right = flat[base + self.feature[node]] > self.threshold[node]
                    node = self.child[node, right.view(np.int8)]
            out[s:s + step] = self.value[node] @ self.onehot + self.baseline
        return out

    def _build_accel(self):
        try:
            from sklearn.ensemble._hist_gradient_boosting.common import (
                PREDICTOR_RECORD_DTYPE, X_BITSET_INNER_DTYPE,
            )
            from sklearn.ensemble._hist_gradient_boosting.predictor import TreePredictor
        except Exception:  # not installed, or its private layout moved: stay with numpy
            return False
        ends = np.append(self.roots[1:], self.feature.size)
        empty = np.zeros((0, 8), dtype=X_BITSET_INNER_DTYPE)
        preds = []
        for root, end, cls in zip(self.roots, ends, self.tree_class):
            sl = slice(root, end)
            nodes = np.zeros(end - root, dtype=PREDICTOR_RECORD_DTYPE)
            leaf = self.left[sl] == np.arange(root, end)
            nodes["value"] = self.value[sl]
            nodes["feature_idx"] = self.feature[sl]
            nodes["num_threshold"] = self.threshold[sl]
            nodes["missing_go_to_left"] = self.missing_left[sl]
            nodes["left"] = np.where(leaf, 0, self.left[sl] - root)
            nodes["right"] = np.where(leaf, 0, self.right[sl] - root)
            nodes["is_leaf"] = leaf
            preds.append((int(cls), TreePredictor(nodes, empty, empty)))
        return preds

    def _raw_accel(self, X):
        X = np.ascontiguousarray(X, dtype=np.float64)
        out = np.repeat(self.baseline[:, None], X.shape[0], axis=1)  # (outputs, rows): contiguous adds
        known = np.zeros((0, 8), dtype=np.uint32)
        fmap = np.zeros(0, dtype=np.uint32)
        threads = os.cpu_count() or 1
        for cls, p in self._accel:
            out[cls] += p.predict(X, known, fmap, threads)
        return out.T

    def verify_accel(self, X_ref: np.ndarray, raw_ref: np.ndarray) -> bool:
        """Enable the compiled path only if it reproduces the reference scores (1e-9)."""
        if self._accel is None:
            accel = self._build_accel()
            if accel:
                self._accel = accel
                try:
                    ok = np.allclose(self._raw_accel(X_ref), raw_ref, rtol=0, atol=1e-9)
                except Exception:
                    ok = False
                if not ok:
                    self._accel = False
            else:
                self._accel = False
        return bool(self._accel)

    def raw(self, X: np.ndarray) -> np.ndarray:
        """Raw scores (n, n_outputs), the fastest verified way."""
        if self._accel and X.shape[0] >= ACCEL_MIN_ROWS:
            return self._raw_accel(X)
        return self.raw_numpy(X)
