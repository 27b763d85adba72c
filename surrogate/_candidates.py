"""The ``search`` design question: the best designs among many random candidates under a V_bi
target, optionally without tunnelling risk, re-checked by the reference solver."""

from __future__ import annotations

import functools
import math
import time

import numpy as np

from . import _search
from ._design import REGIMES, require_mapping
from ._engines import DEFAULT_ENGINE, answer, check_engine, solve
from ._errors import DesignError
from ._qcommon import _check_count, _column, _range, _reachable, _target, answered_by, design_row, target_text
from ._tunnel import TUNNEL_RISK_LOG10

SEARCH_CHUNK = 100_000  #: candidates per engine call in ``search``
SEARCH_MODELS = ("regime", "vbi", "difficulty")  #: surrogate trees a search reads (V_bi, its interval and the regime whose quantile it takes)
OBJECTIVES = ("total-radius", "core-radius", "shell-thickness")


def search(design: dict, vary: dict, minimize: str = "total-radius", fraction_min: float | None = 0.9,
           vbi_min_V: float | None = None, regimes=None, candidates: int = 200_000, top: int = 5, seed: int = 0,
           engine: str = DEFAULT_ENGINE, statistics: str = "fermi-dirac", confirm: bool = True,
           progress=None, avoid_tunnelling: bool = True, ionisation: str = "auto", map_chunks=None) -> dict:
    """The best designs among ``candidates`` random ones under a V_bi target.

    ``vary``: column -> (low, high) in the column's unit, drawn uniformly (in log for radii,
    dopings and D_it); the other columns come from ``design``. ``minimize``: ``total-radius``,
    ``core-radius`` or ``shell-thickness``. ``regimes``: also require one of these regimes.
    Feasibility is judged on the lower end of the engine's 95 % interval where it gives one
    (conservative). ``avoid_tunnelling`` (default on): candidates whose tunnelling estimate
    lies above ``TUNNEL_RISK_LOG10`` are not feasible (where the engine gives no estimate, the
    surrogate, the candidate is kept and counted in ``tunnelling_unchecked``; the solver's
    confirmation then judges the winners). With ``confirm`` the winners are re-checked by the
    reference solver. Returns ``winners`` (a mapping of columns, best first: the varied columns,
    ``objective``, ``regime``, ``vbi_V``, ``tunnel_log10``, ``engine``, and ``solver_regime``,
    ``solver_vbi_V``, ``solver_tunnel_log10``, ``solver_tunnel_risk``, ``solver_meets`` (the
    target, the regimes and, with ``avoid_tunnelling``, no risk) when confirmed), ``feasible``
    (how many candidates met the target), ``tunnelling_excluded`` (met it but at tunnelling
    risk), ``tunnelling_unchecked``, ``answered_by`` (engine -> candidates answered),
    ``candidates``, ``seconds`` and ``reason`` (why there is no winner, else ""). ``map_chunks``: a
    ``map(fn, chunks)`` replacement that yields ``fn(chunk)`` in order (e.g. on a cluster: the
    CLI's ``--scheduler``); the candidates and the answer are the same as with the built-in map."""
    check_engine(engine)
    target = _target(fraction_min, vbi_min_V)
    if minimize not in OBJECTIVES:
        raise DesignError("minimize", f"one of {', '.join(OBJECTIVES)}", minimize)
    if not isinstance(vary, dict) or not vary:
        raise DesignError("vary", "give at least one column -> (low, high)", vary)
    space = {}
    for col, rng in vary.items():
        _column(col, "vary")
        if not isinstance(rng, (tuple, list)) or len(rng) != 2:
            raise DesignError("vary", f"{col}: expected (low, high)", rng)
        lo, hi, _ = _range("vary", col, rng[0], rng[1])
        space[col] = (lo, hi)
    regimes = list(regimes or [])
    for r in regimes:
        if r not in REGIMES:
            raise DesignError("regimes", f"each one of {', '.join(REGIMES)}", r)
    n = _check_count("candidates", candidates, 1000, 50_000_000)
    top = _check_count("top", top, 1, 1000)
    seed = _check_count("seed", seed, 0, 2**63 - 1)
    require_mapping(design)
    fixed = design_row({**design, **{c: lo for c, (lo, _) in space.items()}})
    for c in ("core_radius_nm", "shell_thickness_nm"):
        if c not in space and c not in design:
            raise DesignError(c, "fix it in the design or vary it")
    fixed = {k: v for k, v in fixed.items() if k not in space}
    cand = _search.candidates(space, fixed, n, seed)
    best = []
    feasible = excluded = unchecked = 0
    engines = {}
    closest = {"fraction": -math.inf, "answered": 0, "status": "", "vbi_ok": 0}
    t0 = time.perf_counter()
    starts = range(0, n, SEARCH_CHUNK)
    parts = [{k: (v[s:s + SEARCH_CHUNK] if np.ndim(v) else v) for k, v in cand.items()} for s in starts]
    ask = functools.partial(answer, engine=engine, statistics=statistics, ionisation=ionisation, models=SEARCH_MODELS)
    for s, part, res in zip(starts, parts, (map_chunks or map)(ask, parts)):
        ok = _search.meets(res, **target, bound="low" if "vbi_low_V" in res else "value")
        if regimes:
            closest["vbi_ok"] += int(ok.sum())
            ok &= np.isin(res["regime"], regimes)
        tunnel = np.asarray(res.get("tunnel_log10", np.full(ok.size, np.nan)), dtype=float)
        with np.errstate(invalid="ignore"):
            risk = tunnel > TUNNEL_RISK_LOG10
        unchecked += int((ok & np.isnan(tunnel)).sum())
        if avoid_tunnelling:
            excluded += int((ok & risk).sum())
            ok &= ~risk
        for k, v in answered_by(res).items():
            engines[k] = engines.get(k, 0) + v
        _track_closest(closest, part, res, target)
        feasible += int(ok.sum())
        obj = _search.objective(part, minimize)
        idx = np.flatnonzero(ok)
        for i in idx[np.argsort(obj[idx], kind="stable")[:top]]:
            best.append((float(obj[i]), {k: (float(v[i]) if np.ndim(v) else v) for k, v in part.items()},
                         str(res["regime"][i]), float(res["vbi_V"][i]), float(tunnel[i]), str(res["engine"][i])))
        best = sorted(best, key=lambda b: b[0])[:top]
        if progress:
            progress(min(s + SEARCH_CHUNK, n), n)
    seconds = time.perf_counter() - t0
    winners = {c: np.array([b[1][c] for b in best], dtype=float) for c in space}
    winners.update(objective=np.array([b[0] for b in best], dtype=float),
                   regime=np.array([b[2] for b in best], dtype=object), vbi_V=np.array([b[3] for b in best]),
                   tunnel_log10=np.array([b[4] for b in best], dtype=float),
                   engine=np.array([b[5] for b in best], dtype=object))
    out = {"winners": winners, "feasible": feasible, "candidates": n, "seconds": seconds, "minimize": minimize,
           "target": target_text(fraction_min, vbi_min_V), "engine": engine, "space": space, "fixed": fixed,
           "reason": "", "avoid_tunnelling": bool(avoid_tunnelling), "tunnelling_excluded": excluded,
           "tunnelling_unchecked": unchecked, "answered_by": dict(sorted(engines.items(), key=lambda kv: -kv[1]))}
    if not best:
        out["reason"] = _why_no_winner(n, closest, space, out["target"], regimes, target)
        if excluded:
            out["reason"] = (f"{excluded:,} of {n:,} candidates meet {out['target']} but every one is at tunnelling "
                             f"risk (estimate above 10^{TUNNEL_RISK_LOG10:g}); lower dopings or an interlayer "
                             "(vary interlayer_nm) would, or allow the risk (avoid_tunnelling=False)")
    elif confirm:
        rows = [b[1] for b in best]
        ref = solve({k: [r[k] for r in rows] for k in rows[0]}, statistics, ionisation=ionisation)
        meets = _search.meets(ref, **target)
        if regimes:
            meets &= np.isin(ref["regime"], regimes)
        with np.errstate(invalid="ignore"):
            solver_risk = ref["tunnel_log10"] > TUNNEL_RISK_LOG10
        if avoid_tunnelling:
            meets &= ~solver_risk
        winners.update(solver_regime=ref["regime"], solver_vbi_V=ref["vbi_V"], solver_tunnel_log10=ref["tunnel_log10"],
                       solver_tunnel_risk=solver_risk, solver_meets=meets)
    return out


def _track_closest(closest, part, res, target):
    """Keep the candidate whose conservative V_bi comes nearest the target (for the reason)."""
    ok = res["status"] == "ok"
    closest["answered"] += int(ok.sum())
    if not ok.all() and not closest["status"]:
        closest["status"] = str(res["status"][~ok][0])
    if not ok.any():
        return
    low = np.asarray(res.get("vbi_low_V", res["vbi_V"]), dtype=float)
    v = np.where(ok, np.where(np.isnan(low), res["vbi_V"], low), np.nan)  # rows without an interval: the value
    score = v / res["vbi0_V"] if target["vbi_min"] is None else v
    i = int(np.nanargmax(score))
    if score[i] > closest["fraction"]:
        closest.update(fraction=float(score[i]), vbi_V=float(v[i]), vbi0_V=float(res["vbi0_V"][i]),
                       at={k: float(part[k][i]) for k in part if np.ndim(part[k])})


def _why_no_winner(n, closest, space, goal, regimes, target):
    """One line: why no candidate met the target, and the nearest miss that says what would."""
    if closest["answered"] == 0:
        return (f"none of {n:,} candidates has an answer ({closest['status']}); ranges inside the engine's domain "
                "would")
    where = ", ".join(f"{k} {v:.3g}" for k, v in closest["at"].items())
    if regimes and closest["vbi_ok"]:
        return (f"{closest['vbi_ok']:,} of {n:,} candidates meet {goal} but none is {' or '.join(regimes)}; "
                "wider ranges or another regime would")
    v, v0 = closest["vbi_V"], closest["vbi0_V"]
    return (f"none of {n:,} candidates meets {goal} on the conservative end of the interval; the closest ({where}) "
            f"keeps V_bi {v:.3f} V ({v / v0:.1%} of V_bi0); {_reachable(target, v, v0)} or wider ranges would")
