"""Unknowns of a calibration and their priors.

An unknown is a design column (``dit_cm2eV``, ``cnl_eV``, ``shell_doping_cm3``,
``core_doping_cm3``) shared across the series or, where the user says so, one per row. It is
sampled in a working coordinate z: log10 of the column for D_it and dopings, the column itself
for the neutral level. Priors (all truncated to a finite support, which also bounds the model
table):

  log-uniform  low..high [column unit]           p(z) uniform on [log10 low, log10 high]
  uniform      low..high [column unit]           p(x) uniform (dopings and D_it: p(z) ~ 10^z)
  normal       mean, sd [column unit]            truncated at mean +- TRUNCATE_SD sd
  log-normal   median [column unit], sd [dex]    normal in z, truncated likewise

Defaults (docs/calibrate.md), the physical ranges the shipped bundles cover:
D_it log-uniform 1e10-1e14 cm^-2 eV^-1; E_cnl normal about the material's default with
sd 0.1 eV, truncated to +-0.2 eV; a doping log-normal about the row's design value with sd
0.15 dex (a factor 1.41: "off by tens of percent", common practice), truncated at 3 sd, or
log-uniform 1e16-1e19 cm^-3 where the design gives none. Every support is clipped to
``DOMAIN``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ._design import parse_quantity
from ._errors import DesignError

#: short names accepted for unknowns -> design column
ALIASES = {"dit": "dit_cm2eV", "cnl": "cnl_eV", "shell-doping": "shell_doping_cm3", "core-doping": "core_doping_cm3"}
LOG_UNKNOWNS = ("dit_cm2eV", "shell_doping_cm3", "core_doping_cm3")
PRIORS = ("log-uniform", "uniform", "normal", "log-normal")
TRUNCATE_SD = 3.0  #: normal priors are cut at this many sd
DEFAULT_CNL_SD_EV = 0.1  #: [eV]
CNL_HALF_RANGE_EV = 0.2  #: [eV] the bundles' trained range about the material default
DEFAULT_DOPING_SD_DEX = 0.15  #: [decades]
#: column -> allowed (low, high) of any prior support [column unit]; the shipped bundles' domain
DOMAIN = {"dit_cm2eV": (1e10, 1e14), "shell_doping_cm3": (1e16, 1e19), "core_doping_cm3": (1e16, 1e19)}


@dataclass
class Unknown:
    """One unknown: design ``column``, ``prior`` name, its two parameters ``a``, ``b`` [column
    unit; sd of log-normal in dex], ``per_row`` flag, support ``lo``..``hi`` in z."""

    column: str
    prior: str
    a: float
    b: float
    per_row: bool
    lo: float
    hi: float

    @property
    def log(self) -> bool:
        return self.column in LOG_UNKNOWNS

    def to_value(self, z):
        """z -> column value [column unit]."""
        return 10.0 ** np.asarray(z) if self.log else np.asarray(z)

    def log_prior(self, z):
        """log p(z) up to a constant; -inf outside the support."""
        z = np.asarray(z, dtype=float)
        inside = (z >= self.lo) & (z <= self.hi)
        if self.prior == "log-uniform":
            lp = np.zeros_like(z)
        elif self.prior == "uniform":
            lp = z * math.log(10.0) if self.log else np.zeros_like(z)  # Jacobian of x = 10^z
        elif self.prior == "normal":
            x = self.to_value(z)
            lp = -0.5 * ((x - self.a) / self.b) ** 2 + (z * math.log(10.0) if self.log else 0.0)
        else:  # log-normal: normal in z
            lp = -0.5 * ((z - math.log10(self.a)) / self.b) ** 2
        return np.where(inside, lp, -np.inf)

    def draw(self, rng, size):
        """Independent draws of z from the prior (rejection inside the support)."""
        out = np.empty(0)
        while out.size < size:
            if self.prior == "log-uniform" or (self.prior == "uniform" and not self.log):
                z = rng.uniform(self.lo, self.hi, 4 * size)
            elif self.prior == "uniform":
                z = np.log10(rng.uniform(10 ** self.lo, 10 ** self.hi, 4 * size))
            elif self.prior == "normal":
                x = rng.normal(self.a, self.b, 4 * size)
                z = np.log10(np.where(x > 0, x, np.nan)) if self.log else x
            else:
                z = rng.normal(math.log10(self.a), self.b, 4 * size)
            out = np.concatenate([out, z[(z >= self.lo) & (z <= self.hi)]])
        return out[:size]

    def describe(self) -> str:
        if self.prior in ("log-uniform", "uniform"):
            return f"{self.prior} {self.a:g}..{self.b:g}"
        if self.prior == "normal":
            return f"normal {self.a:g} ± {self.b:g}"
        return f"log-normal {self.a:g} × 10^±{self.b:g}"


def column_of(name: str) -> str:
    """An unknown's design column from its column name or short name (dit, cnl, shell-doping,
    core-doping)."""
    key = str(name).strip()
    col = ALIASES.get(key.lower(), key.replace("-", "_"))
    if col not in LOG_UNKNOWNS + ("cnl_eV",):
        raise DesignError("unknown", f"one of {', '.join(ALIASES)} (or their columns "
                                     f"{', '.join(ALIASES.values())})", name)
    return col


def make_unknown(column: str, spec: dict | None, design_value: float, cnl_default: float,
                 per_row: bool = False) -> Unknown:
    """Build an ``Unknown`` from a prior spec ``{"prior": NAME, "low"/"high" or "mean"/"sd" or
    "median"/"sd_dex"}`` (None: the documented default). ``design_value``: the row's (or
    series') design value of the column, NaN if not given [column unit]; ``cnl_default``: the
    material's neutral level [eV]."""
    spec = dict(spec or {})
    prior = spec.pop("prior", None)
    field = f"prior of {column}"
    if prior is None:
        if column == "dit_cm2eV":
            prior, a, b = "log-uniform", *DOMAIN["dit_cm2eV"]
        elif column == "cnl_eV":
            prior, a, b = "normal", cnl_default, DEFAULT_CNL_SD_EV
        elif math.isfinite(design_value):
            prior, a, b = "log-normal", design_value, DEFAULT_DOPING_SD_DEX
        else:
            prior, a, b = "log-uniform", *DOMAIN[column]
    else:
        if prior not in PRIORS:
            raise DesignError(field, f"one of {', '.join(PRIORS)}", prior)
        keys = {"log-uniform": ("low", "high"), "uniform": ("low", "high"), "normal": ("mean", "sd"),
                "log-normal": ("median", "sd_dex")}[prior]
        if set(spec) != set(keys):
            raise DesignError(field, f"{prior} takes {' and '.join(keys)}", ", ".join(sorted(spec)) or "nothing")
        a = parse_quantity(column, spec[keys[0]])
        b = float(spec[keys[1]]) if prior == "log-normal" else parse_quantity(column, spec[keys[1]])
        if prior == "log-normal" and column not in LOG_UNKNOWNS:
            raise DesignError(field, "log-normal is for D_it and dopings; use normal for cnl_eV", prior)
        if prior == "log-uniform" and column not in LOG_UNKNOWNS:
            raise DesignError(field, "log-uniform is for D_it and dopings; use uniform for cnl_eV", prior)
        if prior in ("log-uniform", "uniform") and not a < b:
            raise DesignError(field, "low must be below high", f"{a:g} .. {b:g}")
        if prior in ("normal", "log-normal") and not (math.isfinite(b) and b > 0):
            raise DesignError(field, "sd must be > 0", b)
        if column in LOG_UNKNOWNS and a <= 0:
            raise DesignError(field, f"{column} must be > 0", a)
    if prior in ("log-uniform", "uniform"):
        lo, hi = a, b
    elif prior == "normal":
        lo, hi = a - TRUNCATE_SD * b, a + TRUNCATE_SD * b
    else:
        lo, hi = a * 10 ** (-TRUNCATE_SD * b), a * 10 ** (TRUNCATE_SD * b)
    if column == "cnl_eV":
        dlo, dhi = cnl_default - CNL_HALF_RANGE_EV, cnl_default + CNL_HALF_RANGE_EV
    else:
        dlo, dhi = DOMAIN[column]
    lo, hi = max(lo, dlo), min(hi, dhi)
    if not lo < hi:
        raise DesignError(field, f"support must overlap the allowed range [{dlo:g}, {dhi:g}]", describe_ab(prior, a, b))
    if column in LOG_UNKNOWNS:
        lo, hi = math.log10(lo), math.log10(hi)
    return Unknown(column, prior, float(a), float(b), bool(per_row), float(lo), float(hi))


def describe_ab(prior, a, b):
    return f"{prior} {a:g}, {b:g}"
