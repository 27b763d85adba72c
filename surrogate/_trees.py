"""Gradient-boosted tree ensembles stored as plain arrays and evaluated without executing
anything from the model file.

Arrays (one entry per node of all trees, concatenated): ``feature`` (int32), ``threshold``
(float64), ``left``/``right`` (int32, global node indices; a leaf points to itself),
``missing_left`` (bool: NaN goes left), ``value`` (float64, leaf contribution incl. shrinkage);
per tree: ``roots`` (int32) and ``tree_class`` (int32); per output: ``baseline`` (float64).
The raw score of output k is baseline[k] + the sum of the leaf values of the trees of class k
(the additive model of Friedman, Ann. Statist. 29, 1189 (2001), doi:10.1214/aos/1013203451).

Evaluation, numpy only (a bundle answers wherever numpy runs): a level-synchronous walk of all
trees at once over bin codes. The nodes are renumbered so that a node's right child follows its
left one (the next node is ``left + (x > threshold)``, one gather per level instead of a 2-D
child lookup), and each feature's values are replaced by their rank among that feature's split
thresholds (``searchsorted``; x > t exactly when rank(x) > rank(t)), so the walk gathers from a
small uint8/uint16 table that stays in cache. Rows with missing values take the plain walk
(``raw_numpy``), which routes NaN by each node's learned direction. Both give the same leaves,
hence the same sums. Row chunks of ``WALK_CHUNK`` run over ``threads()`` worker threads (numpy
releases the interpreter lock in the gathers); nothing inside a chunk runs in parallel.
"""

from __future__ import annotations

import operator
import os
import threading
from contextlib import contextmanager
from concurrent.futures import ThreadPoolExecutor

import numpy as np

from ._cpu import available_cores
from ._errors import SettingError

NUMPY_CHUNK = 1 << 17  #: rows x trees per numpy step of the plain walk
WALK_CHUNK = 256  #: rows per step (and per thread work unit) of the binned walk: (rows, trees) node arrays stay in L2
THREAD_MIN_ROWS = 8 * WALK_CHUNK  #: smaller batches run in the calling thread
#: up to this many rows walk the float thresholds directly: ranking them first costs one
#: searchsorted per feature, more than it saves (8 rows, the V_bi smoothing of one design:
#: 0.17 against 0.25 ms; equal at about 32)
FLOAT_WALK_ROWS = 16
MAX_THREADS = 8
MAX_DEPTH = 64  #: deepest tree a bundle may hold (the fitted ones are at most 12 deep)


_SERIAL = threading.local()  #: set inside a worker of an outer row split: nested calls stay in their thread


@contextmanager
def serial():
    """Within this block ``threads()`` is 1 in the calling thread: the worker of an outer split
    of rows (``SurrogateModel.predict``'s chunks) starts no pool of its own, so the threads
    never exceed the outer count."""
    before = getattr(_SERIAL, "on", False)
    _SERIAL.on = True
    try:
        yield
    finally:
        _SERIAL.on = before


def threads(explicit: int | None = None) -> int:
    """Worker threads for large surrogate batches: ``explicit``, else $RADIALPN_THREADS, else
    $OMP_NUM_THREADS, else the number of cores this process may run on (its CPU affinity), at
    most ``MAX_THREADS``. One thread per chunk of ``WALK_CHUNK`` rows, taken from a shared queue;
    nothing inside a chunk runs in parallel, so the threads never exceed that count and a
    thread slowed by another process holds up no other (no barrier between chunks).

    Inside ``serial()`` it is 1. ``explicit`` and $RADIALPN_THREADS must be whole numbers >= 1 (``SettingError`` otherwise;
    an empty variable counts as unset).
    $OMP_NUM_THREADS belongs to every OpenMP program of the process: its first entry is used
    ("4,2", OpenMP's nested form, gives 4) and a value that is not a whole number >= 1 is
    passed over, as OpenMP runtimes pass over it."""
    if getattr(_SERIAL, "on", False):
        return 1
    for name, value in (("threads", explicit), ("RADIALPN_THREADS", os.environ.get("RADIALPN_THREADS"))):
        if value is None or (name != "threads" and not value.strip()):  # an empty variable counts as unset
            continue
        if isinstance(value, str):
            count = int(value.strip()) if value.strip().isdigit() else 0
        else:
            try:
                count = 0 if isinstance(value, bool) else operator.index(value)
            except TypeError:
                count = 0
        if count < 1:
            raise SettingError(f"{name}: must be a whole number of threads >= 1 (got {value!r})")
        return min(count, MAX_THREADS)
    omp = os.environ.get("OMP_NUM_THREADS", "").split(",")[0].strip()
    if omp.isdigit() and int(omp) >= 1:
        return min(int(omp), MAX_THREADS)
    return max(1, min(available_cores(), MAX_THREADS))


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
        # a walk takes depth steps: deeper than the node count is no tree (a crafted 1e9 would hang)
        if not 0 <= self.depth <= min(n, MAX_DEPTH):
            raise ValueError(f"tree arrays: depth {self.depth} outside [0, {min(n, MAX_DEPTH)}]")
        for name in ("left", "right"):
            idx = getattr(self, name)
            if idx.size != n or idx.min(initial=0) < 0 or idx.max(initial=0) >= n:
                raise ValueError(f"tree arrays: {name} indices out of range")
        if self.roots.max(initial=0) >= n or self.tree_class.max(initial=0) >= self.baseline.size:
            raise ValueError("tree arrays: roots or classes out of range")
        self.child = np.ascontiguousarray(np.column_stack([self.left, self.right]))  # [node, go right]
        self.onehot = np.zeros((self.roots.size, self.baseline.size))
        self.onehot[np.arange(self.roots.size), self.tree_class] = 1.0
        self._renum = self._binned = None  # renumbered nodes, then threshold ranks: built on first use

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

    def _renumbered(self) -> dict:
        """Node ids with right = left + 1 (built once): per node its feature, float threshold
        (+inf at leaves) and next-node base; roots and leaf values in the new numbering."""
        if self._renum is not None:
            return self._renum
        n, T = self.feature.size, self.roots.size
        leaf = self.left == np.arange(n)
        inner = np.flatnonzero(~leaf)
        new = np.empty(n, dtype=np.intp)
        new[self.roots] = np.arange(T)
        pair = T + 2 * np.arange(inner.size)
        new[self.left[inner]] = pair
        new[self.right[inner]] = pair + 1
        if inner.size * 2 + T != n or np.bincount(new, minlength=n).max(initial=0) != 1:
            raise ValueError("tree arrays: every node but the roots must be the child of exactly one node")
        old = np.empty(n, dtype=np.intp)
        old[new] = np.arange(n)
        feat = self.feature[old].astype(np.intp)
        is_leaf = leaf[old]
        nxt = np.where(is_leaf, np.arange(n), new[self.left[old]])  # a leaf points to itself
        thr = self.threshold[old]
        self._renum = dict(feat=np.where(is_leaf, 0, feat), next=nxt, roots=np.arange(T), value=self.value[old],
                           threshold=np.where(is_leaf, np.inf, thr), split_feature=feat, is_leaf=is_leaf, split=thr)
        return self._renum

    def _bins(self, n_features: int) -> dict:
        """The renumbered walk plus per-node threshold ranks and per-feature sorted thresholds
        (built once per feature count)."""
        if self._binned is not None and self._binned["d"] == n_features:
            return self._binned
        r = self._renumbered()
        feat, is_leaf, thr = r["split_feature"], r["is_leaf"], r["split"]
        cuts, width = [], 0
        for f in range(n_features):
            c = np.sort(thr[(feat == f) & ~is_leaf])
            cuts.append(c[np.concatenate(([True], c[1:] != c[:-1]))] if c.size else c)  # np.unique, without its import cost
            width = max(width, cuts[-1].size)
        dtype = np.uint8 if width < 255 else np.uint16
        never = np.iinfo(dtype).max  # above every rank: a leaf never steps right
        rank = np.full(feat.size, never, dtype=dtype)
        for f in range(n_features):
            sel = (feat == f) & ~is_leaf
            rank[sel] = np.searchsorted(cuts[f], thr[sel])
        self._binned = dict(r, d=n_features, rank=rank, cuts=cuts, dtype=dtype)
        return self._binned

    def codes(self, X: np.ndarray) -> np.ndarray:
        """Rank of every value of X (n, n_features) among its feature's split thresholds."""
        b = self._bins(X.shape[1])
        C = np.empty(X.shape, dtype=b["dtype"])
        for f, cut in enumerate(b["cuts"]):
            C[:, f] = np.searchsorted(cut, X[:, f], side="left")
        return C

    def _walk_codes(self, C: np.ndarray) -> np.ndarray:
        """Raw scores (n, n_outputs) of rows given as threshold ranks (no missing values)."""
        b = self._bins(C.shape[1])
        feat, rank, nxt, value = b["feat"], b["rank"], b["next"], b["value"]
        m, d = C.shape
        flat = np.ascontiguousarray(C).ravel()
        base = (np.arange(m) * d)[:, None]
        node = np.broadcast_to(b["roots"], (m, b["roots"].size)).copy()
        for _ in range(self.depth):
            node = nxt[node] + (flat[base + feat[node]] > rank[node])
        return value[node] @ self.onehot + self.baseline

    def _walk_floats(self, X: np.ndarray) -> np.ndarray:
        """Raw scores (n, n_outputs) of a few rows without missing values: the walk on the float
        thresholds (the same comparisons as the rank walk, x > t, hence the same leaves)."""
        b = self._renumbered()
        feat, thr, nxt = b["feat"], b["threshold"], b["next"]
        m, d = X.shape
        flat = X.ravel()
        base = (np.arange(m) * d)[:, None]
        node = np.broadcast_to(b["roots"], (m, b["roots"].size)).copy()
        for _ in range(self.depth):
            node = nxt[node] + (flat[base + feat[node]] > thr[node])
        return b["value"][node] @ self.onehot + self.baseline

    def _walk_one(self, x: np.ndarray) -> np.ndarray:
        """Raw scores (1, n_outputs) of one row without missing values: the walk on the float
        thresholds (a rank table costs more than it saves for one row)."""
        b = self._renumbered()
        feat, thr, nxt = b["feat"], b["threshold"], b["next"]
        node = b["roots"]
        for _ in range(self.depth):
            node = nxt[node] + (x[feat[node]] > thr[node])
        return (b["value"][node] @ self.onehot + self.baseline)[None, :]

    def raw_smoothed(self, Xk: np.ndarray, n_threads: int | None = None) -> np.ndarray:
        """Raw scores (n, n_outputs) averaged over k points per row: the mean over j of
        ``raw(Xk[j])``, for Xk (k, n, n_features) without missing values, computed tree by tree.

        A tree whose every split on a row's path leaves all k points on one side (the box
        [min_j Xk[j], max_j Xk[j]] lies on one side of each threshold) gives all k points the
        same leaf, so it is walked once, on the box; only the (row, tree) pairs whose box
        straddles a threshold are walked k times (on the V_bi smoothing's neighbourhood of
        +-0.003 decades, about 3 % of the pairs). The same leaves as k separate walks, hence
        the same mean but for the order of the additions (1e-15 relative)."""
        Xk = np.asarray(Xk, dtype=np.float64)
        k, n, d = Xk.shape
        out = np.empty((n, self.n_outputs))
        step = max(1, WALK_CHUNK // 2)  # two rank tables and a split mask per chunk

        def work(s):
            out[s:s + step] = self._smoothed_chunk(Xk[:, s:s + step, :])

        starts = range(0, n, step)
        nt = min(threads(n_threads), len(starts)) if n >= THREAD_MIN_ROWS else 1
        if nt > 1:
            with ThreadPoolExecutor(nt) as pool:
                list(pool.map(work, starts))
        else:
            for s in starts:
                work(s)
        return out

    def _smoothed_chunk(self, Xk: np.ndarray) -> np.ndarray:
        """``raw_smoothed`` of one chunk of rows (Xk: k, m, n_features)."""
        k, m, d = Xk.shape
        b = self._bins(d)
        feat, rank, nxt, value = b["feat"], b["rank"], b["next"], b["value"]
        lo, hi = self.codes(Xk.min(0)).ravel(), self.codes(Xk.max(0)).ravel()
        base = (np.arange(m) * d)[:, None]
        node = np.broadcast_to(b["roots"], (m, b["roots"].size)).copy()
        split = np.zeros(node.shape, dtype=bool)
        for _ in range(self.depth):  # lo <= t < hi: the threshold t cuts the box (a leaf's rank never does)
            at, r = base + feat[node], rank[node]
            go = lo[at] > r
            split |= ~go & (hi[at] > r)
            node = nxt[node] + go
        leaf = value[node]
        leaf[split] = 0.0
        out = leaf @ self.onehot + self.baseline
        rows, trees = np.nonzero(split)
        if rows.size:  # each straddled (row, tree): its k points walked on the float thresholds
            f = self._renumbered()
            x = Xk[:, rows, :].reshape(-1, d)
            at0 = np.arange(x.shape[0]) * d
            flat = x.ravel()
            node = np.tile(f["roots"][trees], k)
            for _ in range(self.depth):
                node = f["next"][node] + (flat[at0 + f["feat"][node]] > f["threshold"][node])
            mean = f["value"][node].reshape(k, rows.size).mean(0)
            np.add.at(out, (rows, self.tree_class[trees]), mean)
        return out

    def raw(self, X: np.ndarray, n_threads: int | None = None) -> np.ndarray:
        """Raw scores (n, n_outputs): the binned walk, the plain walk for rows with missing
        values; chunks of rows over ``threads(n_threads)`` threads for large batches."""
        X = np.ascontiguousarray(X, dtype=np.float64)
        n = X.shape[0]
        if n == 1 and not np.isnan(X).any():
            return self._walk_one(X[0])
        missing = np.isnan(X).any(1)
        if missing.any():
            out = np.empty((n, self.n_outputs))
            out[missing] = self.raw_numpy(X[missing])
            if (~missing).any():
                out[~missing] = self.raw(X[~missing], n_threads)
            return out
        if n <= FLOAT_WALK_ROWS:
            return self._walk_floats(X)
        if n <= WALK_CHUNK:
            return self._walk_codes(self.codes(X))
        out = np.empty((n, self.n_outputs))

        def work(s):
            out[s:s + WALK_CHUNK] = self._walk_codes(self.codes(X[s:s + WALK_CHUNK]))

        starts = range(0, n, WALK_CHUNK)
        k = min(threads(n_threads), len(starts)) if n >= THREAD_MIN_ROWS else 1
        if k > 1:
            with ThreadPoolExecutor(k) as pool:
                list(pool.map(work, starts))
        else:
            for s in starts:
                work(s)
        return out
