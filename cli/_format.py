"""Numbers as the front end prints them: one precision per kind of quantity, the same in every
command (docs/output.md lists them). NaN and None print as "—"."""

from __future__ import annotations

import math

DASH = "—"


def _bad(x) -> bool:
    return x is None or (isinstance(x, float) and not math.isfinite(x))


def volts(x, unit: bool = True) -> str:
    """Potentials [V] to 1 mV (three decimals): the surrogates' mean error is about 1.3 mV."""
    if _bad(x):
        return DASH
    return f"{float(x):.3f}" + (" V" if unit else "")


def millivolts(x) -> str:
    """Differences of potentials [mV] to 0.1 mV, signed."""
    return DASH if _bad(x) else f"{round(float(x), 1) + 0.0:+.1f} mV"  # + 0.0: no "-0.0"


def nm(x, unit: bool = True) -> str:
    """Lengths [nm] in three significant figures without an exponent (45, 79.6, 9.56, 1230)."""
    if _bad(x):
        return DASH
    return f"{float(f'{float(x):.3g}'):g}" + (" nm" if unit else "")


def nm_range(lo, hi) -> str:
    """A range of lengths [nm], one value when both print alike."""
    a, b = nm(lo, unit=False), nm(hi, unit=False)
    return f"{a} nm" if a == b else f"{a}–{b} nm"


def density(x) -> str:
    """Dopings [cm^-3] and D_it [cm^-2 eV^-1] in two significant figures, compact exponent
    (5e17, 2.5e12); zero prints as 0."""
    if _bad(x):
        return DASH
    x = float(x)
    if x == 0:
        return "0"
    mant, exp = f"{x:.1e}".split("e")
    mant = mant.rstrip("0").rstrip(".")
    return f"{mant}e{int(exp)}"


def percent(x) -> str:
    """Shares and fractions [1] as percent to 0.1 %."""
    return DASH if _bad(x) else f"{100 * float(x):.1f} %"


def probability(x) -> str:
    """Probabilities [1] to three decimals."""
    return DASH if _bad(x) else f"{float(x):.3f}"


def milliseconds(seconds) -> str:
    """Times given in seconds, printed in ms (three significant figures) or s above 10 s."""
    if _bad(seconds):
        return DASH
    s = float(seconds)
    return f"{s:.1f} s" if s >= 10 else f"{float(f'{1e3 * s:.3g}'):g} ms"


def quantity(col: str, x) -> str:
    """A design-table column's value by its kind (radii, dopings, energies, temperatures)."""
    if col.endswith("_nm"):
        return nm(x, unit=False)
    if col.endswith("_cm3") or col.endswith("_cm2eV"):
        return density(x)
    if col.endswith("_V") or col.endswith("_eV"):
        return volts(x, unit=False)
    if col.endswith("_K"):
        return DASH if _bad(x) else f"{float(x):g}"
    return str(x)
