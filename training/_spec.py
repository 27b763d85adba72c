"""Domain specs: one small TOML file per model bundle saying what a training set covers.

Example (``models/specs/gaas-pcore.toml``)::

    [bundle]
    name = "gaas-pcore"
    material = "GaAs"
    core_type = "p"
    statistics = "fermi-dirac"
    ionisation = "auto"    # "full" (default) or "auto": the solver's and the features' dopant model
    seed = 20261201

    [variables]            # sampled: min, max, transform = "log" | "linear" | "shifted-log"
    core_radius_nm = { min = 10, max = 300, transform = "log" }
    dit_cm2eV = { min = 0, max = 1e14, transform = "shifted-log", offset = 1e10 }
    ...

    [fixed]                # design-table columns held constant
    interlayer_nm = 0

    [sizes]
    train = 200000         # Sobol base plus refinement rounds
    refine_rounds = 2      # rounds that add points near regime boundaries
    refine_fraction = 0.4  # share of ``train`` placed by refinement
    calibration = 4000     # uniform, own seed, never used for fitting
    test = 6000            # uniform, own seed, held out
    shard_rows = 2048      # rows per shard file
"""

from __future__ import annotations

import hashlib
import json
import re
from dataclasses import asdict, dataclass, field

import numpy as np

from .. import INPUT_COLUMNS, NUMERIC_COLUMNS, RadialpnError, get_material
from .._materials import is_builtin, material_parameters
from .._statistics import STATISTICS
from .._textfile import read_table_file


class SpecError(RadialpnError, ValueError):
    """A domain spec is malformed; the message names the key and what is allowed."""


@dataclass(frozen=True)
class Variable:
    name: str
    lo: float
    hi: float
    transform: str  # "log", "linear" or "shifted-log"
    #: "shifted-log": x + offset is log-uniform, so min may be 0 (D_it of a passivated surface)
    #: and designs thin out linearly below ``offset`` [unit of the column]
    offset: float = 0.0

    def from_unit(self, u):
        """Map points of [0, 1] to the variable's range [unit of the column]."""
        u = np.asarray(u, dtype=float)
        if self.transform in ("log", "shifted-log"):
            s = self.offset if self.transform == "shifted-log" else 0.0
            lo, hi = np.log10(self.lo + s), np.log10(self.hi + s)
            x = np.clip(10.0 ** (lo + u * (hi - lo)) - s, self.lo, self.hi)
            # u = 0 is min exactly (10**log10(s) - s need not round to 0 for every offset)
            return np.where(u <= 0.0, self.lo, x) if self.transform == "shifted-log" else x
        return self.lo + u * (self.hi - self.lo)

    def to_unit(self, x):
        x = np.asarray(x, dtype=float)
        if self.transform in ("log", "shifted-log"):
            s = self.offset if self.transform == "shifted-log" else 0.0
            lo, hi = np.log10(self.lo + s), np.log10(self.hi + s)
            return (np.log10(x + s) - lo) / (hi - lo)
        return (x - self.lo) / (self.hi - self.lo)


@dataclass(frozen=True)
class DomainSpec:
    name: str
    material: str
    core_type: str
    statistics: str
    seed: int
    variables: tuple
    fixed: dict = field(default_factory=dict)
    ionisation: str = "full"  #: "full" or "auto" (``radialpn._ionisation``)
    train: int = 200000
    refine_rounds: int = 2
    refine_fraction: float = 0.4
    calibration: int = 4000
    test: int = 6000
    shard_rows: int = 2048

    def to_dict(self) -> dict:
        d = asdict(self)
        # keys at their defaults are left out, so specs written before them keep their digests
        d["variables"] = [{k: x for k, x in asdict(v).items() if k != "offset" or v.transform == "shifted-log"}
                          for v in self.variables]
        if self.ionisation == "full":
            del d["ionisation"]
        if not is_builtin(self.material):  # a user material: its definition is part of what was built
            d["material_parameters"] = material_parameters(get_material(self.material))
        return d

    def digest(self) -> str:
        """SHA-256 of the canonical JSON form: what a dataset directory was built from."""
        return hashlib.sha256(json.dumps(self.to_dict(), sort_keys=True).encode()).hexdigest()

    def designs(self, unit) -> dict:
        """Design-table columns for points ``unit`` (n, d) of the unit cube."""
        cols = {"material": self.material, "core_type": self.core_type}
        cols.update({k: np.full(unit.shape[0], float(v)) for k, v in self.fixed.items()})
        for j, var in enumerate(self.variables):
            cols[var.name] = var.from_unit(unit[:, j])
        return cols

    def to_unit(self, frame) -> np.ndarray:
        """Unit-cube coordinates of designs (mapping or DataFrame of the variables' columns)."""
        return np.column_stack([v.to_unit(np.asarray(frame[v.name], dtype=float)) for v in self.variables])


def _need(table, key, where, kind=None):
    if key not in table:
        raise SpecError(f"{where}.{key}: required")
    v = table[key]
    if kind is not None and not isinstance(v, kind):
        raise SpecError(f"{where}.{key}: expected {getattr(kind, '__name__', kind)} (got {v!r})")
    return v


_NAME = re.compile(r"[A-Za-z0-9][A-Za-z0-9_.-]{0,63}")


def _number(v, where, lo, hi) -> float:
    """A finite number in [lo, hi] (no text, no true/false), else a SpecError naming ``where``."""
    if isinstance(v, bool) or not isinstance(v, (int, float)) or not np.isfinite(v) or not lo <= v <= hi:
        raise SpecError(f"{where}: a finite number in [{lo:g}, {hi:g}] (got {v!r})")
    return float(v)


def spec_from_dict(data: dict) -> DomainSpec:
    """Build and check a ``DomainSpec`` from the parsed TOML tables."""
    if not isinstance(data, dict):
        raise SpecError("spec: expected tables [bundle], [variables], [fixed], [sizes]")
    b = _need(data, "bundle", "spec", dict)
    name = _need(b, "name", "bundle", str)
    if not _NAME.fullmatch(name) or ".." in name:
        raise SpecError(f"bundle.name: 1-64 letters, digits and _.- (it names folders; no paths) (got {name!r})")
    material = get_material(str(_need(b, "material", "bundle"))).name
    core_type = str(_need(b, "core_type", "bundle")).lower()
    if core_type not in ("p", "n"):
        raise SpecError(f"bundle.core_type: must be p or n (got {core_type!r})")
    statistics = str(b.get("statistics", "fermi-dirac")).lower()
    if statistics not in STATISTICS:
        raise SpecError(f"bundle.statistics: one of {', '.join(STATISTICS)} (got {statistics!r})")
    ionisation = str(b.get("ionisation", "full")).lower()
    if ionisation not in ("full", "auto"):
        raise SpecError(f"bundle.ionisation: full or auto (got {ionisation!r})")
    seed = _need(b, "seed", "bundle", int)
    if isinstance(seed, bool) or not 0 <= seed < 2 ** 63:
        raise SpecError(f"bundle.seed: a whole number in [0, 2^63) (got {seed!r})")
    variables = []
    for col, t in _need(data, "variables", "spec", dict).items():
        if col not in NUMERIC_COLUMNS:
            raise SpecError(f"variables: {col!r} is not a numeric design-table column ({', '.join(NUMERIC_COLUMNS)})")
        if not isinstance(t, dict):
            raise SpecError(f"variables.{col}: expected a table {{min, max, transform}}")
        lo_ok, hi_ok = NUMERIC_COLUMNS[col][:2]
        lo = _number(_need(t, "min", f"variables.{col}"), f"variables.{col}.min", lo_ok, hi_ok)
        hi = _number(_need(t, "max", f"variables.{col}"), f"variables.{col}.max", lo_ok, hi_ok)
        tr = str(t.get("transform", "linear"))
        if tr not in ("log", "linear", "shifted-log"):
            raise SpecError(f"variables.{col}.transform: log, linear or shifted-log (got {tr!r})")
        if not (lo_ok <= lo < hi <= hi_ok):
            raise SpecError(f"variables.{col}: need {lo_ok:g} <= min < max <= {hi_ok:g} (got {lo:g}, {hi:g})")
        if tr == "log" and lo <= 0:
            raise SpecError(f"variables.{col}: a log transform needs min > 0 (got {lo:g}); "
                            "shifted-log takes min = 0")
        offset = 0.0
        if tr == "shifted-log":
            offset = _number(_need(t, "offset", f"variables.{col}"), f"variables.{col}.offset", 1e-300, 1e300)
            if lo < 0 or lo + offset <= 0:
                raise SpecError(f"variables.{col}: shifted-log needs min >= 0 (got {lo:g})")
        elif "offset" in t:
            raise SpecError(f"variables.{col}.offset: only for transform = \"shifted-log\"")
        variables.append(Variable(col, lo, hi, tr, offset))
    if not variables:
        raise SpecError("variables: at least one sampled variable")
    fixed = data.get("fixed", {})
    if not isinstance(fixed, dict):
        raise SpecError(f"fixed: expected a table of column = value (got {fixed!r})")
    fixed = dict(fixed)
    for col in fixed:
        if col not in NUMERIC_COLUMNS or col in {v.name for v in variables}:
            raise SpecError(f"fixed: {col!r} must be a numeric design-table column that is not sampled")
        fixed[col] = _number(fixed[col], f"fixed.{col}", *NUMERIC_COLUMNS[col][:2])
    s = data.get("sizes", {})
    if not isinstance(s, dict):
        raise SpecError(f"sizes: expected a table (got {s!r})")
    sizes = {}
    for key, lo, hi, kind in (("train", 100, 10 ** 8, int), ("refine_rounds", 0, 20, int),
                              ("refine_fraction", 0.0, 0.9, (int, float)), ("calibration", 0, 10 ** 7, int),
                              ("test", 0, 10 ** 7, int), ("shard_rows", 64, 10 ** 6, int)):
        if key in s:
            v = s[key]
            if not isinstance(v, kind) or isinstance(v, bool) or not lo <= v <= hi:
                raise SpecError(f"sizes.{key}: allowed range [{lo:g}, {hi:g}] (got {v!r})")
            sizes[key] = v
    spec = DomainSpec(name=name, material=material, core_type=core_type, statistics=statistics, seed=seed,
                      variables=tuple(variables), fixed=fixed, ionisation=ionisation, **sizes)
    missing = [c for c in INPUT_COLUMNS[2:] if c not in {v.name for v in variables} | set(fixed)
               and NUMERIC_COLUMNS[c][2] is None]
    if missing:
        raise SpecError(f"spec: required design columns neither sampled nor fixed: {', '.join(missing)}")
    return spec


def load_spec(path) -> DomainSpec:
    """Read a domain spec TOML file (see module docstring)."""
    return spec_from_dict(read_table_file(path, SpecError, "spec"))
