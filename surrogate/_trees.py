"""Gradient-boosted tree ensembles stored as plain arrays and evaluated without executing
anything from the model file.

Arrays (one entry per node of all trees, concatenated): ``feature`` (int32), ``threshold``
(float64), ``left``/``right`` (int32, global node indices; a leaf points to itself),
``missing_left`` (bool: NaN goes left), ``value`` (float64, leaf contribution incl. shrinkage);
per tree: ``roots`` (int32) and ``tree_class`` (int32); per output: ``baseline`` (float64).
The raw score of output k is baseline[k] + the sum of the leaf values of the trees of class k
(the additive model of Friedman, Ann. Statist. 29, 1189 (2001), doi:10.1214/aos/1013203451).

Evaluation, numpy only (a bundle answers wherever numpy runs): small batches by a
level-synchronous walk of all trees at once; batches of ``BITVECTOR_MIN_ROWS`` rows or more by
exit-leaf bitvectors (``_bitvector``), chunk by chunk over ``threads()`` worker threads (numpy
releases the interpreter lock in the array work). Both give the same leaves, hence the same sums.
"""

from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor

import numpy as np

NUMPY_CHUNK = 1 << 17  #: rows x trees per numpy step of the walk
BITVECTOR_MIN_ROWS = 256  #: batches at least this large use the bitvector tables (built on first use)
BITVECTOR_CHUNK = 1024  #: rows per bitvector step: keeps the (rows, trees) words in cache
MAX_THREADS = 8


def threads(explicit: int | None = None) -> int:
    """Worker threads for large batches: ``explicit``, else $RADIALPN_THREADS, else
    $OMP_NUM_THREADS, else the number of cores (at most ``MAX_THREADS``). One thread per chunk
    of rows; nothing inside a chunk runs in parallel, so threads never oversubscribe cores."""
    for value in (explicit, os.environ.get("RADIALPN_THREADS"), os.environ.get("OMP_NUM_THREADS")):
        try:
            if value is not None and int(value) >= 1:
                return min(int(value), MAX_THREADS)
        except (TypeError, ValueError):
            continue
    return max(1, min(os.cpu_count() or 1, MAX_THREADS))


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
        self._tables = None  # exit-leaf bitvector tables, built on the first large batch

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

    def raw(self, X: np.ndarray, n_threads: int | None = None) -> np.ndarray:
        """Raw scores (n, n_outputs): the walk for small batches and rows with missing values,
        the bitvector tables (same leaves) for large ones, over ``threads(n_threads)``."""
        X = np.ascontiguousarray(X, dtype=np.float64)
        n = X.shape[0]
        if n < BITVECTOR_MIN_ROWS or np.isnan(X).any():
            return self.raw_numpy(X)
        if self._tables is None:
            from ._bitvector import ExitLeafTables

            self._tables = ExitLeafTables(self, X.shape[1])
        out = np.empty((n, self.n_outputs))

        def work(s):
            out[s:s + BITVECTOR_CHUNK] = self._tables.leaf_values(X[s:s + BITVECTOR_CHUNK]) @ self.onehot + self.baseline

        starts = range(0, n, BITVECTOR_CHUNK)
        k = min(threads(n_threads), len(starts))
        if k > 1:
            with ThreadPoolExecutor(k) as pool:
                list(pool.map(work, starts))
        else:
            for s in starts:
                work(s)
        return out
