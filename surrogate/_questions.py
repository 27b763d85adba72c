"""The design questions, answered by any engine (the surrogate by default): band profiles, 2-D
regime maps, critical dimensions (and their sweeps), constrained search over many candidates,
and growth-spread yield with its sensitivity. Plain numpy in, plain numpy out; the front end
only parses flags into these calls and draws what comes back.

Targets are "V_bi >= fraction_min * V_bi0" [1] or "V_bi >= vbi_min_V" [V] (either, or both).
"""

from __future__ import annotations

import math
import time

import numpy as np

from . import _search
from ._candidates import OBJECTIVES, SEARCH_CHUNK, search
from ._design import parse_quantity, require_mapping
from ._engines import DEFAULT_ENGINE, answer, check_engine, solve
from ._errors import DesignError
from ._qcommon import (SWEPT, _axis, _check_count, _nm, _points, _range, _reachable, _short_goal, _target,
                       answered_by, design_row, target_text)
from ._interlayer import critical_interlayer
from ._tunnel import TUNNEL_RISK_LOG10
from ._tolerance import parse_spread, spread

__all__ = ["CRITICAL_RANGES_NM", "CONFIRM_STEP_NM", "SIZABLE", "SIZED", "OBJECTIVES", "SEARCH_CHUNK", "SWEPT", "critical_dimensions",
           "design_row", "parse_spread", "profile", "regime_map", "search", "spread", "target_text"]

#: default scan ranges of the critical dimensions [nm] when no bundle domain narrows them
CRITICAL_RANGES_NM = {"core_radius_nm": (5.0, 500.0), "shell_thickness_nm": (1.0, 500.0)}
CONFIRM_STEP_NM = 0.5  #: the solver checks this far above and below each critical value [nm]
SIZABLE = ("core_radius_nm", "shell_thickness_nm", "interlayer_nm")  #: what ``critical_dimensions`` sizes
SIZED = SIZABLE[:2]  #: sized by default


def profile(design: dict, engine: str = "solver", statistics: str = "fermi-dirac", ionisation: str = "auto") -> dict:
    """Band profile of one design against radius: ``r_nm`` [nm], ``ec_eV``, ``ev_eV`` [eV,
    E_F = 0], ``region`` (core-neutral, core-depleted, interlayer, shell-neutral,
    shell-depleted) and, from the solver, ``n_cm3``, ``p_cm3`` [cm^-3]; plus ``regime``,
    ``vbi_V``, ``core_radius_nm`` and ``outer_radius_nm``. ``engine``: ``"solver"`` (the full
    Poisson solution) or ``"depletion"`` (the analytic approximation's piecewise bands)."""
    if engine == "depletion":
        from ._profiles import depletion_profile

        return depletion_profile(design, statistics, points=800, ionisation=ionisation)
    if engine != "solver":
        raise DesignError("engine", "one of solver, depletion", engine)
    from .training._profile import solver_profile

    return solver_profile(design, statistics, ionisation=ionisation)


def regime_map(design: dict, x, y, cells=(32, 16), engine: str = DEFAULT_ENGINE,
               statistics: str = "fermi-dirac", progress=None, ionisation: str = "auto") -> dict:
    """Regime and V_bi over two design variables, the rest of ``design`` fixed.

    ``x``, ``y``: ``(column, low, high)`` in the column's unit (unit suffixes accepted), with an
    optional fourth item ``"log"``/``"linear"`` (default: log for radii, dopings and D_it;
    zero on a log axis is an error). ``cells``: (nx, ny), each in [2, 400]. Returns
    ``x_values``, ``y_values``, ``x_column``, ``y_column``, ``x_log``, ``y_log``, ``regime`` and
    ``vbi_V`` shaped (ny, nx), ``mark`` (the (j, i) cell nearest the design, or None),
    ``engine``, and ``answers``/``designs`` (the flat output and input columns, row-major in y
    then x), ``tunnel_log10`` (ny, nx) (the junction's tunnelling estimate, NaN where the
    answering engine gives none: the surrogate), ``tunnel_risk`` (ny, nx) [bool] (estimate above
    ``TUNNEL_RISK_LOG10``) and ``answered_by`` (engine -> cells it answered)."""
    check_engine(engine)
    xcol, xlo, xhi, xlog = _axis("x", x)
    ycol, ylo, yhi, ylog = _axis("y", y)
    if xcol == ycol:
        raise DesignError("y", "must differ from x", ycol)
    if not isinstance(cells, (tuple, list)) or len(cells) != 2:
        raise DesignError("cells", "expected (nx, ny)", cells)
    nx, ny = (_check_count("cells", c, 2, 400) for c in cells)
    require_mapping(design)
    base = {k: v for k, v in design.items() if k not in (xcol, ycol)}
    # the fixed part must be valid before a grid is built; its values go on as numbers, not as typed
    base = {k: v for k, v in design_row({**base, xcol: xlo, ycol: ylo}).items() if k not in (xcol, ycol)}
    xs, ys = _points(xlo, xhi, nx, xlog), _points(ylo, yhi, ny, ylog)
    designs = _search.grid(base, xcol, xs, ycol, ys)
    res = answer(designs, engine, statistics, progress=progress, ionisation=ionisation)
    mark = None
    if xcol in design and ycol in design:
        bx, by = parse_quantity(xcol, design[xcol]), parse_quantity(ycol, design[ycol])
        if xlo <= bx <= xhi and ylo <= by <= yhi:
            near = lambda vals, v, log: int(np.argmin(np.abs(np.log(vals / v)) if log else np.abs(vals - v)))  # noqa: E731
            mark = (near(ys, by, ylog), near(xs, bx, xlog))
    tunnel = np.asarray(res.get("tunnel_log10", np.full(nx * ny, np.nan)), dtype=float).reshape(ny, nx)
    with np.errstate(invalid="ignore"):
        risk = tunnel > TUNNEL_RISK_LOG10
    return {"x_column": xcol, "y_column": ycol, "x_values": xs, "y_values": ys, "x_log": xlog, "y_log": ylog,
            "regime": np.asarray(res["regime"], dtype=object).reshape(ny, nx),
            "vbi_V": np.asarray(res["vbi_V"], dtype=float).reshape(ny, nx), "mark": mark, "engine": engine,
            "tunnel_log10": tunnel, "tunnel_risk": risk, "answered_by": answered_by(res),
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
                        ranges: dict | None = None, sweep=None, points: int = 9, progress=None,
                        sized=SIZED, ionisation: str = "auto") -> dict:
    """Smallest core radius [nm] (shell fixed) and thinnest shell [nm] (core fixed) from which
    on V_bi stays at or above the target; with ``"interlayer_nm"`` in ``sized`` also the
    thickest undoped interlayer that keeps it and the thinnest that takes the junction out of
    tunnelling risk (``_interlayer.critical_interlayer``; the solver then checks
    ``CONFIRM_STEP_NM`` below (must meet) and above (must miss)).

    A dense scan of the engine, bisection between the last failing and first holding point;
    the range read from the ends of the 95 % interval where the engine gives one
    (``optimistic_nm`` from the upper end, ``conservative_nm`` from the lower). With
    ``confirm`` the reference solver checks ``CONFIRM_STEP_NM`` above (must meet the target) and
    below (must miss it). ``design`` lacking a core radius or shell thickness takes 100 nm.
    Returns, per column ``core_radius_nm`` and ``shell_thickness_nm``: ``value_nm`` (NaN with a
    ``reason`` when none holds), ``optimistic_nm``, ``conservative_nm``, ``regime`` there,
    ``monotone``, ``engine`` (which engine answered there), ``confirmed`` (True/False/None) and
    ``solver_vbi_V`` (the meeting side, the missing side).

    ``sweep``: ``(column, low, high)``: the same against a doping, D_it, the neutral level or
    the temperature at ``points`` values; returns ``sweep_column``, ``sweep_values`` and the
    two critical dimensions as arrays [nm] (NaN where none holds), no solver checks.
    ``sized``: which of ``core_radius_nm``, ``shell_thickness_nm``, ``interlayer_nm`` to size
    (default the first two)."""
    check_engine(engine)
    if isinstance(sized, str) or not sized or any(c not in SIZABLE for c in sized):
        raise DesignError("sized", f"one or more of {', '.join(SIZABLE)}", sized)
    target = _target(fraction_min, vbi_min_V)
    goal = target_text(fraction_min, vbi_min_V)
    base = design_row({"core_radius_nm": 100.0, "shell_thickness_nm": 100.0, **design})
    scan = _scan_ranges(base, engine, ranges)
    predict = lambda d: answer(d, engine, statistics, ionisation=ionisation)  # noqa: E731
    if sweep is not None:
        if tuple(sized) != SIZED:  # a sweep traces both critical dimensions; it sizes nothing else
            raise DesignError("sized", f"with a sweep only the default {', '.join(SIZED)}; size the interlayer "
                                       "without a sweep", ", ".join(sized))
        col, lo, hi, log = _axis("sweep", sweep)
        if col in scan:
            raise DesignError("sweep", "sweep a doping, D_it, the neutral level, the temperature or the interlayer", col)
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
    for col in (c for c in ("core_radius_nm", "shell_thickness_nm") if c in sized):
        lo, hi = scan[col]
        r = _search.critical(predict, base, col, lo, hi, **target)
        item = {"value_nm": r["value"], "optimistic_nm": r["optimistic"], "conservative_nm": r["conservative"],
                "monotone": r["monotone"], "regime": r.get("answer", {}).get("regime", ""),
                "engine": r.get("answer", {}).get("engine", ""), "confirmed": None,
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
    if "interlayer_nm" in sized:
        item = out["interlayer_nm"] = critical_interlayer(predict, base, target, goal, engine, statistics, ionisation)
        if math.isfinite(item["value_nm"]) and not item["reason"]:
            checks.append("interlayer_nm")
    sign = {"core_radius_nm": 1.0, "shell_thickness_nm": 1.0, "interlayer_nm": -1.0}  # the side that meets

    def probe(c, dx):
        x = out[c]["value_nm"] + sign[c] * dx
        return min(max(x, 0.0), out[c]["scan_nm"][1]) if c == "interlayer_nm" else max(x, 1.0)

    if confirm and checks:
        rows = [{**base, c: probe(c, dx)} for c in checks for dx in (CONFIRM_STEP_NM, -CONFIRM_STEP_NM)]
        t = time.perf_counter()
        ref = solve({k: [r[k] for r in rows] for k in rows[0]}, statistics, ionisation=ionisation)
        out["solver_seconds"] = time.perf_counter() - t
        ok = _search.meets(ref, **target)
        for k, c in enumerate(checks):
            out[c]["confirmed"] = bool(ok[2 * k] and not ok[2 * k + 1])
            out[c]["solver_vbi_V"] = (float(ref["vbi_V"][2 * k]), float(ref["vbi_V"][2 * k + 1]))
    return out
