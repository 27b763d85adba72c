"""The design table (docs/design-table.md): column names, defaults, allowed ranges,
unit-suffix parsing, and the one validation layer every entry point (API, CLI, files) uses.

``normalize_designs`` turns a mapping of column -> array (or a list of row dicts, or a pandas
DataFrame) into a ``DesignTable`` of float arrays plus one status per row: ``"ok"`` or a
one-line reason naming the field, the allowed range and the value given. Rows are never
dropped. ``check_design`` does the same for one design and raises ``DesignError`` instead.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from ._errors import DesignError, MaterialError
from ._materials import get_material

INPUT_COLUMNS = (
    "material", "core_type", "core_radius_nm", "shell_thickness_nm", "core_doping_cm3",
    "shell_doping_cm3", "dit_cm2eV", "cnl_eV", "temperature_K", "interlayer_nm",
)
OUTPUT_COLUMNS = (
    "regime", "vbi_V", "vbi0_V", "core_neutral_radius_nm", "shell_neutral_nm",
    "surface_bending_V", "engine", "status",
)
SURROGATE_COLUMNS = ("regime_prob", "vbi_low_V", "vbi_high_V", "in_domain")
REGIMES = ("both-neutral", "core-depleted", "shell-depleted", "all-depleted")
CORE_TYPES = ("p", "n")

#: numeric column -> (low, high, default or None if required, unit table key)
NUMERIC = {
    "core_radius_nm": (1.0, 1.0e5, None, "length"),
    "shell_thickness_nm": (0.5, 1.0e5, None, "length"),
    "core_doping_cm3": (1.0e12, 1.0e21, None, "density"),
    "shell_doping_cm3": (1.0e12, 1.0e21, None, "density"),
    "dit_cm2eV": (0.0, 1.0e17, None, "dit"),
    "cnl_eV": (-1.0, 10.0, math.nan, "energy"),  # NaN default: the material's own
    "temperature_K": (20.0, 1000.0, 300.0, "temperature"),
    "interlayer_nm": (0.0, 1.0e4, 0.0, "length"),
}

#: unit suffix (lower case, spaces, '^' and '/' removed) -> factor to the column's unit
UNITS = {
    "length": {"": 1.0, "nm": 1.0, "um": 1e3, "µm": 1e3, "μm": 1e3, "micron": 1e3, "mm": 1e6, "a": 0.1, "å": 0.1},
    "density": {"": 1.0, "cm-3": 1.0, "cm3": 1.0, "percm3": 1.0, "m-3": 1e-6},
    "dit": {"": 1.0, "cm-2ev-1": 1.0, "cm2ev": 1.0, "percm2ev": 1.0},
    "energy": {"": 1.0, "ev": 1.0, "mev": 1e-3, "v": 1.0},
    "temperature": {"": 1.0, "k": 1.0},
}
#: a number: ASCII decimal or exponent form (no NaN, no infinity, no digit separators). Written
#: so that a string matches in one way only (digits, then an optional point with its digits):
#: "[0-9]+\.?[0-9]*" could split "123" between its two runs, and over a whole column that
#: ambiguity made a failing match backtrack exponentially (100 rows with one "40nm" hung batch)
_NUM = r"[-+]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][-+]?[0-9]+)?"
_NUMBER = re.compile(rf"[ \t]*({_NUM})[ \t]*(.*?)[ \t]*", re.ASCII | re.DOTALL)
_PLAIN_COLUMN = re.compile(rf"(?:[ \t]*{_NUM}[ \t]*\n)*", re.ASCII)  #: a whole column of plain numbers, one per line
_SUPERSCRIPTS = str.maketrans("⁻⁺¹²³", "-+123")  # the unit forms radialpn prints itself, e.g. cm⁻³
_MISSING_TEXT = ("", "nan", "none", "<na>", "null")


def parse_quantity(column: str, value) -> float:
    """Parse one value of a numeric column, with an optional unit suffix (``60nm``,
    ``0.06um``, ``1e18cm-3``, ``500meV``, ``300K``). Returns the value in the column's unit.
    A number is an ASCII decimal or exponent form; NaN, infinities, digit separators, true/false
    and empty values are refused. Raises ``DesignError`` naming the column and the accepted
    form and units."""
    if column not in NUMERIC:
        raise DesignError(column, f"not a numeric design column ({', '.join(NUMERIC)})")
    lo, hi, default, kind = NUMERIC[column]
    if isinstance(value, (bool, np.bool_)):
        raise DesignError(column, "expected a number, not true/false", value)
    if isinstance(value, (int, float, np.integer, np.floating)):
        try:
            x = float(value)
        except OverflowError:  # a Python int beyond the float range (10**400)
            raise DesignError(column, f"expected a finite number in [{lo:g}, {hi:g}]",
                              "an integer beyond the float range") from None
        if not math.isfinite(x):
            raise DesignError(column, f"expected a finite number in [{lo:g}, {hi:g}]", value)
        return x
    if not isinstance(value, str):
        raise DesignError(column, f"expected a number with optional unit ({_unit_list(kind)})",
                          type(value).__name__)
    m = _NUMBER.fullmatch(value.strip())
    if not m:
        if value.strip().lower() in _MISSING_TEXT:
            raise DesignError(column, f"empty or missing value; give a number (allowed range [{lo:g}, {hi:g}]) or "
                                      "leave the column out for its default", value)
        raise DesignError(column, f"expected a number (ASCII digits, e.g. 1e18) with optional unit "
                                  f"({_unit_list(kind)})", value)
    unit = m.group(2).translate(_SUPERSCRIPTS).lower().replace(" ", "").replace("^", "").replace("/", "per")
    unit = unit.replace("·", "")
    unit = unit.replace("per", "") if unit.startswith("per") and unit[3:] in UNITS[kind] else unit
    if unit not in UNITS[kind]:
        raise DesignError(column, f"unknown unit {m.group(2)!r}; use {_unit_list(kind)}", value)
    x = float(m.group(1)) * UNITS[kind][unit]
    if not math.isfinite(x):
        raise DesignError(column, f"expected a finite number in [{lo:g}, {hi:g}]", value)
    return x


def _unit_list(kind: str) -> str:
    return ", ".join(u for u in UNITS[kind] if u) or "no unit"


@dataclass
class DesignTable:
    """Validated designs, one entry per input row. Invalid rows keep NaN values and carry
    their reason in ``status``; ``ok`` marks the rows an engine may compute."""

    n: int
    material: np.ndarray  # object array of canonical material names ("" where invalid)
    p_core: np.ndarray  # bool
    values: dict  # numeric column -> float array
    status: np.ndarray  # object array: "ok" or a reason

    @property
    def ok(self) -> np.ndarray:
        return self.status == "ok"

    def __getitem__(self, column: str) -> np.ndarray:
        return self.values[column]

    def take(self, rows) -> "DesignTable":
        """The sub-table of ``rows`` (a slice or index array)."""
        material = self.material[rows]
        return DesignTable(n=material.size, material=material, p_core=self.p_core[rows],
                           values={k: v[rows] for k, v in self.values.items()}, status=self.status[rows])


def _as_columns(designs):
    """(columns, row count or None): accept a mapping of column -> array/scalar, a list of row
    dicts, or a DataFrame. The row count is known for rows and frames even without columns."""
    form = "expected a mapping of column -> values, a list of row dicts or a DataFrame"
    if hasattr(designs, "to_dict") and hasattr(designs, "columns"):  # pandas DataFrame
        names = [str(c) for c in designs.columns]
        if len(set(names)) != len(names):
            raise DesignError("designs", "each column once (the DataFrame repeats a column name)")
        return {str(c): designs[c].to_numpy(dtype=object) if designs[c].dtype == object else designs[c].to_numpy()
                for c in designs.columns}, len(designs)
    if isinstance(designs, dict):
        return dict(designs), None
    if not isinstance(designs, (list, tuple)):
        raise DesignError("designs", form, type(designs).__name__)
    rows = list(designs)
    if rows and not all(isinstance(r, dict) for r in rows):
        raise DesignError("designs", form, "a list of " + type(next(r for r in rows if not isinstance(r, dict))).__name__)
    keys = {k for r in rows for k in r}
    return {k: [r.get(k, _ABSENT) for r in rows] for k in keys}, len(rows)


class _Absent:
    """A key a row dict does not have: that row takes the column's default, as if absent."""

    def __str__(self):  # categorical columns read it as blank: "required"
        return ""


_ABSENT = _Absent()


def _blank(v) -> bool:
    return v is None or (isinstance(v, float) and math.isnan(v)) or (isinstance(v, str) and not v.strip())


class _Status:
    """Per-row status kept as a bad-row mask plus messages, the first failure of a row wins."""

    def __init__(self, n: int):
        self.bad = np.zeros(n, dtype=bool)
        self.text = None

    def fail(self, mask, message):
        sel = mask & ~self.bad
        if not sel.any():
            return
        if self.text is None:
            self.text = np.full(self.bad.size, "ok", dtype=object)
        self.text[sel] = message if isinstance(message, str) else np.asarray(message, dtype=object)[sel]
        self.bad |= sel

    def array(self) -> np.ndarray:
        return np.full(self.bad.size, "ok", dtype=object) if self.text is None else self.text


def categories(raw, n):
    """Map a categorical column to (unique values, inverse index) cheaply when it is uniform."""
    if np.ndim(raw) == 0:
        v = raw.item() if isinstance(raw, np.ndarray) else raw
        return ["" if type(v).__name__ == "NAType" else v], np.zeros(n, dtype=np.intp)
    arr = np.asarray(raw)
    if arr.dtype == object and arr.size and type(arr.flat[0]) is str:  # the usual column: one name throughout
        try:
            same = arr == arr.flat[0]
        except (TypeError, ValueError):  # an element whose == is not a plain bool (pandas' NA)
            same = None
        if isinstance(same, np.ndarray) and same.dtype == bool and same.all():
            return [arr.flat[0]], np.zeros(n, dtype=np.intp)
    if arr.dtype == object:  # compare as text: None, NaN and pandas' NA do not compare equal to themselves
        arr = np.array([v if isinstance(v, str) else repr(v) if isinstance(v, float) else str(v)
                        for v in arr.tolist()], dtype=object)
    inv = np.full(n, -1, dtype=np.intp)
    uniq = []
    rest = np.arange(n)
    while rest.size and len(uniq) < 8:  # a few linear scans beat sorting a million strings
        value = arr[rest[0]]
        same = arr[rest] == value
        inv[rest[same]] = len(uniq)
        uniq.append(value)
        rest = rest[~same]
    if rest.size:
        more, inv_rest = np.unique(arr[rest].astype(str), return_inverse=True)
        inv[rest] = len(uniq) + inv_rest.reshape(-1)
        uniq.extend(more)
    return uniq, inv


def _each_category(cols, name, n, st, missing):
    """Yield (value, row mask) for each distinct value of a categorical column; a missing
    column fails every row with ``missing``."""
    raw = cols.get(name)
    if raw is None:
        st.fail(np.ones(n, dtype=bool), missing)
        return
    uniq, inv = categories(raw, n)
    for k, value in enumerate(uniq):
        yield value, inv == k


#: what a column is taken for when its name differs only in case or lacks its unit
_NEAR = {**{c.lower(): c for c in INPUT_COLUMNS},
         **{c.rsplit("_", 1)[0].lower(): c for c in NUMERIC if c.rsplit("_", 1)[0] not in ("core", "shell")}}


def near_miss(name) -> bool:
    """True for a name ``_near_miss`` refuses."""
    return isinstance(name, str) and name.strip().lower() in _NEAR


def near_column(name: str) -> str:
    """The input column a ``near_miss`` name means."""
    return _NEAR[name.strip().lower()]


def check_columns(names) -> None:
    """Raise ``DesignError`` for a column name that is an input column's but for case, blanks
    or its unit suffix (``temperature_k``, ``Material``, ``interlayer``): a table header to check
    before its rows are read, since such a column would be carried along unread."""
    for name in names:
        if name not in INPUT_COLUMNS:
            _near_miss(name)


def _near_miss(name) -> None:
    """A ``DesignError`` for an extra column whose name is an input column's but for case,
    surrounding blanks or the unit suffix (``temperature_k``, ``Material``, ``interlayer``): read
    as an extra column, its values would be ignored and the default used without a word."""
    if near_miss(name):
        raise DesignError(name, f"not a column name; did you mean {near_column(name)!r}? (names are "
                                "case-sensitive and carry their unit)")


def normalize_designs(designs) -> DesignTable:
    """Validate designs row by row (see module docstring). Never raises for a bad row; raises
    ``DesignError`` only when the whole input is unusable (ragged columns, wrong container)."""
    cols, rows = _as_columns(designs)
    for k in list(cols):
        if k not in INPUT_COLUMNS:
            _near_miss(k)
            continue  # extra columns travel with the caller's rows; they are not read
        v = cols[k]
        try:
            a = v if isinstance(v, np.ndarray) else np.asarray(v, dtype=object if isinstance(v, (list, tuple, str)) else None)
        except (ValueError, TypeError):
            raise DesignError(k, "expected one value, or one value per row (a flat list or 1-D array)", "ragged") from None
        if a.ndim > 1:
            raise DesignError(k, "expected one value, or one value per row (a flat list or 1-D array)",
                              f"an array of shape {a.shape}")
        if a.dtype == object and a.ndim == 1 and any(isinstance(x, (list, tuple, dict, np.ndarray)) for x in a.tolist()):
            raise DesignError(k, "expected one value per row, not nested lists", "nested")
        cols[k] = a
    cols = {k: v for k, v in cols.items() if k in INPUT_COLUMNS}
    lengths = {k: np.size(v) for k, v in cols.items() if np.ndim(v) > 0}
    n = rows if rows is not None else max(lengths.values(), default=1)
    if any(m != n for m in lengths.values()):
        raise DesignError("designs", f"columns have different lengths {sorted(set(lengths.values()))}")
    st = _Status(n)
    every = np.ones(n, dtype=bool)  # for whole-column failures

    # material
    material = np.full(n, "", dtype=object)
    for name, sel in _each_category(cols, "material", n, st, "material: required (e.g. GaAs)"):
        if _blank(name) or str(name).strip().lower() in _MISSING_TEXT:
            st.fail(sel, "material: required (e.g. GaAs)")
            continue
        try:
            material[sel] = get_material(str(name)).name
        except MaterialError as exc:
            st.fail(sel, str(exc))
    # core type
    p_core = np.zeros(n, dtype=bool)
    for value, sel in _each_category(cols, "core_type", n, st, "core_type: required, one of p, n"):
        text = str(value).strip().lower().removesuffix("-core").removesuffix("core")
        if text == "p":
            p_core |= sel
        elif text == "":
            st.fail(sel, "core_type: required, one of p, n")
        elif text != "n":
            st.fail(sel, f"core_type: must be p or n (got {str(value)!r})")
    # numeric columns
    values = {}
    for name, (lo, hi, default, _kind) in NUMERIC.items():
        raw = cols.get(name)
        if raw is None:
            if default is None:
                st.fail(every, f"{name}: required, allowed range [{lo:g}, {hi:g}]")
            values[name] = np.full(n, np.nan if default is None else default)
            continue
        arr = np.asarray(raw)
        absent = None
        if arr.dtype == object and arr.ndim:
            absent = np.fromiter((v is _ABSENT for v in arr.tolist()), dtype=bool, count=arr.size)
            if absent.any():
                if default is None:
                    st.fail(absent, f"{name}: required, allowed range [{lo:g}, {hi:g}]")
                arr = arr.copy()
                arr[absent] = repr(float(lo))  # a placeholder that parses; replaced by the default below
            else:
                absent = None
        if arr.dtype.kind in "UO" and arr.ndim:  # text: a column of plain numbers converts in one step
            text = arr.astype(str)
            if _PLAIN_COLUMN.fullmatch("\n".join(text.tolist()) + "\n"):
                arr = text.astype(float)
        if arr.dtype.kind == "b":
            st.fail(every, f"{name}: expected a number, not true/false (got {bool(arr.flat[0]) if arr.size else ''})")
            x = np.full(n, np.nan)
        elif arr.dtype.kind in "fiu":
            x = np.broadcast_to(arr.astype(float), (n,))
            bad = ~np.isfinite(x)
            if bad.any():
                st.fail(bad, np.array([f"{name}: expected a finite number in [{lo:g}, {hi:g}] (got {v})" for v in x],
                                      dtype=object))
        else:
            uniq, inv = categories(arr, n)
            parsed = np.full(len(uniq), np.nan)
            for k, v in enumerate(uniq):
                try:
                    parsed[k] = parse_quantity(name, "" if v is None else v)
                except DesignError as exc:
                    st.fail(inv == k, str(exc))
            x = parsed[inv]
        if absent is not None:
            x = np.where(absent, np.nan if default is None else default, x)
        blank = np.zeros(n, dtype=bool)
        if default is not None and math.isnan(default):  # NaN means "the material's own"
            blank = blank | np.isnan(x)
        out = ~((x >= lo) & (x <= hi)) & ~blank
        if out.any():
            st.fail(out, np.array([f"{name}: allowed range [{lo:g}, {hi:g}] (got {v:g})" if o else ""
                                   for v, o in zip(x, out)], dtype=object))
        values[name] = x
    # cross-field: the intrinsic interlayer must leave some doped shell
    il, t = values["interlayer_nm"], values["shell_thickness_nm"]
    bad = (il > 0) & (il > t - 0.5)
    if bad.any():
        st.fail(bad, np.array([f"interlayer_nm: must be at least 0.5 nm thinner than shell_thickness_nm "
                               f"({s:g} nm) (got {v:g})" if b else "" for v, s, b in zip(il, t, bad)], dtype=object))
    return DesignTable(n=n, material=material, p_core=p_core, values=values, status=st.array())


def require_mapping(design) -> None:
    """``DesignError`` unless ``design`` is one design, a mapping of column -> value."""
    if not isinstance(design, Mapping):
        raise DesignError("design", "one design as a mapping of column -> value (many designs: predict or solve)",
                          type(design).__name__)


def check_design(design: dict) -> DesignTable:
    """Validate one design (a mapping of column -> value); raise ``DesignError`` if it is bad."""
    require_mapping(design)
    table = normalize_designs({k: [v] for k, v in design.items()})
    if table.status[0] != "ok":
        field, _, rest = str(table.status[0]).partition(": ")
        err = DesignError(field, rest)
        err.args = (str(table.status[0]),)
        raise err
    return table
