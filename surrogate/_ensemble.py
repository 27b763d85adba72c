"""An affine-invariant ensemble sampler (the stretch move) and its convergence diagnostics, in
numpy, batched over independent ensembles.

Stretch move (Goodman & Weare 2010, Commun. Appl. Math. Comput. Sci. 5, 65,
doi:10.2140/camcos.2010.5.65, eq. 7 and 9): walker X_k moves to Y = X_j + Z (X_k - X_j), X_j a
walker of the complementary half-ensemble, Z drawn from g(z) ~ 1/sqrt(z) on [1/a, a], and is
accepted with probability min(1, Z^(d-1) p(Y) / p(X_k)). The ensemble is split into two halves
updated in turn (the parallel form of Foreman-Mackey et al. 2013, PASP 125, 306,
doi:10.1086/670067, sec. 3), so one call of the log density answers half the walkers at once.

``sample`` runs ``E`` independent ensembles side by side (array shape ``(E, W, d)``); partners
are always drawn from the same ensemble, so the ensembles never mix. Several inferences that
share one model table (simulation-based calibration, a series measured twice) run in one
vectorised loop.

Diagnostics: split-R-hat over walkers as chains (Gelman et al., Bayesian Data Analysis, 3rd ed.,
2013, eq. 11.4, with the split of Vehtari et al. 2021, Bayesian Analysis 16, 667,
doi:10.1214/20-BA1221, sec. 3, without their rank normalisation) and the integrated
autocorrelation time of the ensemble-mean chain (Sokal's automatic window, c = 5; Goodman &
Weare 2010 sec. 3).
"""

from __future__ import annotations

import numpy as np

STRETCH_A = 2.0  #: the stretch scale a of g(z); 2 is Goodman & Weare's choice
AUTOCORR_WINDOW_C = 5.0  #: Sokal's window constant: sum lags up to M >= c * tau


def sample(log_prob, start, steps: int, rng, a: float = STRETCH_A):
    """Stretch-move chains.

    ``log_prob(x)``: x [..., d] of shape (E, m, d) -> (E, m) log density (-inf outside the
    support). ``start``: (E, W, d) or (W, d) initial walkers, W even and >= 2 d (all with
    finite log density). ``steps``: number of ensemble updates. Returns ``chain`` (steps, E, W,
    d), ``log_p`` (steps, E, W) and ``acceptance`` (E,): the mean acceptance fraction."""
    x = np.array(start, dtype=float)
    squeeze = x.ndim == 2
    if squeeze:
        x = x[None]
    E, W, d = x.shape
    if W % 2 or W < 2 * d:
        raise ValueError(f"walkers: an even number >= 2 * dimensions ({2 * d}) (got {W})")
    lp = np.asarray(log_prob(x), dtype=float)
    if not np.isfinite(lp).all():
        raise ValueError("start: every walker needs a finite log density")
    chain = np.empty((steps, E, W, d))
    lps = np.empty((steps, E, W))
    accepted = np.zeros(E)
    half = W // 2
    halves = (np.arange(half), np.arange(half, W))
    e_idx = np.arange(E)[:, None]
    for s in range(steps):
        for h in (0, 1):
            mine, other = halves[h], halves[1 - h]
            z = ((a - 1.0) * rng.random((E, half)) + 1.0) ** 2 / a  # inverse CDF of g(z) ~ 1/sqrt(z)
            partner = other[rng.integers(0, half, (E, half))]
            xj = x[e_idx, partner]
            xk = x[:, mine]
            y = xj + z[..., None] * (xk - xj)
            lpy = np.asarray(log_prob(y), dtype=float)
            with np.errstate(invalid="ignore"):
                log_ratio = (d - 1.0) * np.log(z) + lpy - lp[:, mine]
            take = np.log(rng.random((E, half))) < np.where(np.isnan(log_ratio), -np.inf, log_ratio)
            x[:, mine] = np.where(take[..., None], y, xk)
            lp[:, mine] = np.where(take, lpy, lp[:, mine])
            accepted += take.sum(1)
        chain[s], lps[s] = x, lp
    acc = accepted / (steps * W)
    if squeeze:
        return chain[:, 0], lps[:, 0], acc[0]
    return chain, lps, acc


def split_rhat(chains) -> np.ndarray:
    """Split-R-hat [1] of each parameter. ``chains``: (n, m, d): n draws of m chains (walkers).
    Each chain is cut in two halves (Vehtari et al. 2021, sec. 3); R-hat = sqrt(var+ / W) with
    var+ = (n'-1)/n' W + B/n' (BDA3 eq. 11.3-11.4). Values near 1 (below ~1.01-1.05) mean the
    chains agree."""
    c = np.asarray(chains, dtype=float)
    n = c.shape[0] // 2
    c = np.concatenate([c[:n], c[n:2 * n]], axis=1)  # (n, 2m, d)
    means = c.mean(0)
    within = c.var(0, ddof=1).mean(0)
    between = n * means.var(0, ddof=1)
    var_plus = (n - 1) / n * within + between / n
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.sqrt(var_plus / within)


def autocorr_time(chains) -> np.ndarray:
    """Integrated autocorrelation time [steps] of each parameter, from the mean over walkers of
    the normalised autocorrelation function (FFT), summed up to Sokal's automatic window: the
    smallest M with M >= c * tau(M). ``chains``: (n, m, d)."""
    c = np.asarray(chains, dtype=float)
    n = c.shape[0]
    x = c - c.mean(0)
    size = 1 << int(np.ceil(np.log2(2 * n)))
    f = np.fft.rfft(x, n=size, axis=0)
    acf = np.fft.irfft(f * np.conj(f), n=size, axis=0)[:n]
    with np.errstate(divide="ignore", invalid="ignore"):
        acf = (acf / acf[0]).mean(1)  # (n, d)
    taus = 2.0 * np.cumsum(acf, axis=0) - 1.0
    out = np.empty(c.shape[2])
    for k in range(c.shape[2]):
        ok = np.arange(n) >= AUTOCORR_WINDOW_C * taus[:, k]
        out[k] = taus[np.argmax(ok), k] if ok.any() else taus[-1, k]
    return out
