"""Calibration: infer surface-state density, neutral level and dopings of grown wires from
measurements on a series, with credible intervals.

Observations are rows of the design table (the known design of each measured wire) plus
observed columns: continuous ``vbi_V``, ``surface_bending_V``, ``core_neutral_radius_nm``,
``shell_neutral_nm``, each with its 1-sigma uncertainty in ``<name>_sigma``; categorical
``regime`` (one of the four regimes) or yes/no ``shell_keeps_neutral``, ``core_keeps_neutral``.
A blank cell is "not measured".

Posterior p(theta | y) ~ p(theta) prod_i L_i(theta), with, per wire i and observed quantity,

  continuous  N(y; f(theta), s_meas^2 + s_model^2)      s_model: the engine's own V_bi interval
                                                          (surrogate: 95 % half width / 1.96) or
                                                          ``MODEL_SD`` (its discrepancy to the solver)
  regime      (1 - lapse) P(regime | theta) + lapse / 4  P: the surrogate's regime probabilities
  yes/no      (1 - lapse) P(yes | theta) + lapse / 2     (depletion/solver: 0 or 1)

(the lapse rate covers a mislabelled wire and a model regime boundary slightly off; Wichmann &
Hill 2001, Perception & Psychophysics 63, 1293, doi:10.3758/BF03194544, eq. 1). f is read from
a table of the engine over the prior support (``_emulator``); the posterior is sampled by the
affine-invariant stretch move (``_ensemble``), walkers started from an importance resample of
prior draws. The reference solver re-checks the posterior median and ``RECHECK_DRAWS`` draws;
the critical shell thickness and core radius of a reference wire follow for ``CRITICAL_DRAWS``
draws.
"""

from __future__ import annotations

import math
import time

import numpy as np

from . import _ensemble
from ._design import INPUT_COLUMNS, REGIMES, _as_columns, _blank, normalize_designs
from ._emulator import COLUMNS, MODEL_SD, QUANTITIES, CalibrationError, Table
from ._engines import answer, check_engine, solve
from ._errors import DesignError
from ._materials import get_material
from ._priors import column_of, make_unknown

CONTINUOUS = ("vbi_V", "surface_bending_V", "core_neutral_radius_nm", "shell_neutral_nm")
FLAGS = {"shell_keeps_neutral": (0, 1), "core_keeps_neutral": (0, 2)}  #: yes/no -> regimes that say yes
LAPSE = {"surrogate": 0.01, "solver": 0.01, "depletion": 0.07}  #: depletion: 7 % regime disagreement with the solver
WALKERS_MIN = 32  #: walkers at least (and 4 per parameter)
STEPS = 1500  #: kept ensemble updates
BURN = 500  #: discarded ensemble updates
INIT_POOL = 64  #: prior draws per walker for the importance-resampled start
RHAT_OK = 1.05  #: split-R-hat below this counts as converged (Vehtari et al. 2021 advise 1.01 for final work)
RECHECK_DRAWS = 8
CRITICAL_DRAWS = 32
CRITICAL_POINTS = 64  #: log-spaced scan points of each critical dimension
CRITICAL_RANGES_NM = {"core_radius_nm": (10.0, 300.0), "shell_thickness_nm": (2.0, 300.0)}
CAUTION = ("Inferred values are model-dependent estimates (surface states uniform in energy about one neutral level, "
           "the reference solver's depletion statistics): confirm them by independent measurement before committing "
           "a growth campaign.")
_YES, _NO = ("yes", "y", "true", "1", "1.0"), ("no", "n", "false", "0", "0.0")


def _rows(observations):
    cols, n = _as_columns(observations)
    if n is None:
        lens = {len(v) for v in cols.values() if np.ndim(v) == 1}
        n = lens.pop() if len(lens) == 1 else 1
    return {k: (list(v) if np.ndim(v) == 1 else [v] * n) for k, v in cols.items()}, n


def _number(col, v, row):
    try:
        x = float(v)
    except (TypeError, ValueError):
        raise DesignError(col, f"expected a number in row {row + 1}", v) from None
    if not math.isfinite(x):
        raise DesignError(col, f"expected a finite number in row {row + 1}", v)
    return x


def read_observations(observations, unknown_columns):
    """(known designs as row dicts, observed arrays, n). Raises ``DesignError`` naming the column
    and row of the first bad cell."""
    cols, n = _rows(observations)
    if n < 1:
        raise DesignError("observations", "at least one row")
    design_cols = [c for c in INPUT_COLUMNS if c in cols]
    rows = [{c: cols[c][i] for c in design_cols} for i in range(n)]
    probe = []
    for r in rows:  # unknown columns may be blank: validate the rest with a stand-in value
        p = dict(r)
        for c in unknown_columns:
            if _blank(p.get(c)):
                p.pop(c, None) if c == "cnl_eV" else p.update({c: 1e12 if c == "dit_cm2eV" else 1e17})
        probe.append(p)
    table = normalize_designs(probe)
    bad = np.flatnonzero(table.status != "ok")
    if bad.size:
        raise DesignError(f"row {bad[0] + 1}", str(table.status[bad[0]]))
    for i, r in enumerate(rows):  # validated numbers (units read) in place of the cells as given
        for c in design_cols:
            if c == "material":
                r[c] = str(table.material[i])
            elif c == "core_type":
                r[c] = "p" if table.p_core[i] else "n"
            elif not (c in unknown_columns and _blank(r[c])):
                r[c] = float(table.values[c][i])
    obs = {}
    for q in CONTINUOUS:
        y, s = np.full(n, np.nan), np.full(n, np.nan)
        for i in range(n):
            v = cols.get(q, [None] * n)[i]
            if _blank(v):
                continue
            y[i] = _number(q, v, i)
            sv = cols.get(q + "_sigma", [None] * n)[i]
            if _blank(sv):
                raise DesignError(q + "_sigma", f"needed where {q} is observed (row {i + 1})", sv)
            s[i] = _number(q + "_sigma", sv, i)
            if not s[i] > 0:
                raise DesignError(q + "_sigma", f"must be > 0 (row {i + 1})", sv)
        obs[q] = (y, s)
    code = np.full(n, -1)
    for i, v in enumerate(cols.get("regime", [None] * n)):
        if not _blank(v):
            if str(v).strip() not in REGIMES:
                raise DesignError("regime", f"one of {', '.join(REGIMES)} or blank (row {i + 1})", v)
            code[i] = REGIMES.index(str(v).strip())
    obs["regime"] = code
    for f in FLAGS:
        flag = np.full(n, -1)
        for i, v in enumerate(cols.get(f, [None] * n)):
            if not _blank(v):
                t = str(v).strip().lower()
                if t not in _YES + _NO:
                    raise DesignError(f, f"yes or no (row {i + 1})", v)
                flag[i] = int(t in _YES)
        obs[f] = flag
    count = sum(int(np.isfinite(obs[q][0]).sum()) for q in CONTINUOUS) + int((code >= 0).sum())
    count += sum(int((obs[f] >= 0).sum()) for f in FLAGS)
    if count == 0:
        raise DesignError("observations", f"no observed column; give any of {', '.join(CONTINUOUS + ('regime',) + tuple(FLAGS))}")
    return rows, obs, n


def setup_unknowns(unknowns, rows):
    """Parameters and the table axes of each row. ``unknowns``: names, or a mapping name ->
    prior spec (None for the default; ``"per_row": True`` for one per row)."""
    if isinstance(unknowns, str):
        unknowns = [unknowns]
    if not isinstance(unknowns, dict):
        unknowns = {u: None for u in unknowns}
    if not unknowns:
        raise DesignError("unknowns", "name at least one (dit, cnl, shell-doping, core-doping)")
    params, names, dims = [], [], [[] for _ in rows]
    seen = set()
    for name, spec in unknowns.items():
        col = column_of(name)
        if col in seen:
            raise DesignError("unknowns", "each column once", name)
        seen.add(col)
        spec = dict(spec or {})
        per_row = bool(spec.pop("per_row", False))
        design = np.array([float(r[col]) if col in r and not _blank(r[col]) else math.nan for r in rows], dtype=float)
        cnl0 = [get_material(str(r.get("material", "GaAs"))).cnl_eV for r in rows]
        if per_row:
            for i in range(len(rows)):
                params.append(make_unknown(col, spec, design[i], cnl0[i], True))
                names.append(f"{col}[{i + 1}]")
                dims[i].append(len(params) - 1)
        else:
            if np.isfinite(design).any() and np.unique(design[np.isfinite(design)]).size > 1:
                raise DesignError(col, "the rows give different design values for a shared unknown; "
                                       "make it per-row or give one value", ", ".join(f"{v:g}" for v in np.unique(design)))
            if len(set(cnl0)) > 1 and col == "cnl_eV":
                raise DesignError("material", "one material per series for a shared neutral level", "several")
            params.append(make_unknown(col, spec, design[np.isfinite(design)][0] if np.isfinite(design).any()
                                       else math.nan, cnl0[0], False))
            names.append(col)
            for d in dims:
                d.append(len(params) - 1)
    return params, names, np.array(dims, dtype=np.int64)


class Posterior:
    """log p(theta | y) over a batch of E series sharing one table. theta: (E, m, P) in z."""

    def __init__(self, table: Table, params, obs_list, engine):
        self.table, self.params = table, params
        self.lapse = LAPSE[engine]
        self.sd = MODEL_SD[engine]
        stack = lambda get: np.stack([get(o) for o in obs_list])[:, None]  # noqa: E731  (E, 1, n)
        self.y = {q: stack(lambda o: o[q][0]) for q in CONTINUOUS}
        self.s = {q: stack(lambda o: o[q][1]) for q in CONTINUOUS}
        self.regime = stack(lambda o: o["regime"])
        self.flags = {f: stack(lambda o: o[f]) for f in FLAGS}

    def log_prior(self, theta):
        return sum(p.log_prior(theta[..., j]) for j, p in enumerate(self.params))

    def log_likelihood(self, theta):
        seen_q = [q for q in CONTINUOUS if np.isfinite(self.y[q]).any()]
        cols = [COLUMNS.index(c) for c in ("vbi_sd_V", "p_both", "p_core_depleted", "p_shell_depleted", "p_all_depleted")]
        cols += [COLUMNS.index(q) for q in seen_q] + [COLUMNS.index(q + "_interp_sd") for q in seen_q]
        v = self.table.interpolate(theta, cols)  # (E, m, n, len(cols))
        ll = np.zeros(v.shape[:-1])
        k = len(seen_q)
        for j, q in enumerate(seen_q):
            y, s = self.y[q], self.s[q]
            seen = np.isfinite(y)
            model, interp_sd = v[..., 5 + j], v[..., 5 + k + j]
            sd = v[..., 0] if q == "vbi_V" and self.sd["vbi_V"] is None else self.sd[q]
            var = s * s + sd * sd + interp_sd * interp_sd
            term = -0.5 * (np.where(seen, y, 0.0) - model) ** 2 / var - 0.5 * np.log(2 * np.pi * var)
            ll += np.where(seen, term, 0.0)
        probs = v[..., 1:5]
        if (self.regime >= 0).any():
            idx = np.broadcast_to(np.maximum(self.regime, 0)[..., None], probs.shape[:-1] + (1,))
            p = np.take_along_axis(probs, idx, -1)[..., 0]
            ll += np.where(self.regime >= 0, np.log((1 - self.lapse) * np.clip(p, 0, 1) + self.lapse / 4), 0.0)
        for f, yes_classes in FLAGS.items():
            flag = self.flags[f]
            if (flag >= 0).any():
                p_yes = probs[..., list(yes_classes)].sum(-1)
                p = np.where(flag == 1, p_yes, 1.0 - p_yes)
                ll += np.where(flag >= 0, np.log((1 - self.lapse) * np.clip(p, 0, 1) + self.lapse / 2), 0.0)
        total = ll.sum(-1)
        return np.where(np.isnan(total), -np.inf, total)

    def __call__(self, theta):
        """log prior + log likelihood; -inf outside the support (the table clips there)."""
        with np.errstate(invalid="ignore", divide="ignore"):
            lp = self.log_prior(theta)
            return np.where(np.isfinite(lp), lp + self.log_likelihood(theta), -np.inf)


def start_walkers(post: Posterior, E: int, W: int, rng):
    """W walkers per series: prior draws resampled without replacement by their likelihood
    (Gumbel top-k: Kool et al. 2019, ICML, arXiv:1903.06059)."""
    K = INIT_POOL * W
    pool = np.stack([p.draw(rng, E * K).reshape(E, K) for p in post.params], -1)
    lp = post(pool)
    key = np.where(np.isfinite(lp), lp, -np.inf) + rng.gumbel(size=lp.shape)
    pick = np.argsort(-key, axis=1)[:, :W]
    start = np.take_along_axis(pool, pick[..., None], 1)
    if not np.isfinite(np.take_along_axis(lp, pick, 1)).all():
        raise CalibrationError("observations: the model gives no answer consistent with them anywhere in the prior "
                               "support; check units and sigmas, or widen the priors")
    return start


def _summary(params, names, draws_z, chain_z, acceptance):
    values = np.column_stack([p.to_value(draws_z[:, j]) for j, p in enumerate(params)])
    pct = np.percentile(values, [2.5, 16, 50, 84, 97.5], axis=0)
    rhat = _ensemble.split_rhat(chain_z)
    tau = _ensemble.autocorr_time(chain_z)
    unknowns = []
    for j, p in enumerate(params):
        unknowns.append({"name": names[j], "column": p.column, "prior": p.describe(), "per_row": p.per_row,
                         "median": float(pct[2, j]), "ci68": (float(pct[1, j]), float(pct[3, j])),
                         "ci95": (float(pct[0, j]), float(pct[4, j])), "rhat": float(rhat[j]),
                         "autocorr_steps": float(tau[j]), "log_scale": p.log})
    corr = np.corrcoef(draws_z.T) if len(params) > 1 else np.ones((1, 1))
    n_draws = chain_z.shape[0] * chain_z.shape[1]
    tau_max = float(np.max(tau))
    diag = {"rhat_max": float(np.max(rhat)), "autocorr_max_steps": tau_max,
            "effective_draws_min": float(chain_z.shape[0] * chain_z.shape[1] / max(tau_max, 1.0)),
            "acceptance": float(acceptance), "walkers": int(chain_z.shape[1]), "steps": int(chain_z.shape[0]),
            "converged": bool(np.max(rhat) < RHAT_OK and chain_z.shape[0] > 20 * tau_max)}
    return {"unknowns": unknowns, "names": list(names), "correlation": corr, "samples": values, "diagnostics": diag}


def _designs_at(rows, params, dims, thetas):
    """Design rows for each theta (k, P) in z: list over k of column -> array (n rows)."""
    out = []
    for th in thetas:
        d = {c: [r[c] for r in rows] for c in rows[0]}
        for k in range(dims.shape[1]):
            col = params[dims[0, k]].column
            d[col] = [float(params[j].to_value(th[j])) for j in dims[:, k]]
        out.append(d)
    return {c: np.concatenate([np.asarray(d[c], dtype=object if c in ("material", "core_type") else float)
                               for d in out]) for c in out[0]}


def recheck(rows, params, dims, obs, draws_z, median_z, table, statistics, rng):
    """The reference solver at the posterior median and ``RECHECK_DRAWS`` draws: standardised
    residuals of the continuous observations (measurement sigma only), regime/yes-no agreement,
    and the largest V_bi difference between the tabulated engine and the solver."""
    pick = draws_z[rng.choice(len(draws_z), RECHECK_DRAWS, replace=False)]
    thetas = np.vstack([median_z[None], pick])
    n = len(rows)
    t0 = time.perf_counter()
    ref = solve(_designs_at(rows, params, dims, thetas), statistics)
    seconds = time.perf_counter() - t0
    emu = table.interpolate(thetas)  # (k, n, Q)
    z2, agree, total = [], 0, 0
    for k in range(len(thetas)):
        sl = slice(k * n, (k + 1) * n)
        res = [((ref[q][sl] - obs[q][0]) / obs[q][1]) for q in CONTINUOUS]
        z = np.concatenate([r[np.isfinite(r)] for r in res])
        z2.append(float(np.mean(z ** 2)) if z.size else math.nan)
        reg = np.asarray(ref["regime"][sl])
        m = obs["regime"] >= 0
        a_k = int((reg[m] == np.array(REGIMES, dtype=object)[obs["regime"][m]]).sum())
        t_k = int(m.sum())
        for f, yes in FLAGS.items():
            m = obs[f] >= 0
            said = np.isin(reg[m], [REGIMES[c] for c in yes]).astype(int)
            a_k += int((said == obs[f][m]).sum())
            t_k += int(m.sum())
        if k == 0:
            med_agree, med_total = a_k, t_k
        agree, total = agree + a_k, total + t_k
    dv = np.abs(ref["vbi_V"].reshape(len(thetas), n) - emu[..., 0])
    return {"points": len(thetas), "median_mean_z2": z2[0], "draws_mean_z2": float(np.nanmean(z2[1:])),
            "median_labels_matched": (med_agree, med_total), "draws_labels_matched": (agree - med_agree, total - med_total),
            "max_vbi_difference_V": float(np.nanmax(dv)) if np.isfinite(dv).any() else math.nan,
            "solver_failed": int((ref["status"] != "ok").sum()), "seconds": seconds}


def critical(rows, params, dims, draws_z, median_z, reference_row, engine, statistics, fraction_min, rng):
    """Critical core radius (shell fixed) and shell thickness (core fixed) of wire
    ``reference_row`` [nm]: the smallest value from which on V_bi >= fraction_min V_bi0 over a
    log scan (``CRITICAL_POINTS``), interpolated between the bracketing points; at the median
    and ``CRITICAL_DRAWS`` draws."""
    pick = draws_z[rng.choice(len(draws_z), min(CRITICAL_DRAWS, len(draws_z)), replace=False)]
    thetas = np.vstack([median_z[None], pick])
    ref = rows[reference_row]
    base = _designs_at([ref], params, dims[[reference_row]], thetas)  # one row per theta
    k = len(thetas)
    out = {"reference_row": reference_row + 1, "fraction_min": fraction_min}
    for col, (lo, hi) in CRITICAL_RANGES_NM.items():
        xs = np.geomspace(lo, hi, CRITICAL_POINTS)
        d = {c: np.repeat(v, CRITICAL_POINTS) for c, v in base.items()}
        d[col] = np.tile(xs, k)
        res = answer(d, engine, statistics)
        g = (res["vbi_V"] - fraction_min * res["vbi0_V"]).reshape(k, CRITICAL_POINTS)
        meets = np.where(np.isfinite(g), g >= 0, False)
        vals = np.full(k, np.nan)
        for j in range(k):
            if not meets[j, -1]:
                continue
            fail = np.flatnonzero(~meets[j])
            if fail.size == 0:
                vals[j] = lo
                continue
            i = fail[-1]
            g0, g1 = g[j, i], g[j, i + 1]
            w = g0 / (g0 - g1) if np.isfinite(g0) and g0 != g1 else 1.0
            vals[j] = float(np.exp(np.log(xs[i]) + min(max(w, 0.0), 1.0) * (np.log(xs[i + 1]) - np.log(xs[i]))))
        dr = vals[1:]
        fin = dr[np.isfinite(dr)]
        pct = np.percentile(fin, [2.5, 16, 50, 84, 97.5]) if fin.size else np.full(5, np.nan)
        out[col] = {"at_median_nm": float(vals[0]), "median_nm": float(pct[2]), "ci68_nm": (float(pct[1]), float(pct[3])),
                    "ci95_nm": (float(pct[0]), float(pct[4])), "none_holds": float(np.mean(~np.isfinite(dr))),
                    "scan_nm": (lo, hi), "fixed_nm": float(ref["shell_thickness_nm" if col == "core_radius_nm"
                                                              else "core_radius_nm"])}
    return out


def _run_batch(rows, obs_list, params, names, dims, engine, statistics, walkers, steps, burn, seed, recheck_solver,
               critical_dims, reference_row, fraction_min, progress):
    t0 = time.perf_counter()
    rng = np.random.default_rng(seed)
    table = Table(rows, params, dims, engine, statistics, progress=progress)
    t_table = time.perf_counter() - t0
    post = Posterior(table, params, obs_list, engine)
    P = len(params)
    W = walkers if walkers is not None else max(WALKERS_MIN, 4 * P + (4 * P) % 2)
    if W % 2 or W < 2 * P:
        raise DesignError("walkers", f"an even number >= {2 * P}", W)
    start = start_walkers(post, len(obs_list), W, rng)
    chain, _, acc = _ensemble.sample(post, start, burn + steps, rng)
    chain = chain[burn:]  # (steps, E, W, P)
    t_sample = time.perf_counter() - t0 - t_table
    results = []
    for e, obs in enumerate(obs_list):
        ce = chain[:, e]
        draws = ce.reshape(-1, P)
        out = _summary(params, names, draws, ce, acc[e])
        median_z = np.median(draws, axis=0)
        if recheck_solver:
            out["recheck"] = recheck(rows, params, dims, obs, draws, median_z, table, statistics, rng)
        if critical_dims:
            out["critical"] = critical(rows, params, dims, draws, median_z, reference_row, engine, statistics,
                                       fraction_min, rng)
        out.update(engine=engine, statistics=statistics, wires=len(rows), caution=CAUTION,
                   observations=_count(obs), table_rows=table.n * table.nodes,
                   seconds={"table": t_table, "sampling": t_sample / len(obs_list)})
        results.append(out)
    for out in results:
        out["seconds"]["total"] = time.perf_counter() - t0
    return results


def _count(obs):
    c = {q: int(np.isfinite(obs[q][0]).sum()) for q in CONTINUOUS}
    c["regime"] = int((obs["regime"] >= 0).sum())
    c.update({f: int((obs[f] >= 0).sum()) for f in FLAGS})
    return {k: v for k, v in c.items() if v}


def _check_options(engine, steps, burn, reference_row, n, fraction_min):
    check_engine(engine)
    if engine not in LAPSE:  # the model table needs one engine over the whole prior support
        raise DesignError("engine", f"one of {', '.join(LAPSE)} for calibration", engine)
    for name, v, lo in (("steps", steps, 50), ("burn", burn, 0)):
        if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or not lo <= v <= 1_000_000:
            raise DesignError(name, f"a whole number in [{lo}, 1000000]", v)
    if isinstance(reference_row, bool) or not isinstance(reference_row, (int, np.integer)) or not 1 <= reference_row <= n:
        raise DesignError("reference_row", f"a row number in [1, {n}]", reference_row)
    if not (isinstance(fraction_min, (int, float)) and 0 < fraction_min <= 1):
        raise DesignError("fraction_min", "allowed range (0, 1]", fraction_min)


def calibrate(observations, unknowns, engine="surrogate", statistics="fermi-dirac", walkers=None, steps=STEPS,
              burn=BURN, seed=0, recheck=True, critical=True, reference_row=1, fraction_min=0.9, progress=None):
    """Posterior of ``unknowns`` given one measured series (see ``calibrate_many`` for many)."""
    rows, obs, n = read_observations(observations, [column_of(u) for u in _names(unknowns)])
    _check_options(engine, steps, burn, reference_row, n, fraction_min)
    params, names, dims = setup_unknowns(unknowns, rows)
    return _run_batch(rows, [obs], params, names, dims, engine, statistics, walkers, steps, burn, seed, recheck,
                      critical, reference_row - 1, fraction_min, progress)[0]


def _names(unknowns):
    if isinstance(unknowns, str):
        return [unknowns]
    return list(unknowns)


def calibrate_many(observations, unknowns, by="series", **options):
    """``calibrate`` for each group of rows sharing a value of column ``by``, in order of first
    appearance. Groups with the same known designs share one model table and one vectorised
    sampler run (simulation-based calibration, repeated measurements)."""
    cols, n = _rows(observations)
    if by not in cols:
        raise DesignError(by, "a column naming the series of each row")
    keys = [str(v) for v in cols[by]]
    order = list(dict.fromkeys(keys))
    groups = {k: [i for i in range(n) if keys[i] == k] for k in order}
    parts = {k: {c: [v[i] for i in idx] for c, v in cols.items() if c != by} for k, idx in groups.items()}
    engine = options.get("engine", "surrogate")
    opts = dict(engine=engine, statistics=options.get("statistics", "fermi-dirac"), walkers=options.get("walkers"),
                steps=options.get("steps", STEPS), burn=options.get("burn", BURN), seed=options.get("seed", 0),
                recheck_solver=options.get("recheck", True), critical_dims=options.get("critical", True),
                fraction_min=options.get("fraction_min", 0.9), progress=options.get("progress"))
    unknown = set(options) - {"engine", "statistics", "walkers", "steps", "burn", "seed", "recheck", "critical",
                              "fraction_min", "progress", "reference_row"}
    if unknown:
        raise DesignError("options", "engine, statistics, walkers, steps, burn, seed, recheck, critical, "
                                     "reference_row, fraction_min, progress", ", ".join(sorted(unknown)))
    cols_u = [column_of(u) for u in _names(unknowns)]
    read = {k: read_observations(p, cols_u) for k, p in parts.items()}
    batches = {}
    for k, (rows, obs, m) in read.items():
        sig = repr([sorted(r.items()) for r in rows])  # the prior centres (design dopings) must agree too
        batches.setdefault(sig, []).append(k)
    results = {}
    for sig, ks in batches.items():
        rows, _, m = read[ks[0]]
        ref = options.get("reference_row", 1)
        _check_options(engine, opts["steps"], opts["burn"], ref, m, opts["fraction_min"])
        params, names, dims = setup_unknowns(unknowns, rows)
        outs = _run_batch(rows, [read[k][1] for k in ks], params, names, dims, reference_row=ref - 1, **opts)
        for k, o in zip(ks, outs):
            o["series"] = k
            results[k] = o
    return [results[k] for k in order]
