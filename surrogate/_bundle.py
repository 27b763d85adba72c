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
import json
import os
import zipfile
from pathlib import Path

import numpy as np

from ._errors import RadialpnError

FORMAT = "radialpn-bundle"
FORMAT_VERSION = 1
FILES = ("bundle.json", "arrays.npz")


class BundleError(RadialpnError):
    """A model bundle is missing, damaged or not a radialpn bundle."""


def sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


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
    sums_file = path / "SHA256SUMS"
    try:
        lines = sums_file.read_text(encoding="ascii").splitlines()
    except (OSError, UnicodeDecodeError):
        raise BundleError(f"bundle {path}: SHA256SUMS missing or unreadable") from None
    sums = {}
    for line in lines:
        parts = line.split()
        if len(parts) == 2 and len(parts[0]) == 64:
            sums[parts[1]] = parts[0]
    for name in FILES:
        if name not in sums:
            raise BundleError(f"bundle {path}: SHA256SUMS has no entry for {name}")
        f = path / name
        if not f.is_file():
            raise BundleError(f"bundle {path}: {name} missing")
        if sha256(f) != sums[name]:
            raise BundleError(f"bundle {path}: {name} fails its SHA-256 check (corrupted, truncated or "
                              "altered); reinstall radialpn or rebuild the bundle")
    try:
        meta = json.loads((path / "bundle.json").read_text(encoding="utf-8"))
    except (ValueError, UnicodeDecodeError):
        raise BundleError(f"bundle {path}: bundle.json is not JSON") from None
    if not isinstance(meta, dict) or meta.get("format") != FORMAT:
        raise BundleError(f"bundle {path}: not a radialpn model bundle")
    if meta.get("format_version") != FORMAT_VERSION:
        raise BundleError(f"bundle {path}: format version {meta.get('format_version')} is not "
                          f"{FORMAT_VERSION}; use a matching radialpn")
    try:
        with np.load(path / "arrays.npz", allow_pickle=False) as z:
            arrays = {k: z[k] for k in z.files}
    except (ValueError, OSError, zipfile.BadZipFile, EOFError) as exc:
        raise BundleError(f"bundle {path}: arrays.npz unreadable ({exc})") from None
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
