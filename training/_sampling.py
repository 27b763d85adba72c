"""Where training designs go: scrambled Sobol points in the transformed unit cube, uniform
draws for held-out sets, and refinement rounds that add points near regime boundaries.

Sobol: scipy.stats.qmc.Sobol (Owen scrambling; Joe & Kuo direction numbers, SIAM J. Sci.
Comput. 30, 2635 (2008), doi:10.1137/070709359). Refinement: a k-nearest-neighbour vote in the
unit cube (scipy.spatial.cKDTree); a point with a neighbour of another regime has a boundary
crossing the segment between them, and a new point is drawn on that segment (uniformly in its
middle ``REFINE_SPAN``, jittered by ``REFINE_JITTER`` of its length), so each round roughly
halves the distance of the sample to the boundaries. Every draw is seeded, so the same spec and
the same solver results give the same points.
"""

from __future__ import annotations

import warnings

import numpy as np

REFINE_NEIGHBOURS = 8  #: k of the neighbour vote
REFINE_SPAN = (0.25, 0.75)  #: where on a disagreeing pair's segment a new point goes
REFINE_JITTER = 0.05  #: normal jitter per coordinate, as a fraction of the segment length


def sobol_points(n: int, d: int, seed: int) -> np.ndarray:
    """n scrambled Sobol points in [0, 1)^d (the first n of the sequence)."""
    from scipy.stats import qmc

    with warnings.catch_warnings():  # balance warning for n not a power of two: we take a prefix
        warnings.simplefilter("ignore", UserWarning)
        return qmc.Sobol(d, scramble=True, seed=np.random.default_rng(seed)).random(n)


def uniform_points(n: int, d: int, seed: int) -> np.ndarray:
    """n independent uniform points in [0, 1)^d."""
    return np.random.default_rng(seed).random((n, d))


def _neighbours(unit, k):
    from scipy.spatial import cKDTree

    k = min(k, len(unit) - 1)
    return cKDTree(unit).query(unit, k=k + 1)[1][:, 1:]


def boundary_mask(unit: np.ndarray, labels: np.ndarray, k: int = REFINE_NEIGHBOURS) -> np.ndarray:
    """Points whose k nearest neighbours do not all share their label."""
    return (labels[_neighbours(unit, k)] != labels[:, None]).any(axis=1)


def boundary_distance(unit: np.ndarray, labels: np.ndarray) -> np.ndarray:
    """Distance of each point to the nearest point of another label (unit-cube metric)."""
    from scipy.spatial import cKDTree

    d = np.full(len(unit), np.inf)
    for lab in np.unique(labels):
        m = labels == lab
        if (~m).any():
            d[m] = cKDTree(unit[~m]).query(unit[m])[0]
    return d


def refinement_points(unit: np.ndarray, labels: np.ndarray, n: int, seed: int) -> np.ndarray:
    """n new points near the regime boundaries seen in (unit, labels); uniform points where no
    boundary has been seen yet."""
    rng = np.random.default_rng(seed)
    nb = _neighbours(unit, REFINE_NEIGHBOURS)
    pi, pj = np.nonzero(labels[nb] != labels[:, None])  # disagreeing (point, neighbour) pairs
    if pi.size == 0:
        return rng.random((n, unit.shape[1]))
    pick = rng.integers(0, pi.size, n)
    a, b = unit[pi[pick]], unit[nb[pi[pick], pj[pick]]]
    t = rng.uniform(*REFINE_SPAN, size=(n, 1))
    length = np.linalg.norm(b - a, axis=1, keepdims=True)
    jitter = rng.normal(size=a.shape) * REFINE_JITTER * length
    return np.clip(a + t * (b - a) + jitter, 0.0, 1.0 - 1e-12)
