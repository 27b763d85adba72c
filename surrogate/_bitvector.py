"""Exit-leaf evaluation of a tree ensemble by bitvectors, for large batches.

Each tree's leaves are numbered left to right and a row carries one bitvector per tree, all
leaves set. Every split node whose test sends the row right (x > threshold) removes the leaves of
its left subtree; the row's exit leaf is then the leftmost leaf still set (QuickScorer:
C. Lucchese et al., SIGIR 2015, 73-82, doi:10.1145/2766462.2767733). The nodes that send a row
right on feature f are exactly those with threshold < x_f, a prefix of f's nodes sorted by
threshold, so the AND of their masks is a precomputed cumulative AND read at
``searchsorted(thresholds_f, x_f)``. A row then costs one binary search and one row gather per
feature instead of one dependent gather per tree level.

Plain numpy; results equal the level walk of ``_trees`` exactly (the same leaves are summed).
Rows with missing features must use the walk (a NaN has no place among sorted thresholds).
"""

from __future__ import annotations

import numpy as np

WORD = 64  #: leaves per uint64 word
ALL = np.uint64(0xFFFFFFFFFFFFFFFF)


def _leaf_ranks(left, right, roots, leaf):
    """In-order leaf rank of every node's leftmost leaf (lo) and one past its rightmost (hi)."""
    n = left.size
    lo = np.zeros(n, dtype=np.int64)
    hi = np.zeros(n, dtype=np.int64)
    counts = np.zeros(roots.size, dtype=np.int64)
    for t, root in enumerate(roots.tolist()):
        k = 0
        stack = [(root, False)]
        while stack:
            node, done = stack.pop()
            if leaf[node]:
                lo[node], hi[node] = k, k + 1
                k += 1
            elif done:
                lo[node], hi[node] = lo[left[node]], hi[right[node]]
            else:
                stack += [(node, True), (right[node], False), (left[node], False)]
        counts[t] = k
    return lo, hi, counts


class ExitLeafTables:
    """Cumulative-AND tables of an ensemble (arrays of ``TreeEnsemble``) over ``n_features``."""

    def __init__(self, ens, n_features: int):
        n = ens.feature.size
        leaf = ens.left == np.arange(n)
        lo, hi, counts = _leaf_ranks(ens.left, ens.right, ens.roots, leaf)
        ends = np.append(ens.roots[1:], n)
        tree_of = np.repeat(np.arange(ens.roots.size), ends - ens.roots)
        words = np.maximum(1, -(-counts // WORD))
        self.groups = []
        for w in np.unique(words).tolist():
            trees = np.flatnonzero(words == w)
            local = np.full(ens.roots.size, -1)
            local[trees] = np.arange(trees.size)
            inner = np.flatnonzero(~leaf & (words[tree_of] == w))
            a, b = lo[ens.left[inner]], hi[ens.left[inner]]  # the left subtree's leaf range [a, b)
            masks = np.empty((inner.size, w), dtype=np.uint64)
            for k in range(w):
                s = np.clip(a - WORD * k, 0, WORD)
                e = np.clip(b - WORD * k, 0, WORD)
                width = (e - s).astype(np.uint64)
                ones = np.where(width >= WORD, ALL, (np.uint64(1) << np.minimum(width, 63)) - np.uint64(1))
                masks[:, k] = ~np.where(width > 0, ones << s.astype(np.uint64), np.uint64(0))
            per_feature = []
            for f in range(n_features):
                on_f = ens.feature[inner] == f
                if not on_f.any():
                    continue
                nodes, m = inner[on_f], masks[on_f]
                order = np.argsort(ens.threshold[nodes], kind="stable")
                nodes, m = nodes[order], m[order]
                used = np.unique(local[tree_of[nodes]])  # only the trees that split on f
                col = np.searchsorted(used, local[tree_of[nodes]])
                cum = np.full((nodes.size + 1, used.size, w), ALL)
                cum[np.arange(1, nodes.size + 1), col] = m
                np.bitwise_and.accumulate(cum, axis=0, out=cum)
                per_feature.append((f, ens.threshold[nodes].copy(), used, cum))
            values = np.zeros((trees.size, WORD * w))
            leaves = np.flatnonzero(leaf & (words[tree_of] == w))
            values[local[tree_of[leaves]], lo[leaves]] = ens.value[leaves]
            self.groups.append((w, trees, per_feature, values))
        self.n_trees = ens.roots.size

    @property
    def nbytes(self) -> int:
        return sum(c.nbytes for _, _, pf, _ in self.groups for _, _, _, c in pf)

    def leaf_values(self, X: np.ndarray) -> np.ndarray:
        """(n, n_trees) leaf value of every tree for rows X (n, n_features), no NaN."""
        out = np.empty((X.shape[0], self.n_trees))
        for w, trees, per_feature, values in self.groups:
            acc = np.full((X.shape[0], trees.size, w), ALL)
            for f, thr, used, cum in per_feature:
                g = cum[np.searchsorted(thr, X[:, f], side="left")]  # (n, used, w)
                if used.size == trees.size:
                    acc &= g
                else:
                    acc[:, used] &= g
            first = (acc != 0).argmax(2) if w > 1 else np.zeros(acc.shape[:2], dtype=np.intp)
            word = np.take_along_axis(acc, first[:, :, None], 2)[:, :, 0] if w > 1 else acc[:, :, 0]
            lowest = word & (~word + np.uint64(1))  # isolate the lowest set bit
            rank = np.frexp(lowest.astype(np.float64))[1] - 1 + WORD * first  # exact: powers of two
            out[:, trees] = values[np.arange(trees.size)[None, :], rank]
        return out
