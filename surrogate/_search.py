"""Searches over an engine (the surrogate by default): 2-D maps, critical dimensions, constrained
search over many candidates, and Monte Carlo growth spread. Plain numpy; every function takes
``predict``, a callable mapping design columns to output columns (``surrogate.predict``,
``surrogate.deplete``, a solver wrapper ...)."""

from __future__ import annotations

import numpy as np

from ._design import NUMERIC, REGIMES

LOG_COLUMNS = ("core_radius_nm", "shell_thickness_nm", "core_doping_cm3", "shell_doping_cm3", "dit_cm2eV")
CRITICAL_GRID = 1200  #: points of the dense scan of a critical dimension
CRITICAL_BISECT = 40  #: bisection steps between the last failing and first holding grid points


def axis(column: str, lo: float, hi: float, n: int) -> np.ndarray:
    """n values of a design variable from lo to hi, log-spaced for radii, dopings and D_it."""
    if column in LOG_COLUMNS and lo > 0:
        return np.geomspace(lo, hi, n)
    return np.linspace(lo, hi, n)


def grid(base: dict, xcol: str, xs, ycol: str, ys) -> dict:
    """Designs on the grid xs x ys (row-major in y, then x) with the rest of ``base`` fixed."""
    X, Y = np.meshgrid(np.asarray(xs, dtype=float), np.asarray(ys, dtype=float))
    d = {k: v for k, v in base.items() if k not in (xcol, ycol)}
    d[xcol], d[ycol] = X.ravel(), Y.ravel()
    return d


def meets(out: dict, vbi_min=None, fraction_min=None, bound: str = "value") -> np.ndarray:
    """Rows that keep V_bi >= vbi_min [V] and/or V_bi >= fraction_min * V_bi0 [1].
    ``bound``: "value" (the estimate), "low" or "high" (the interval's ends, where given)."""
    v = np.asarray(out["vbi_V"], dtype=float)
    if bound != "value":  # rows another engine answered without an interval keep their value
        end = np.asarray(out.get(f"vbi_{bound}_V", v), dtype=float)
        v = np.where(np.isnan(end), v, end)
    ok = out["status"] == "ok"
    with np.errstate(invalid="ignore"):
        if vbi_min is not None:
            ok &= v >= vbi_min
        if fraction_min is not None:
            ok &= v >= fraction_min * out["vbi0_V"]
    return ok


def critical(predict, base: dict, column: str, lo: float, hi: float, vbi_min=None, fraction_min=0.9,
             points: int = CRITICAL_GRID, decreasing: bool = False, accept=None, intervals: bool = True) -> dict:
    """Smallest value of ``column`` in [lo, hi] from which on V_bi stays >= the target (with
    ``decreasing``: the largest value up to which it does, e.g. an interlayer that eats the shell).

    Dense scan of ``points`` values, then bisection between the last failing and the first
    holding scan point. Returns ``value`` (nan if no value in the range holds, lo if all do;
    hi with ``decreasing``), the range ``optimistic``..``conservative`` given by the interval's
    ends where the engine gives intervals, and the answer at the critical value. Assumes the
    target is met on one side of a single threshold in the range (reported in ``monotone``).
    ``accept(out, bound)``, if given, replaces the V_bi target: rows [bool] that hold.
    ``intervals=False`` skips the interval scans (``optimistic`` = ``conservative`` = ``value``)."""
    xs = axis(column, lo, hi, points)
    if decreasing:
        xs = xs[::-1]
    held = accept or (lambda out, bound: meets(out, vbi_min, fraction_min, bound))

    out = predict({**base, column: xs})  # one scan; the interval ends are read from it below
    ok = held(out, "value")
    fails = np.flatnonzero(~ok)
    res = {"column": column, "monotone": bool(fails.size == 0 or ok[: fails[-1] + 1].sum() == 0)}
    if fails.size == 0:
        res["value"] = float(xs[0])
    elif fails[-1] == xs.size - 1:
        res["value"] = float("nan")
    else:
        a, b = xs[fails[-1]], xs[fails[-1] + 1]
        for _ in range(CRITICAL_BISECT):
            m = np.sqrt(a * b) if column in LOG_COLUMNS else 0.5 * (a + b)
            if held(predict({**base, column: [m]}), "value")[0]:
                b = m
            else:
                a = m
        res["value"] = float(b)
    for bound, key in (("high", "optimistic"), ("low", "conservative")) if intervals else ():
        okb = held(out, bound)  # the same scan, read at the interval's end (no second evaluation)
        f = np.flatnonzero(~okb)
        res[key] = float(xs[0]) if f.size == 0 else (float("nan") if f[-1] == xs.size - 1 else float(xs[f[-1] + 1]))
    if not intervals:
        res["optimistic"] = res["conservative"] = res["value"]
    if np.isfinite(res["value"]):
        at = predict({**base, column: [res["value"]]})
        res["answer"] = {k: (v[0].item() if hasattr(v[0], "item") else v[0]) for k, v in at.items()}
    return res


def candidates(space: dict, fixed: dict, n: int, seed: int = 0) -> dict:
    """n random designs: each column of ``space`` (column -> (lo, hi)) drawn uniformly, in log
    for radii, dopings and D_it; ``fixed`` columns held."""
    rng = np.random.default_rng(seed)
    d = dict(fixed)
    for col, (lo, hi) in space.items():
        u = rng.random(n)
        d[col] = 10 ** (np.log10(lo) + u * np.log10(hi / lo)) if col in LOG_COLUMNS else lo + u * (hi - lo)
    return d


def objective(designs: dict, name: str) -> np.ndarray:
    """Objective values to minimise: total_radius, core_radius, shell_thickness, or -vbi."""
    a = np.asarray(designs["core_radius_nm"], dtype=float)
    t = np.asarray(designs["shell_thickness_nm"], dtype=float)
    return {"total-radius": a + t, "core-radius": a + 0 * t, "shell-thickness": t + 0 * a}[name]


def spread_samples(nominal: dict, spreads: dict, n: int, seed: int = 0) -> dict:
    """Monte Carlo designs around ``nominal``. ``spreads``: column -> (kind, size, relative)
    with kind "normal" (size = one standard deviation) or "uniform" (size = half width);
    relative sizes are fractions of the nominal value; radii, dopings and D_it spread in log
    (a relative spread s means a factor exp(s)), the rest linearly. Values are kept inside
    the column's allowed range."""
    rng = np.random.default_rng(seed)
    d = {k: v for k, v in nominal.items()}
    for col, (kind, size, relative) in spreads.items():
        x0 = float(nominal[col])
        z = rng.standard_normal(n) if kind == "normal" else rng.uniform(-1.0, 1.0, n)
        if col in LOG_COLUMNS and x0 > 0:
            s = size if relative else np.log1p(size / x0)
            x = x0 * np.exp(s * z)
        else:
            x = x0 + (size * abs(x0) if relative else size) * z
        lo, hi = NUMERIC[col][:2]
        d[col] = np.clip(x, lo, hi)
    return d


def standard_scores(samples: dict, nominal: dict, spreads: dict) -> dict:
    """Each spread variable's deviation from nominal in units of its spread (log for radii,
    dopings and D_it with relative spreads, as drawn by ``spread_samples``)."""
    z = {}
    for col, (kind, size, relative) in spreads.items():
        x0, x = float(nominal[col]), np.asarray(samples[col], dtype=float)
        if col in LOG_COLUMNS and x0 > 0:
            s = size if relative else np.log1p(size / x0)
            z[col] = np.log(x / x0) / s
        else:
            z[col] = (x - x0) / (size * abs(x0) if relative else size)
    return z


def regime_probabilities(out: dict) -> dict:
    ok = out["status"] == "ok"
    return {r: float((out["regime"][ok] == r).mean()) if ok.any() else float("nan") for r in REGIMES}


def main_effects(samples: dict, columns, success: np.ndarray, bins: int = 20) -> dict:
    """First-order (main-effect) share of the variance of ``success`` explained by each column:
    Var(E[success | x_i]) / Var(success), estimated by quantile binning (Saltelli et al., Global
    Sensitivity Analysis: The Primer, Wiley 2008, sec. 1.2.5). No runs: NaN for every column."""
    y = success.astype(float)
    if not y.size:
        return {col: float("nan") for col in columns}
    var = y.var()
    out = {}
    for col in columns:
        x = np.asarray(samples[col], dtype=float)
        if var == 0 or np.ptp(x) == 0:
            out[col] = 0.0
            continue
        edges = np.quantile(x, np.linspace(0, 1, bins + 1))
        idx = np.clip(np.searchsorted(edges, x, side="right") - 1, 0, bins - 1)
        counts = np.bincount(idx, minlength=bins)
        means = np.bincount(idx, weights=y, minlength=bins) / np.maximum(counts, 1)
        out[col] = float(np.sum(counts * (means - y.mean()) ** 2) / y.size / var)
    return out
