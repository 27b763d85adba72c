"""The design questions, answered by any engine (the surrogate by default): band profiles, 2-D
regime maps, critical dimensions (and their sweeps), constrained search over many candidates,
and growth-spread yield with its sensitivity. Plain numpy in, plain numpy out; the front end
only parses flags into these calls and draws what comes back.

Targets are "V_bi >= fraction_min * V_bi0" [1] or "V_bi >= vbi_min_V" [V] (either, or both).
"""

from __future__ import annotations

import functools
import math
import time

import numpy as np

from . import _search
from ._design import NUMERIC, REGIMES, check_design, parse_quantity
from ._engines import DEFAULT_ENGINE, answer, check_engine, solve
from ._errors import DesignError
from ._search import LOG_COLUMNS

#: default scan ranges of the critical dimensions [nm] when no bundle domain narrows them
CRITICAL_RANGES_NM = {"core_radius_nm": (5.0, 500.0), "shell_thickness_nm": (1.0, 500.0)}
CONFIRM_STEP_NM = 0.5  #: the solver checks this far above and below each critical value [nm]
SEARCH_CHUNK = 100_000  #: candidates per engine call in ``search``
OBJECTIVES = ("total-radius", "core-radius", "shell-thickness")
SWEPT = tuple(c for c in NUMERIC if c != "interlayer_nm")  #: the columns a map, sweep or spread may vary


def _one(x):
    return x.item() if hasattr(x, "item") else x


def design_row(design: dict) -> dict:
    """One validated design as plain Python values (raises ``DesignError``); the neutral
    level left blank stays out (the material's own)."""
    t = check_design(design)
    row = {"material": str(t.material[0]), "core_type": "p" if t.p_core[0] else "n"}
    row.update({k: float(v[0]) for k, v in t.values.items() if not (k == "cnl_eV" and math.isnan(v[0]))})
    return row


def _target(fraction_min, vbi_min_V):
    if vbi_min_V is None and fraction_min is None:
        raise DesignError("target", "give fraction_min (of V_bi0) or vbi_min_V")
    if fraction_min is not None and not (isinstance(fraction_min, (int, float)) and 0 < fraction_min <= 1):
        raise DesignError("fraction_min", "allowed range (0, 1]", fraction_min)
    if vbi_min_V is not None and not (isinstance(vbi_min_V, (int, float)) and 0 < vbi_min_V < 20):
        raise DesignError("vbi_min_V", "allowed range (0, 20) V", vbi_min_V)
    return {"vbi_min": vbi_min_V, "fraction_min": fraction_min}


def target_text(fraction_min=0.9, vbi_min_V=None) -> str:
    """The target in words, e.g. "V_bi >= 90% of V_bi0"."""
    parts = []
    if vbi_min_V is not None:
        parts.append(f"V_bi >= {vbi_min_V:g} V")
    if fraction_min is not None:
        parts.append(f"V_bi >= {fraction_min:.0%} of V_bi0")
    return " and ".join(parts)


def _column(name, what):
    if name not in SWEPT:
        raise DesignError(what, f"one of {', '.join(SWEPT)}", name)
    return name


def _range(what, column, lo, hi, scale="auto"):
    lo_v, hi_v = parse_quantity(column, lo), parse_quantity(column, hi)
    a, b = NUMERIC[column][:2]
    for v in (lo_v, hi_v):
        if not (math.isfinite(v) and a <= v <= b):
            raise DesignError(what, f"{column} allowed range [{a:g}, {b:g}]", v)
    if not lo_v < hi_v:
        raise DesignError(what, "low must be below high", f"{lo_v:g} .. {hi_v:g}")
    if scale not in ("auto", "log", "linear"):
        raise DesignError(what, "scale one of auto, log, linear", scale)
    log = column in LOG_COLUMNS if scale == "auto" else scale == "log"
    if log and lo_v <= 0:
        raise DesignError(what, f"{column} is swept on a log axis, so low must be > 0; give scale 'linear' "
                                "(NAME:LOW:HIGH:linear on the command line) to include 0", lo_v)
    return lo_v, hi_v, log


def _axis(what, spec):
    """(column, low, high[, scale]) -> (column, values low..high, log?) of n points later."""
    if not isinstance(spec, (tuple, list)) or len(spec) not in (3, 4):
        raise DesignError(what, "expected (column, low, high) or (column, low, high, scale)", spec)
    col = _column(spec[0], what)
    lo, hi, log = _range(what, col, spec[1], spec[2], spec[3] if len(spec) == 4 else "auto")
    return col, lo, hi, log


def _points(lo, hi, n, log):
    return np.geomspace(lo, hi, n) if log else np.linspace(lo, hi, n)


def _check_count(name, n, lo, hi):
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or not lo <= n <= hi:
        raise DesignError(name, f"a whole number in [{lo}, {hi}]", n)
    return int(n)


def profile(design: dict, engine: str = "solver", statistics: str = "fermi-dirac") -> dict:
    """Band profile of one design against radius: ``r_nm`` [nm], ``ec_eV``, ``ev_eV`` [eV,
    E_F = 0], ``region`` (core-neutral, core-depleted, interlayer, shell-neutral,
    shell-depleted) and, from the solver, ``n_cm3``, ``p_cm3`` [cm^-3]; plus ``regime``,
    ``vbi_V``, ``core_radius_nm`` and ``outer_radius_nm``. ``engine``: ``"solver"`` (the full
    Poisson solution) or ``"depletion"`` (the analytic approximation's piecewise bands)."""
    if engine == "depletion":
        from ._profiles import depletion_profile

        return depletion_profile(design, statistics, points=800)
    if engine != "solver":
        raise DesignError("engine", "one of solver, depletion", engine)
    from .training._profile import solver_profile

    return solver_profile(design, statistics)


def regime_map(design: dict, x, y, cells=(32, 16), engine: str = DEFAULT_ENGINE,
               statistics: str = "fermi-dirac", progress=None) -> dict:
    """Regime and V_bi over two design variables, the rest of ``design`` fixed.

    ``x``, ``y``: ``(column, low, high)`` in the column's unit (unit suffixes accepted), with an
    optional fourth item ``"log"``/``"linear"`` (default: log for radii, dopings and D_it;
    zero on a log axis is an error). ``cells``: (nx, ny), each in [2, 400]. Returns
    ``x_values``, ``y_values``, ``x_column``, ``y_column``, ``x_log``, ``y_log``, ``regime`` and
    ``vbi_V`` shaped (ny, nx), ``mark`` (the (j, i) cell nearest the design, or None),
    ``engine``, and ``answers``/``designs`` (the flat output and input columns, row-major in y
    then x)."""
    check_engine(engine)
    xcol, xlo, xhi, xlog = _axis("x", x)
    ycol, ylo, yhi, ylog = _axis("y", y)
    if xcol == ycol:
        raise DesignError("y", "must differ from x", ycol)
    if not isinstance(cells, (tuple, list)) or len(cells) != 2:
        raise DesignError("cells", "expected (nx, ny)", cells)
    nx, ny = (_check_count("cells", c, 2, 400) for c in cells)
    base = {k: v for k, v in design.items() if k not in (xcol, ycol)}
    # the fixed part must be valid before a grid is built; its values go on as numbers, not as typed
    base = {k: v for k, v in design_row({**base, xcol: xlo, ycol: ylo}).items() if k not in (xcol, ycol)}
    xs, ys = _points(xlo, xhi, nx, xlog), _points(ylo, yhi, ny, ylog)
    designs = _search.grid(base, xcol, xs, ycol, ys)
    res = answer(designs, engine, statistics, progress=progress)
    mark = None
    if xcol in design and ycol in design:
        bx, by = parse_quantity(xcol, design[xcol]), parse_quantity(ycol, design[ycol])
        if xlo <= bx <= xhi and ylo <= by <= yhi:
            near = lambda vals, v, log: int(np.argmin(np.abs(np.log(vals / v)) if log else np.abs(vals - v)))  # noqa: E731
            mark = (near(ys, by, ylog), near(xs, bx, xlog))
    return {"x_column": xcol, "y_column": ycol, "x_values": xs, "y_values": ys, "x_log": xlog, "y_log": ylog,
            "regime": np.asarray(res["regime"], dtype=object).reshape(ny, nx),
            "vbi_V": np.asarray(res["vbi_V"], dtype=float).reshape(ny, nx), "mark": mark, "engine": engine,
            "answers": res, "designs": designs}


def _scan_ranges(base, engine, ranges):
    out = dict(CRITICAL_RANGES_NM)
    if engine == "surrogate":
        from ._bundle import BundleError
        from ._model import load

        try:
            dom = load(base["material"], base["core_type"]).domain
            out = {k: dom.get(k, out[k]) for k in out}
        except BundleError:
            pass
    for col, (lo, hi) in (ranges or {}).items():
        if col not in out:
            raise DesignError("ranges", "keys core_radius_nm, shell_thickness_nm", col)
        out[col] = _range("ranges", col, lo, hi)[:2]
    return out


def _nm(x):
    """A length [nm] in three significant figures, no exponent."""
    return f"{float(f'{x:.3g}'):g}"


def _short_goal(goal):
    return goal.replace("V_bi >= ", "").replace("% of V_bi0", " % of V_bi0")


def _reachable(target, v, v0):
    """'a target <= ...' naming the best V_bi [V] (of V_bi0 [V]) that was reached."""
    if target["vbi_min"] is not None:
        return f"a target <= {math.floor(1000 * v) / 1000:g} V"
    return f"a target <= {math.floor(1000 * v / v0) / 10:g} % of V_bi0"


def _why_none(col, base, scan, predict, target, goal):
    """One line: why no value of ``col`` in its scanned range meets the target, and what would
    change that (the other dimension's own critical value, or the best fraction reachable)."""
    other = "shell_thickness_nm" if col == "core_radius_nm" else "core_radius_nm"
    word = {"core_radius_nm": "core", "shell_thickness_nm": "shell"}
    dim = {"core_radius_nm": "radius", "shell_thickness_nm": "thickness"}
    lo, hi = scan[col]
    olo, ohi = scan[other]
    at = predict({**base, col: [hi]})
    if at["status"][0] != "ok":
        return (f"no {word[col]} {dim[col]} in {_nm(lo)}-{_nm(hi)} nm has an answer here ({at['status'][0]}); "
                f"a design inside the engine's domain would")
    mine = _search.critical(predict, {**base, col: hi}, other, olo, ohi, **target)["value"]
    if math.isfinite(mine) and base[other] < mine:
        need = math.ceil(mine) if mine >= 10 else math.ceil(mine * 10) / 10
        return (f"{word[other]} {_nm(base[other])} nm is below its own critical {dim[other]} {_nm(mine)} nm at these "
                f"dopings (even with a {_nm(hi)} nm {word[col]}): no {word[col]} keeps {_short_goal(goal)}; "
                f"a {word[other]} >= {need:g} nm would")
    best = predict({**base, col: [hi], other: [ohi]})
    if best["status"][0] == "ok":
        v, v0 = float(best["vbi_V"][0]), float(best["vbi0_V"][0])
        return (f"even a {_nm(ohi)} nm {word[other]} with a {_nm(hi)} nm {word[col]} keeps only V_bi {v:.3f} V "
                f"({v / v0:.1%} of V_bi0 {v0:.3f} V) at these dopings and D_it: no size in the scanned ranges keeps "
                f"{_short_goal(goal)}; {_reachable(target, v, v0)}, other dopings or fewer surface states would")
    v = float(at["vbi_V"][0])
    return (f"no {word[col]} {dim[col]} in {_nm(lo)}-{_nm(hi)} nm keeps {_short_goal(goal)}: at {_nm(hi)} nm V_bi is "
            f"{v:.3f} V of V_bi0 {float(at['vbi0_V'][0]):.3f} V; a larger {word[other]}, other dopings or fewer "
            f"surface states would")


def critical_dimensions(design: dict, fraction_min: float | None = 0.9, vbi_min_V: float | None = None,
                        engine: str = DEFAULT_ENGINE, statistics: str = "fermi-dirac", confirm: bool = True,
                        ranges: dict | None = None, sweep=None, points: int = 9, progress=None) -> dict:
    """Smallest core radius [nm] (shell fixed) and thinnest shell [nm] (core fixed) from which
    on V_bi stays at or above the target.

    A dense scan of the engine, bisection between the last failing and first holding point;
    the range read from the ends of the 95 % interval where the engine gives one
    (``optimistic_nm`` from the upper end, ``conservative_nm`` from the lower). With
    ``confirm`` the reference solver checks ``CONFIRM_STEP_NM`` above (must meet the target) and
    below (must miss it). ``design`` lacking a core radius or shell thickness takes 100 nm.
    Returns, per column ``core_radius_nm`` and ``shell_thickness_nm``: ``value_nm`` (NaN with a
    ``reason`` when none holds), ``optimistic_nm``, ``conservative_nm``, ``regime`` there,
    ``monotone``, ``confirmed`` (True/False/None) and ``solver_vbi_V`` (above, below).

    ``sweep``: ``(column, low, high)``: the same against a doping, D_it, the neutral level or
    the temperature at ``points`` values; returns ``sweep_column``, ``sweep_values`` and the
    two critical dimensions as arrays [nm] (NaN where none holds), no solver checks."""
    check_engine(engine)
    target = _target(fraction_min, vbi_min_V)
    goal = target_text(fraction_min, vbi_min_V)
    base = design_row({"core_radius_nm": 100.0, "shell_thickness_nm": 100.0, **design})
    scan = _scan_ranges(base, engine, ranges)
    predict = lambda d: answer(d, engine, statistics)  # noqa: E731
    if sweep is not None:
        col, lo, hi, log = _axis("sweep", sweep)
        if col in scan:
            raise DesignError("sweep", "sweep a doping, D_it, the neutral level or the temperature", col)
        xs = _points(lo, hi, _check_count("points", points, 2, 200), log)
        core, shell = np.full(xs.size, np.nan), np.full(xs.size, np.nan)
        for k, x in enumerate(xs):
            for c, arr in (("core_radius_nm", core), ("shell_thickness_nm", shell)):
                arr[k] = _search.critical(predict, {**base, col: x}, c, *scan[c], **target)["value"]
            if progress:
                progress(k + 1, xs.size)
        return {"sweep_column": col, "sweep_values": xs, "core_radius_nm": core, "shell_thickness_nm": shell,
                "target": goal, "engine": engine, "design": base}
    out = {"target": goal, "engine": engine, "design": base, "scan_ranges_nm": scan, "confirm_step_nm": CONFIRM_STEP_NM}
    checks = []
    for col in ("core_radius_nm", "shell_thickness_nm"):
        lo, hi = scan[col]
        r = _search.critical(predict, base, col, lo, hi, **target)
        item = {"value_nm": r["value"], "optimistic_nm": r["optimistic"], "conservative_nm": r["conservative"],
                "monotone": r["monotone"], "regime": r.get("answer", {}).get("regime", ""), "confirmed": None,
                "solver_vbi_V": (math.nan, math.nan), "reason": ""}
        if not math.isfinite(r["value"]):
            item["reason"] = _why_none(col, base, scan, predict, target, goal)
        elif r["value"] <= lo:
            what = "core radius" if col == "core_radius_nm" else "shell thickness"
            item["reason"] = (f"every {what} in the scanned {_nm(lo)}-{_nm(hi)} nm keeps {_short_goal(goal)}: the "
                              f"critical value lies below {_nm(lo)} nm (the scan's lower end"
                              + (", the bundle's trained domain); the depletion engine or the solver scans lower"
                                 if engine == "surrogate" else ")"))
        else:
            checks.append(col)
        out[col] = item
    if confirm and checks:
        rows = [{**base, c: max(out[c]["value_nm"] + dx, 1.0)} for c in checks for dx in (CONFIRM_STEP_NM, -CONFIRM_STEP_NM)]
        t = time.perf_counter()
        ref = solve({k: [r[k] for r in rows] for k in rows[0]}, statistics)
        out["solver_seconds"] = time.perf_counter() - t
        ok = _search.meets(ref, **target)
        for k, c in enumerate(checks):
            out[c]["confirmed"] = bool(ok[2 * k] and not ok[2 * k + 1])
            out[c]["solver_vbi_V"] = (float(ref["vbi_V"][2 * k]), float(ref["vbi_V"][2 * k + 1]))
    return out


def search(design: dict, vary: dict, minimize: str = "total-radius", fraction_min: float | None = 0.9,
           vbi_min_V: float | None = None, regimes=None, candidates: int = 200_000, top: int = 5, seed: int = 0,
           engine: str = DEFAULT_ENGINE, statistics: str = "fermi-dirac", confirm: bool = True,
           progress=None, map_chunks=None) -> dict:
    """The best designs among ``candidates`` random ones under a V_bi target.

    ``vary``: column -> (low, high) in the column's unit, drawn uniformly (in log for radii,
    dopings and D_it); the other columns come from ``design``. ``minimize``: ``total-radius``,
    ``core-radius`` or ``shell-thickness``. ``regimes``: also require one of these regimes.
    Feasibility is judged on the lower end of the engine's 95 % interval where it gives one
    (conservative). With ``confirm`` the winners are re-checked by the reference solver.
    Returns ``winners`` (a mapping of columns, best first: the varied columns, ``objective``,
    ``regime``, ``vbi_V``, and ``solver_regime``, ``solver_vbi_V``, ``solver_meets`` when
    confirmed), ``feasible`` (how many candidates met the target), ``candidates``, ``seconds``
    and ``reason`` (why there is no winner, else ""). ``map_chunks``: a ``map(fn, chunks)``
    replacement that yields ``fn(chunk)`` in order (e.g. on a cluster: the CLI's
    ``--scheduler``); the candidates and the answer are the same as with the built-in map."""
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
    fixed = design_row({**design, **{c: lo for c, (lo, _) in space.items()}})
    for c in ("core_radius_nm", "shell_thickness_nm"):
        if c not in space and c not in design:
            raise DesignError(c, "fix it in the design or vary it")
    fixed = {k: v for k, v in fixed.items() if k not in space}
    cand = _search.candidates(space, fixed, n, seed)
    best = []
    feasible = 0
    closest = {"fraction": -math.inf, "answered": 0, "status": "", "vbi_ok": 0}
    t0 = time.perf_counter()
    starts = range(0, n, SEARCH_CHUNK)
    parts = [{k: (v[s:s + SEARCH_CHUNK] if np.ndim(v) else v) for k, v in cand.items()} for s in starts]
    results = (map_chunks or map)(functools.partial(answer, engine=engine, statistics=statistics), parts)
    for s, part, res in zip(starts, parts, results):
        ok = _search.meets(res, **target, bound="low" if "vbi_low_V" in res else "value")
        if regimes:
            closest["vbi_ok"] += int(ok.sum())
            ok &= np.isin(res["regime"], regimes)
        _track_closest(closest, part, res, target)
        feasible += int(ok.sum())
        obj = _search.objective(part, minimize)
        idx = np.flatnonzero(ok)
        for i in idx[np.argsort(obj[idx], kind="stable")[:top]]:
            best.append((float(obj[i]), {k: (float(v[i]) if np.ndim(v) else v) for k, v in part.items()},
                         str(res["regime"][i]), float(res["vbi_V"][i])))
        best = sorted(best, key=lambda b: b[0])[:top]
        if progress:
            progress(min(s + SEARCH_CHUNK, n), n)
    seconds = time.perf_counter() - t0
    winners = {c: np.array([b[1][c] for b in best], dtype=float) for c in space}
    winners.update(objective=np.array([b[0] for b in best], dtype=float),
                   regime=np.array([b[2] for b in best], dtype=object), vbi_V=np.array([b[3] for b in best]))
    out = {"winners": winners, "feasible": feasible, "candidates": n, "seconds": seconds, "minimize": minimize,
           "target": target_text(fraction_min, vbi_min_V), "engine": engine, "space": space, "fixed": fixed,
           "reason": ""}
    if not best:
        out["reason"] = _why_no_winner(n, closest, space, out["target"], regimes, target)
    elif confirm:
        rows = [b[1] for b in best]
        ref = solve({k: [r[k] for r in rows] for k in rows[0]}, statistics)
        meets = _search.meets(ref, **target)
        if regimes:
            meets &= np.isin(ref["regime"], regimes)
        winners.update(solver_regime=ref["regime"], solver_vbi_V=ref["vbi_V"], solver_meets=meets)
    return out


def _track_closest(closest, part, res, target):
    """Keep the candidate whose conservative V_bi comes nearest the target (for the reason)."""
    ok = res["status"] == "ok"
    closest["answered"] += int(ok.sum())
    if not ok.all() and not closest["status"]:
        closest["status"] = str(res["status"][~ok][0])
    if not ok.any():
        return
    v = np.where(ok, res.get("vbi_low_V", res["vbi_V"]), np.nan)
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


def parse_spread(column: str, text) -> tuple:
    """A spread given as text: ``"2nm"`` (one standard deviation in the column's unit),
    ``"25%"`` (relative; in log for radii, dopings and D_it), with ``",uniform"`` for a half
    width of a uniform spread. Returns (kind, size, relative)."""
    if isinstance(text, (tuple, list)):
        if len(text) != 3 or text[0] not in ("normal", "uniform"):
            raise DesignError(f"spreads[{column}]", "expected (normal|uniform, size, relative)", text)
        kind, size, relative = text[0], text[1], bool(text[2])
    else:
        rest = str(text).strip()
        kind = "normal"
        for k in ("uniform", "normal"):
            if rest.endswith("," + k):
                kind, rest = k, rest[: -len(k) - 1].strip()
        rest = rest.lstrip("±")
        relative = rest.endswith("%")
        if relative:
            try:
                size = float(rest[:-1]) / 100.0
            except ValueError:
                raise DesignError(f"spreads[{column}]", "a percentage such as 25%", text) from None
        else:
            size = parse_quantity(column, rest)
    if isinstance(size, bool) or not isinstance(size, (int, float)) or not (math.isfinite(size) and size > 0):
        raise DesignError(f"spreads[{column}]", "a finite size > 0", text)
    if relative and size > 5:
        raise DesignError(f"spreads[{column}]", "a relative spread of at most 500%", text)
    return kind, float(size), relative


def spread(design: dict, spreads: dict, samples: int = 100_000, seed: int = 0, fraction_min: float | None = 0.9,
           vbi_min_V: float | None = None, regimes=None, engine: str = DEFAULT_ENGINE,
           statistics: str = "fermi-dirac", progress=None) -> dict:
    """Growth tolerance: Monte Carlo runs around the nominal ``design`` under run-to-run spread.

    ``spreads``: column -> ``"2nm"`` (one standard deviation), ``"25%"`` (relative, in log for
    radii, dopings and D_it) or ``"100%,uniform"`` (a half width), or (kind, size, relative).
    Returns ``yield`` (share of answered runs meeting the target), ``regime_probability``,
    ``vbi_percentiles_V`` (5/25/50/75/95), ``main_effects`` (first-order share of the yield's
    variance per variable; Saltelli et al., Global Sensitivity Analysis: The Primer, Wiley
    2008, sec. 1.2.5), ``failing_mean_z`` (where failing runs sit, in spreads), ``vbi_V`` (every
    answered run), ``answered``, ``samples``, ``seconds`` and ``reason`` (why no yield, else "")."""
    check_engine(engine)
    target = _target(fraction_min, vbi_min_V)
    if not isinstance(spreads, dict) or not spreads:
        raise DesignError("spreads", "give at least one column -> spread, e.g. {'shell_thickness_nm': '2nm'}", spreads)
    parsed = {_column(c, "spreads"): parse_spread(c, s) for c, s in spreads.items()}
    regimes = list(regimes or [])
    for r in regimes:
        if r not in REGIMES:
            raise DesignError("regimes", f"each one of {', '.join(REGIMES)}", r)
    n = _check_count("samples", samples, 1000, 20_000_000)
    seed = _check_count("seed", seed, 0, 2**63 - 1)
    nominal = design_row(design)
    if "cnl_eV" in parsed and "cnl_eV" not in nominal:  # the material's own neutral level is the nominal
        from ._materials import get_material

        nominal["cnl_eV"] = get_material(nominal["material"]).cnl_eV
    missing = [c for c in parsed if c not in nominal]
    if missing:
        raise DesignError(missing[0], "a spread needs the nominal value in the design")
    t0 = time.perf_counter()
    samples_ = _search.spread_samples(nominal, parsed, n, seed)
    res = answer(samples_, engine, statistics, progress=progress)
    seconds = time.perf_counter() - t0
    ok = res["status"] == "ok"
    success = _search.meets(res, **target)
    if regimes:
        success &= np.isin(res["regime"], regimes)
    effects = _search.main_effects({k: np.asarray(v)[ok] for k, v in samples_.items() if k in parsed}, list(parsed),
                                   success[ok])
    z = _search.standard_scores(samples_, nominal, parsed)
    failing = ok & ~success
    vb = res["vbi_V"][ok]
    pct = np.percentile(vb, [5, 25, 50, 75, 95]) if vb.size else np.full(5, np.nan)
    out = {"samples": n, "answered": int(ok.sum()), "seconds": seconds, "engine": engine, "seed": seed,
           "target": target_text(fraction_min, vbi_min_V) + (f" in {', '.join(regimes)}" if regimes else ""),
           "spreads": parsed, "yield": float(success[ok].mean()) if ok.any() else math.nan,
           "regime_probability": _search.regime_probabilities(res),
           "vbi_percentiles_V": dict(zip(("p5", "p25", "p50", "p75", "p95"), map(float, pct))),
           "main_effects": effects,
           "failing_mean_z": {c: float(z[c][failing].mean()) if failing.any() else 0.0 for c in parsed},
           "vbi_V": vb, "reason": "", "first_unanswered": "" if ok.all() else str(res["status"][~ok][0])}
    if not ok.any():
        out["reason"] = (f"no run was answered by the {engine} engine ({out['first_unanswered']}); a nominal "
                         "design inside the engine's domain, narrower spreads or another engine would")
    return out

