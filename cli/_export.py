"""Machine-readable output shared by the design commands: strict JSON (NaN and infinities as
null, numpy values as plain numbers) and CSV files written all or nothing (cli/_csvio.atomic_text),
numbers in their shortest round-trip form so every numeric column reads back as numbers."""

from __future__ import annotations

import csv
import json
import math

import numpy as np

from ._csvio import atomic_text


def plain(x):
    """``x`` as JSON-ready Python: numpy scalars and arrays unwrapped, NaN/inf as None."""
    if isinstance(x, dict):
        return {str(k): plain(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [plain(v) for v in x]
    if isinstance(x, np.ndarray):
        return [plain(v) for v in x.tolist()]
    if isinstance(x, np.generic):
        x = x.item()
    if isinstance(x, float) and not math.isfinite(x):
        return None
    return x


def dumps(obj, **kw) -> str:
    """Strict JSON text (never a bare NaN)."""
    return json.dumps(plain(obj), allow_nan=False, **kw)


def cell(x) -> str:
    """One CSV cell: booleans true/false, NaN and None empty, floats as repr."""
    if x is None:
        return ""
    if isinstance(x, (bool, np.bool_)):
        return "true" if x else "false"
    if isinstance(x, (float, np.floating)):
        return "" if math.isnan(x) else repr(float(x))
    if isinstance(x, (int, np.integer)):
        return str(int(x))
    return str(x)


def write_csv(path: str, header, rows, option: str = "--csv") -> None:
    """Write ``rows`` (sequences in ``header`` order) to ``path`` atomically (RFC 4180)."""
    with atomic_text(path, option) as fh:
        w = csv.writer(fh, lineterminator="\r\n")
        w.writerow(list(header))
        for r in rows:
            w.writerow([cell(x) for x in r])
