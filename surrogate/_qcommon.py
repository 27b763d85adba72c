"""Shared pieces of the design questions (``_questions``, ``_candidates``, ``_tolerance``):
validated design rows, targets and their wording, swept columns and their ranges.

Targets are "V_bi >= fraction_min * V_bi0" [1] or "V_bi >= vbi_min_V" [V] (either, or both).
"""

from __future__ import annotations

import math

import numpy as np

from ._design import NUMERIC, check_design, parse_quantity
from ._errors import DesignError
from ._search import LOG_COLUMNS

SWEPT = tuple(NUMERIC)  #: the columns a map, sweep, search or spread may vary (the interlayer too)

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



def answered_by(res: dict) -> dict:
    """engine name -> how many rows it answered (status "ok"), most first: says which engine
    gave the numbers when ``auto`` mixes the surrogate and the solver."""
    ok = np.asarray(res["status"]) == "ok"
    names, counts = np.unique(np.asarray(res["engine"], dtype=str)[ok], return_counts=True)
    order = np.argsort(-counts, kind="stable")
    return {str(names[i]): int(counts[i]) for i in order}
