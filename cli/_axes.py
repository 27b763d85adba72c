"""Parsing of design-variable names, ranges and spreads given on the command line."""

from __future__ import annotations

import radialpn

from . import _errors
from ._designargs import DESIGN_FLAGS

#: short names accepted on the command line (the design flags without dashes) -> column
VARIABLES = {flag[2:]: col for flag, (col, _) in DESIGN_FLAGS.items()
             if col not in ("material", "core_type")}
VARIABLES.update({"shell": "shell_thickness_nm", "core": "core_radius_nm", "T": "temperature_K"})
UNITS = {"core_radius_nm": "nm", "shell_thickness_nm": "nm", "core_doping_cm3": "cm⁻³", "shell_doping_cm3": "cm⁻³",
         "dit_cm2eV": "cm⁻²eV⁻¹", "cnl_eV": "eV", "temperature_K": "K", "interlayer_nm": "nm"}

#: short column headings for tables that must fit 80 columns (docs/output.md lists them)
SHORT_LABEL = {"core_radius_nm": "core a [nm]", "shell_thickness_nm": "shell t [nm]",
               "core_doping_cm3": "N core [cm⁻³]", "shell_doping_cm3": "N shell [cm⁻³]",
               "dit_cm2eV": "D_it [cm⁻²eV⁻¹]", "cnl_eV": "E_cnl [eV]", "temperature_K": "T [K]",
               "interlayer_nm": "interlayer [nm]"}


def column(name: str, option: str) -> str:
    col = VARIABLES.get(name.strip())
    if col is None:
        raise _errors.UsageError(f"{option}: unknown variable {name!r}; one of {', '.join(sorted(VARIABLES))}")
    return col


def value(col: str, text: str, option: str) -> float:
    try:
        x = radialpn.parse_quantity(col, text)
    except radialpn.DesignError as exc:
        raise _errors.UsageError(f"{option}: {exc}") from None
    lo, hi = radialpn.NUMERIC_COLUMNS[col][:2]
    if not lo <= x <= hi:
        raise _errors.UsageError(f"{option}: {col} allowed range [{lo:g}, {hi:g}] (got {x:g})")
    return x


def axis_spec(text: str, option: str, scaled: bool = False):
    """NAME:LO:HI -> (column, lo, hi), e.g. shell-thickness:2nm:60nm; with ``scaled`` an optional
    fourth part ``log`` or ``linear`` is passed on (``dit:0:1e13:linear``)."""
    parts = text.split(":")
    if not (len(parts) == 3 or (scaled and len(parts) == 4)):
        form = "NAME:LOW:HIGH[:linear|log]" if scaled else "NAME:LOW:HIGH"
        raise _errors.UsageError(f"{option}: expected {form}, e.g. shell-thickness:2nm:60nm (got {text!r})")
    if len(parts) == 4 and parts[3] not in ("log", "linear"):
        raise _errors.UsageError(f"{option}: the scale is log or linear (got {parts[3]!r})")
    col = column(parts[0], option)
    lo, hi = value(col, parts[1], option), value(col, parts[2], option)
    if not lo < hi:
        raise _errors.UsageError(f"{option}: LOW must be below HIGH (got {lo:g} and {hi:g})")
    return (col, lo, hi, parts[3]) if len(parts) == 4 else (col, lo, hi)


def fmt_value(col: str, x: float) -> str:
    """A design variable's value as tables and axes print it (cli/_format.py's precision)."""
    from ._format import quantity

    return quantity(col, x)
