"""Model bundles on disk: one directory each, plain data only.

    bundle.json   metadata (format, domain, conformal quantiles, metrics, ...)
    arrays.npz    numpy arrays (trees, Gaussian process), read with allow_pickle=False
    SHA256SUMS    SHA-256 of the two files above, checked before either is parsed
    CARD.md       the model card (human-readable)

Nothing in a bundle is executed or unpickled; a corrupted, truncated or foreign file gives a
``BundleError`` naming the file.
"""

from __future__ import annotations

import hashlib
import io
import json
import os
import zipfile
from pathlib import Path

import numpy as np

from ._errors import RadialpnError

FORMAT = "radialpn-bundle"
FORMAT_VERSION = 1
FILES = ("bundle.json", "arrays.npz")
#: the most a bundle file may hold [bytes]: shipped bundles are ~3 MB compressed, ~4 MB inflated,
#: a few kB of JSON; anything far larger is damaged or hostile and is refused before reading
MAX_BYTES = {"SHA256SUMS": 4096, "bundle.json": 1 << 20, "arrays.npz": 64 << 20, "CARD.md": 1 << 20}
MAX_INFLATED_BYTES = 256 << 20  #: all arrays together, decompressed
MAX_ARRAYS = 4096


class BundleError(RadialpnError):
    """A model bundle is missing, damaged or not a radialpn bundle."""


def sha256(path: Path, limit: int | None = None) -> str:
    """SHA-256 of a file, reading at most ``limit`` bytes (more is a BundleError)."""
    h = hashlib.sha256()
    seen = 0
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            seen += len(block)
            if limit is not None and seen > limit:
                raise BundleError(f"bundle {path.parent}: {path.name} is larger than {limit:,} bytes")
            h.update(block)
    return h.hexdigest()


def _regular(path: Path, name: str) -> Path:
    """``path`` if it is a regular file (not a device, pipe, folder or link out of the bundle)
    no larger than ``MAX_BYTES[name]``; else a BundleError naming it."""
    f = path / name
    try:
        st = os.stat(f)
    except OSError:
        raise BundleError(f"bundle {path}: {name} missing") from None
    import stat as _stat

    if not _stat.S_ISREG(st.st_mode):
        raise BundleError(f"bundle {path}: {name} is not a regular file")
    if st.st_size > MAX_BYTES[name]:
        raise BundleError(f"bundle {path}: {name} is {st.st_size:,} bytes, more than the {MAX_BYTES[name]:,} allowed")
    return f


def bundle_dirs() -> list:
    """Where bundles are looked for: $RADIALPN_MODELS (path list), then the installed package's
    bundles (package data in radialpn/bundles; in an editable install of the source tree, its
    models/ folder)."""
    here = Path(__file__).resolve().parent
    dirs = [Path(p) for p in os.environ.get("RADIALPN_MODELS", "").split(os.pathsep) if p]
    dirs.append(here / "bundles" if here.name != "surrogate" else here.parent / "models")
    return [d for d in dirs if d.is_dir()]


def find_bundles() -> dict:
    """Bundle name -> directory, first found wins."""
    out = {}
    for d in bundle_dirs():
        for sub in sorted(d.iterdir()):
            if (sub / "bundle.json").is_file() and sub.name not in out:
                out[sub.name] = sub
    return out


def read_bundle(path) -> tuple:
    """(meta, arrays) of a bundle directory, after checking its SHA-256 sums and format."""
    path = Path(path)
    try:
        sums_file = _regular(path, "SHA256SUMS")
        lines = sums_file.read_bytes()[:MAX_BYTES["SHA256SUMS"]].decode("ascii").splitlines()
    except BundleError:
        raise
    except (OSError, UnicodeDecodeError):
        raise BundleError(f"bundle {path}: SHA256SUMS missing or unreadable") from None
    sums = {}
    for line in lines:
        parts = line.split()
        if len(parts) == 2 and len(parts[0]) == 64:
            sums[parts[1]] = parts[0]
    data = {}  # each file read once: the bytes checked are the bytes parsed
    for name in FILES:
        if name not in sums:
            raise BundleError(f"bundle {path}: SHA256SUMS has no entry for {name}")
        f = _regular(path, name)
        try:
            with open(f, "rb") as fh:
                data[name] = fh.read(MAX_BYTES[name] + 1)
        except OSError:
            raise BundleError(f"bundle {path}: {name} unreadable") from None
        if len(data[name]) > MAX_BYTES[name]:
            raise BundleError(f"bundle {path}: {name} is larger than {MAX_BYTES[name]:,} bytes")
        if hashlib.sha256(data[name]).hexdigest() != sums[name]:
            raise BundleError(f"bundle {path}: {name} fails its SHA-256 check (corrupted, truncated or "
                              "altered); reinstall radialpn or rebuild the bundle")
    try:
        meta = json.loads(data["bundle.json"].decode("utf-8"))
    except (ValueError, UnicodeDecodeError):
        raise BundleError(f"bundle {path}: bundle.json is not JSON") from None
    except RecursionError:  # nesting deeper than the parser's stack: no bundle writes that
        raise BundleError(f"bundle {path}: bundle.json is nested too deeply to be a bundle") from None
    if not isinstance(meta, dict) or meta.get("format") != FORMAT:
        raise BundleError(f"bundle {path}: not a radialpn model bundle")
    if meta.get("format_version") != FORMAT_VERSION:
        raise BundleError(f"bundle {path}: format version {meta.get('format_version')} is not "
                          f"{FORMAT_VERSION}; use a matching radialpn")
    try:
        with zipfile.ZipFile(io.BytesIO(data["arrays.npz"])) as zf:  # sizes first: no inflating a bomb
            infos = zf.infolist()
        if len(infos) > MAX_ARRAYS or sum(i.file_size for i in infos) > MAX_INFLATED_BYTES:
            raise BundleError(f"bundle {path}: arrays.npz inflates to more than {MAX_INFLATED_BYTES:,} bytes "
                              f"or holds more than {MAX_ARRAYS} arrays")
        with np.load(io.BytesIO(data["arrays.npz"]), allow_pickle=False) as z:
            arrays = {k: z[k] for k in z.files}
    except BundleError:
        raise
    except (ValueError, OSError, zipfile.BadZipFile, EOFError) as exc:
        raise BundleError(f"bundle {path}: arrays.npz unreadable ({exc})") from None
    for k, a in arrays.items():
        if a.dtype.kind not in "biuf":
            raise BundleError(f"bundle {path}: array {k} has dtype {a.dtype}; only numbers and booleans are allowed")
        if a.dtype.kind == "f" and not (np.isfinite(a).all() or (k.endswith("/threshold") and not np.isnan(a).any())):
            raise BundleError(f"bundle {path}: array {k} holds NaN or infinite values")  # thresholds may be +-inf
    return meta, arrays


def bundle_checksums(path) -> str:
    """The text of SHA256SUMS for the bundle files in directory ``path``."""
    path = Path(path)
    return "".join(f"{sha256(path / n)}  {n}\n" for n in FILES)


def write_bundle(path, meta: dict, arrays: dict, card: str) -> None:
    """Write a bundle directory (files first, checksums last)."""
    path = Path(path)
    path.mkdir(parents=True, exist_ok=True)
    meta = dict(meta, format=FORMAT, format_version=FORMAT_VERSION)
    (path / "bundle.json").write_text(json.dumps(meta, indent=1, sort_keys=True), encoding="utf-8")
    with open(path / "arrays.npz", "wb") as fh:
        np.savez_compressed(fh, **arrays)
    (path / "CARD.md").write_text(card, encoding="utf-8")
    (path / "SHA256SUMS").write_text(bundle_checksums(path), encoding="ascii")
