"""A design review: every design question about one wire in one call, for the review sheet
(`radialpn report`) and for programs. Plain numpy; each part is the public question's own answer
(``predict``, ``solve``, ``profile``, ``regime_map``, ``critical_dimensions``, ``spread``)."""

from __future__ import annotations

import math
import time

from . import _questions
from ._engines import DEFAULT_ENGINE, answer, check_engine, solve
from ._errors import RadialpnError
from ._model import INTERVAL_TIE_V
from ._tunnel import TUNNEL_RISK_LOG10

#: run-to-run spreads used when none are given: illustrative values of a typical MOVPE/MBE
#: process (common practice, not a measurement of any reactor); replace them with your own
DEFAULT_SPREADS = {"core_radius_nm": "5%", "shell_thickness_nm": "2nm", "core_doping_cm3": "25%",
                   "shell_doping_cm3": "25%", "dit_cm2eV": "100%,uniform"}
REVIEW_SAMPLES = 20_000  #: growth runs of the spread section (about 2 s on the surrogate)
REVIEW_CELLS = (24, 12)  #: regime-map cells (nx, ny) around the design
MAP_SPAN = 2.5  #: the map spans design / MAP_SPAN .. design * MAP_SPAN in core radius and shell thickness


def _scalar(x):
    x = x[0]
    return x.item() if hasattr(x, "item") else x


def _around(value, lo, hi):
    """A log range about ``value`` [nm], MAP_SPAN either way, kept inside [lo, hi]."""
    a, b = max(value / MAP_SPAN, lo), min(value * MAP_SPAN, hi)
    return (a, b) if a < b else (lo, hi)


def review(design: dict, spreads: dict | None = None, samples: int = REVIEW_SAMPLES, cells=REVIEW_CELLS,
           fraction_min: float | None = 0.9, vbi_min_V: float | None = None, engine: str = DEFAULT_ENGINE,
           statistics: str = "fermi-dirac", seed: int = 0, confirm: bool = True, ionisation: str = "auto") -> dict:
    """Everything a design review shows about one wire. Returns ``design`` (validated values),
    ``answer`` (the engine's row, with the surrogate's second opinion), ``check`` (the reference
    solver on the same design: ``regime``, ``vbi_V`` [V], ``status``, ``seconds`` [s],
    ``same_regime``, ``difference_mV`` [mV], ``inside_interval``), ``profile`` (solver band
    diagram) and ``profile_depletion`` (the approximation's, or None), ``map`` (regime map over
    core radius x shell thickness around the design, ``cells`` (nx, ny)), ``critical``
    (``critical_dimensions`` with solver confirmation when ``confirm``), ``spread``
    (``samples`` growth runs with ``spreads``, default ``DEFAULT_SPREADS``), ``tunnelling``
    (from the solver check: ``peak_field_V_per_cm`` [V/cm], ``tunnel_log10`` [1] (Kane's WKB
    estimate, ``_tunnel``), ``threshold_log10`` and ``at_risk``; None when the solver gives no
    answer), ``seconds`` per part [s], ``target`` and
    ``target_vbi_V`` [V] (the target as a voltage at the nominal design's V_bi0)."""
    check_engine(engine)
    base = _questions.design_row(design)
    for col in ("core_radius_nm", "shell_thickness_nm"):
        if col not in base:
            raise _questions.DesignError(col, "a review needs the whole design (core radius and shell thickness)")
    seconds = {}
    t = time.perf_counter()
    row = answer({k: [v] for k, v in base.items()}, engine, statistics, second_opinion=engine == "surrogate",
                 ionisation=ionisation)
    ans = {k: _scalar(v) for k, v in row.items()}
    seconds["answer"] = time.perf_counter() - t
    t = time.perf_counter()
    ref = solve({k: [v] for k, v in base.items()}, statistics, ionisation=ionisation)
    seconds["check"] = time.perf_counter() - t
    chk = {"regime": str(ref["regime"][0]), "vbi_V": float(ref["vbi_V"][0]), "status": str(ref["status"][0]),
           "seconds": seconds["check"]}
    both = chk["status"] == "ok" and ans["status"] == "ok"
    chk["same_regime"] = both and chk["regime"] == ans["regime"]
    chk["difference_mV"] = 1e3 * (ans["vbi_V"] - chk["vbi_V"]) if both else math.nan
    chk["inside_interval"] = (bool(ans["vbi_low_V"] - INTERVAL_TIE_V <= chk["vbi_V"] <= ans["vbi_high_V"] + INTERVAL_TIE_V)
                              if both and "vbi_low_V" in ans else None)
    t = time.perf_counter()
    prof = _questions.profile(base, "solver", statistics, ionisation)
    try:
        prof_da = _questions.profile(base, "depletion", statistics, ionisation)
    except RadialpnError:  # e.g. a surface that accumulates: the approximation has no bands to draw
        prof_da = None
    seconds["profile"] = time.perf_counter() - t
    t = time.perf_counter()
    scan = _questions._scan_ranges(base, engine, None)
    x = ("core_radius_nm", *_around(base["core_radius_nm"], *scan["core_radius_nm"]))
    y = ("shell_thickness_nm", *_around(base["shell_thickness_nm"], *scan["shell_thickness_nm"]))
    grid = _questions.regime_map(base, x, y, cells, engine, statistics, ionisation=ionisation)
    seconds["map"] = time.perf_counter() - t
    t = time.perf_counter()
    crit = _questions.critical_dimensions(base, fraction_min, vbi_min_V, engine, statistics, confirm=confirm,
                                          ionisation=ionisation)
    seconds["critical"] = time.perf_counter() - t
    t = time.perf_counter()
    spr = _questions.spread(base, spreads or DEFAULT_SPREADS, samples, seed, fraction_min, vbi_min_V, engine=engine,
                            statistics=statistics, ionisation=ionisation)
    seconds["spread"] = time.perf_counter() - t
    v0 = ans["vbi0_V"] if ans["status"] == "ok" else math.nan
    goal = max(fraction_min * v0 if fraction_min is not None else -math.inf,
               vbi_min_V if vbi_min_V is not None else -math.inf)
    return {"design": base, "answer": ans, "target_vbi_V": goal, "check": chk, "profile": prof, "profile_depletion": prof_da, "map": grid,
            "critical": crit, "spread": spr, "spreads_given": spreads is not None, "tunnelling": _tunnelling(ref),
            "seconds": seconds, "engine": engine, "statistics": statistics, "ionisation": ionisation,
            "target": _questions.target_text(fraction_min, vbi_min_V)}


def _tunnelling(ref) -> dict | None:
    """The junction's tunnelling indicator from the solver's row (None where it has none)."""
    field, log10 = float(ref["peak_field_V_per_cm"][0]), float(ref["tunnel_log10"][0])
    if str(ref["status"][0]) != "ok" or not math.isfinite(field):
        return None
    return {"peak_field_V_per_cm": field, "tunnel_log10": log10, "threshold_log10": TUNNEL_RISK_LOG10,
            "at_risk": bool(math.isfinite(log10) and log10 > TUNNEL_RISK_LOG10)}
