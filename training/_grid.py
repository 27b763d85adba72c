"""Radial grids for the reference solver: graded, with nodes exactly on the material interfaces.

The node density is 1/h(r) with h(r) = min(h0_k + g d_k(r), h_max), d_k the distance to the
nearest *edge* k (axis, depletion edges of the depletion approximation, interfaces, surface)
and h0_k a spacing chosen per edge (about the Debye length of the doping there): fine where the
charge density changes, coarse in between. The cumulative
density and its inverse are closed-form, so the grid costs no auxiliary mesh. The total node
count is fixed (batches share a shape); nodes are spread uniformly in cumulative density within
each of the regions core [0, a], interlayer [a, b], shell [b, R], so a and b are nodes.
"""

from __future__ import annotations

import numpy as np

GROWTH = 0.10  #: g: spacing grows by this much per unit distance from an edge [1]
MIN_REGION_NODES = 6  #: at least this many intervals in every region of non-zero width


def _G(d, h0, g, dstar, hmax):
    """Cumulative node density from an edge out to distance d."""
    dd = np.minimum(d, dstar)
    return np.log1p(g * dd / h0) / g + np.maximum(d - dstar, 0.0) / hmax


def _G_inv(w, h0, g, dstar, hmax):
    wstar = np.log1p(g * dstar / h0) / g
    return np.where(w <= wstar, h0 * np.expm1(g * np.minimum(w, wstar)) / g, dstar + (w - wstar) * hmax)


def graded_grid(edges, h0, a, b, R, hmax, nodes: int):
    """Nodes r (nodes, B) [m] from 0 to R for B designs.

    ``edges`` (K, B) [m]: radii to refine around, clipped to [0, R]; they should include 0, a,
    b and R. ``h0`` (K, B) [m]: the spacing wanted at each edge (the Debye length of the
    doping there, say); ``hmax`` (B) [m]: largest spacing. The realised spacing is these
    scaled by one factor per design so that exactly ``nodes`` nodes result.
    """
    B = a.shape[0]
    order = np.argsort(np.clip(edges, 0.0, R), axis=0)
    e = np.take_along_axis(np.clip(edges, 0.0, R), order, axis=0)
    h = np.take_along_axis(h0, order, axis=0)
    g = GROWTH
    hm = hmax[None, :]
    # half interval 2k belongs to edge k (going right), 2k+1 to edge k+1 (going left)
    hh = np.empty((2 * (e.shape[0] - 1), B))
    hh[0::2], hh[1::2] = h[:-1], h[1:]
    hh = np.minimum(hh, hm)
    ds = (hm - hh) / g
    half = np.repeat(0.5 * np.diff(e, axis=0), 2, axis=0)
    C = np.vstack([np.zeros(B), np.cumsum(_G(half, hh, g, ds, hm), axis=0)])
    cols = np.arange(B)

    def W(r):  # cumulative density at radius r (B,)
        k = np.clip((r[None, :] >= e[1:]).sum(0), 0, e.shape[0] - 2)  # interval index
        hk = half[2 * k, cols]
        d = r - e[k, cols]
        left = C[2 * k, cols] + _G(d, hh[2 * k, cols], g, ds[2 * k, cols], hmax)
        right = C[2 * k + 2, cols] - _G(np.maximum(2 * hk - d, 0.0), hh[2 * k + 1, cols], g, ds[2 * k + 1, cols], hmax)
        return np.where(d <= hk, left, right)

    Wa, Wb, WR = W(a), W(b), C[-1]
    # node counts per region: proportional to density, at least MIN_REGION_NODES where width > 0
    m = nodes - 1
    has_i = b > a
    k_a = np.clip(np.rint(m * Wa / WR), MIN_REGION_NODES, m - MIN_REGION_NODES * (1 + has_i)).astype(int)
    k_b = np.where(has_i, np.clip(np.rint(m * Wb / WR), k_a + MIN_REGION_NODES, m - MIN_REGION_NODES), k_a).astype(int)
    k = np.arange(nodes)[:, None]
    T = np.where(k <= k_a, Wa * k / k_a,
                 np.where(k <= k_b, Wa + (Wb - Wa) * (k - k_a) / np.maximum(k_b - k_a, 1),
                          Wb + (WR - Wb) * (k - k_b) / (m - k_b)))
    # invert W: locate the half interval of each target, then the closed-form inverse
    j = np.clip((T[None, :, :] >= C[1:, None, :]).sum(0), 0, C.shape[0] - 2)  # (nodes, B)
    cc = np.broadcast_to(cols, j.shape)
    interval = j // 2
    args = (hh[j, cc], g, ds[j, cc], hm)
    r = np.where(j % 2 == 0, e[interval, cc] + _G_inv(np.maximum(T - C[j, cc], 0.0), *args),
                 e[interval + 1, cc] - _G_inv(np.maximum(C[j + 1, cc] - T, 0.0), *args))
    r[0], r[-1] = 0.0, R
    r[k_a, cols] = a
    r[k_b, cols] = b
    return np.maximum.accumulate(r, axis=0)
