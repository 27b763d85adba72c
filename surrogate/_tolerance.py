"""The ``spread`` design question: growth tolerance by Monte Carlo runs around a nominal design,
with yield, regime probabilities and each variable's main effect."""

from __future__ import annotations

import math
import time

import numpy as np

from . import _search
from ._design import REGIMES, parse_quantity
from ._engines import DEFAULT_ENGINE, answer, check_engine
from ._errors import DesignError
from ._qcommon import _check_count, _column, _target, answered_by, design_row, target_text
from ._tunnel import TUNNEL_RISK_LOG10

SPREAD_MODELS = ("regime", "vbi")  #: surrogate trees a spread reads (V_bi and its regime shares)


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
           statistics: str = "fermi-dirac", progress=None, ionisation: str = "auto") -> dict:
    """Growth tolerance: Monte Carlo runs around the nominal ``design`` under run-to-run spread.

    ``spreads``: column -> ``"2nm"`` (one standard deviation), ``"25%"`` (relative, in log for
    radii, dopings and D_it) or ``"100%,uniform"`` (a half width), or (kind, size, relative).
    Returns ``yield`` (share of answered runs meeting the target), ``regime_probability``,
    ``vbi_percentiles_V`` (5/25/50/75/95), ``main_effects`` (first-order share of the yield's
    variance per variable; Saltelli et al., Global Sensitivity Analysis: The Primer, Wiley
    2008, sec. 1.2.5), ``failing_mean_z`` (where failing runs sit, in spreads), ``vbi_V`` (every
    answered run), ``answered``, ``samples``, ``seconds``, ``answered_by`` (engine -> runs it
    answered), ``tunnelling_risk`` (share of the runs with a tunnelling estimate that lie above
    ``TUNNEL_RISK_LOG10``; NaN when no run has one) and ``reason`` (why no yield, else "")."""
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
    res = answer(samples_, engine, statistics, progress=progress, models=SPREAD_MODELS, ionisation=ionisation)
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
           "vbi_V": vb, "reason": "", "first_unanswered": "" if ok.all() else str(res["status"][~ok][0]),
           "answered_by": answered_by(res), "tunnelling_risk": _risk_share(res, ok)}
    if not ok.any():
        out["reason"] = (f"no run was answered by the {engine} engine ({out['first_unanswered']}); a nominal "
                         "design inside the engine's domain, narrower spreads or another engine would")
    return out


def _risk_share(res, ok):
    """Share [1] of the answered runs with a tunnelling estimate that lie above the threshold."""
    t = np.asarray(res.get("tunnel_log10", np.full(ok.size, np.nan)), dtype=float)
    known = ok & np.isfinite(t)
    return float((t[known] > TUNNEL_RISK_LOG10).mean()) if known.any() else math.nan
