"""The interlayer as a sized variable of ``critical_dimensions``: the thickest undoped interlayer
that keeps the V_bi target (it takes its thickness from the doped shell, so V_bi falls as it
grows) and the thinnest that brings the junction's tunnelling estimate below
``TUNNEL_RISK_LOG10`` (it spreads V_bi over a wider field region, so the peak field falls)."""

from __future__ import annotations

import math

import numpy as np

from . import _search
from ._design import NUMERIC
from ._engines import answer
from ._qcommon import _nm, _short_goal
from ._tunnel import TUNNEL_RISK_LOG10

INTERLAYER_POINTS = 400  #: points of the dense interlayer scans (the range is linear from 0)
SHELL_LEFT_NM = 0.5  #: validation keeps at least this much doped shell beside the interlayer [nm]


def interlayer_range(base: dict) -> tuple:
    """(0, shell thickness - SHELL_LEFT_NM) [nm]: the interlayers a design admits."""
    return 0.0, min(float(base["shell_thickness_nm"]) - SHELL_LEFT_NM, NUMERIC["interlayer_nm"][1])


def tunnel_engine(engine: str) -> str:
    """The engine that judges tunnelling: the depletion engine for itself, else the solver
    (the surrogate bundles give no tunnelling estimate)."""
    return "depletion" if engine == "depletion" else "solver"


def _tunnel_free(out, bound):
    with np.errstate(invalid="ignore"):
        return (out["status"] == "ok") & (np.asarray(out.get("tunnel_log10", np.nan)) <= TUNNEL_RISK_LOG10)


def critical_interlayer(predict, base: dict, target: dict, goal: str, engine: str, statistics: str,
                        ionisation: str = "auto") -> dict:
    """The interlayer item of ``critical_dimensions``: ``value_nm`` (the thickest interlayer
    [nm] up to which V_bi keeps the target; NaN with a ``reason`` when even none does),
    ``optimistic_nm``/``conservative_nm``, ``regime``, ``monotone``, ``engine`` (which engine
    answered there), ``tunnel_free_nm`` (the thinnest interlayer [nm] whose tunnelling estimate
    is at or below ``TUNNEL_RISK_LOG10``; 0 when the p-n wire is already below it; NaN with
    ``tunnel_reason`` when no admitted interlayer is) judged by ``tunnel_engine``, and
    ``scan_nm`` (the range scanned)."""
    lo, hi = interlayer_range(base)
    item = {"value_nm": math.nan, "optimistic_nm": math.nan, "conservative_nm": math.nan, "monotone": True,
            "regime": "", "engine": "", "confirmed": None, "solver_vbi_V": (math.nan, math.nan), "reason": "",
            "tunnel_free_nm": math.nan, "tunnel_reason": "", "tunnel_engine": tunnel_engine(engine),
            "scan_nm": (lo, hi)}
    if hi <= lo:
        item["reason"] = item["tunnel_reason"] = (f"a {_nm(base['shell_thickness_nm'])} nm shell leaves no room for an "
                                                  f"interlayer (at least {SHELL_LEFT_NM:g} nm must stay doped)")
        return item
    r = _search.critical(predict, base, "interlayer_nm", lo, hi, **target, points=INTERLAYER_POINTS, decreasing=True)
    item.update(value_nm=r["value"], optimistic_nm=r["optimistic"], conservative_nm=r["conservative"],
                monotone=r["monotone"], regime=r.get("answer", {}).get("regime", ""),
                engine=r.get("answer", {}).get("engine", ""))
    if not math.isfinite(r["value"]):
        at = predict({**base, "interlayer_nm": [lo]})
        item["reason"] = (f"even without an interlayer the design misses {_short_goal(goal)}"
                          + (f" ({at['status'][0]})" if at["status"][0] != "ok" else
                             f" (V_bi {float(at['vbi_V'][0]):.3f} V of V_bi0 {float(at['vbi0_V'][0]):.3f} V)"))
    elif r["value"] >= hi:
        item["reason"] = (f"every interlayer up to {_nm(hi)} nm (all but {SHELL_LEFT_NM:g} nm of the shell) keeps "
                          f"{_short_goal(goal)}")
    judge = lambda d: answer(d, item["tunnel_engine"], statistics, ionisation=ionisation)  # noqa: E731
    t = _search.critical(judge, base, "interlayer_nm", lo, hi, points=INTERLAYER_POINTS, accept=_tunnel_free,
                         intervals=False)
    item["tunnel_free_nm"] = t["value"]
    if not math.isfinite(t["value"]):
        at = judge({**base, "interlayer_nm": [hi]})
        est = np.asarray(at.get("tunnel_log10", [math.nan]), dtype=float)[0]
        item["tunnel_reason"] = (f"even a {_nm(hi)} nm interlayer leaves the junction at tunnelling risk "
                                 f"(estimate 10^{est:.1f} above 10^{TUNNEL_RISK_LOG10:g})" if math.isfinite(est) else
                                 f"the {item['tunnel_engine']} engine gives no tunnelling estimate here "
                                 f"({at['status'][0]})")
    return item
