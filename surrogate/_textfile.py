"""Reading the small TOML/JSON files users give (materials, domain specs), with one-line errors."""

from __future__ import annotations

import json
from pathlib import Path

MAX_BYTES = 1 << 20  #: material files and specs are a few kB; larger ones are refused unread


def read_table_file(path, error, what: str) -> dict:
    """Parse ``path`` as JSON (``.json``) or TOML (anything else). Failures raise ``error`` (an
    exception class) with one line naming ``what`` and the file."""
    path = Path(path)
    try:
        if path.stat().st_size > MAX_BYTES:
            raise error(f"{what} {path}: larger than {MAX_BYTES:,} bytes")
        if not path.is_file():
            raise error(f"{what} {path}: not a regular file")
        text = path.read_text(encoding="utf-8")
    except OSError as exc:
        raise error(f"{what} {path}: cannot read ({exc.strerror})") from None
    except UnicodeDecodeError:
        raise error(f"{what} {path}: not UTF-8 text") from None
    kind = "JSON" if path.suffix.lower() == ".json" else "TOML"
    try:
        if kind == "JSON":
            return json.loads(text)
        try:
            import tomllib
        except ModuleNotFoundError:  # Python 3.10
            import tomli as tomllib
        return tomllib.loads(text)
    except ValueError as exc:
        raise error(f"{what} {path}: not valid {kind} ({str(exc).splitlines()[0]})") from None
    except RecursionError:
        raise error(f"{what} {path}: nested too deeply") from None
