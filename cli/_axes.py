"""Parsing of design-variable names, ranges and spreads given on the command line."""

from __future__ import annotations

import surrogate

from . import _errors
from ._designargs import DESIGN_FLAGS

#: short names accepted on the command line (the design flags without dashes) -> column
VARIABLES = {flag[2:]: col for flag, (col, _) in DESIGN_FLAGS.items()
             if col not in ("material", "core_type", "interlayer_nm")}
VARIABLES.update({"shell": "shell_thickness_nm", "core": "core_radius_nm", "T": "temperature_K"})
UNITS = {"core_radius_nm": "nm", "shell_thickness_nm": "nm", "core_doping_cm3": "cm⁻³", "shell_doping_cm3": "cm⁻³",
         "dit_cm2eV": "cm⁻²eV⁻¹", "cnl_eV": "eV", "temperature_K": "K"}


def column(name: str, option: str) -> str:
    col = VARIABLES.get(name.strip())
    if col is None:
        raise _errors.UsageError(f"{option}: unknown variable {name!r}; one of {', '.join(sorted(VARIABLES))}")
    return col


def value(col: str, text: str, option: str) -> float:
    try:
        x = surrogate.parse_quantity(col, text)
    except surrogate.DesignError as exc:
        raise _errors.UsageError(f"{option}: {exc}") from None
    lo, hi = surrogate.NUMERIC_COLUMNS[col][:2]
    if not lo <= x <= hi:
        raise _errors.UsageError(f"{option}: {col} allowed range [{lo:g}, {hi:g}] (got {x:g})")
    return x


def axis_spec(text: str, option: str):
    """NAME:LO:HI -> (column, lo, hi), e.g. shell-thickness:2nm:60nm."""
    parts = text.split(":")
    if len(parts) != 3:
        raise _errors.UsageError(f"{option}: expected NAME:LOW:HIGH, e.g. shell-thickness:2nm:60nm (got {text!r})")
    col = column(parts[0], option)
    lo, hi = value(col, parts[1], option), value(col, parts[2], option)
    if not lo < hi:
        raise _errors.UsageError(f"{option}: LOW must be below HIGH (got {lo:g} and {hi:g})")
    return col, lo, hi


def spread_spec(text: str, option: str):
    """NAME=SIZE[%][,uniform] -> (column, (kind, size, relative))."""
    if "=" not in text:
        raise _errors.UsageError(f"{option}: expected NAME=SIZE[%][,uniform], e.g. shell-thickness=2nm or dit=50% "
                                 f"(got {text!r})")
    name, rest = text.split("=", 1)
    col = column(name, option)
    kind = "normal"
    if rest.endswith(",uniform"):
        kind, rest = "uniform", rest[: -len(",uniform")]
    elif rest.endswith(",normal"):
        rest = rest[: -len(",normal")]
    rest = rest.strip().lstrip("±")
    if rest.endswith("%"):
        try:
            size = float(rest[:-1]) / 100.0
        except ValueError:
            raise _errors.UsageError(f"{option}: {col}: spread {rest!r} is not a percentage") from None
        relative = True
    else:
        try:
            size = surrogate.parse_quantity(col, rest)
        except surrogate.DesignError as exc:
            raise _errors.UsageError(f"{option}: {exc}") from None
        relative = False
    if not size > 0:
        raise _errors.UsageError(f"{option}: {col}: spread must be > 0 (got {rest!r})")
    return col, (kind, size, relative)


def fmt_value(col: str, x: float) -> str:
    if col in ("core_doping_cm3", "shell_doping_cm3", "dit_cm2eV"):
        return f"{x:.2g}"
    return f"{x:.3g}"
