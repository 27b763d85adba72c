"""Interrupted `batch` runs keep their finished chunks: `batch IN -o OUT.csv` writes into
``OUT.csv.partial`` and, after every chunk, records in ``OUT.csv.partial.json`` how many rows
and bytes of it are complete, with what the answers depend on (the input file's size and time,
the options, the radialpn version). A finished run renames the partial file onto ``OUT.csv``
and removes the record, so ``OUT.csv`` only ever appears whole. Ctrl-C or SIGTERM cuts the
partial file back to its last whole chunk and keeps both; so does SIGKILL in effect (the record
names the last whole chunk), and so does any other failure (a lost cluster, a full disk) but
bad input: a malformed line late in the file leaves nothing, as its rows would not match the
corrected file (a resumed run keeps what it started with). ``--resume`` continues such a run: the same command, the same input
(its SHA-256), the same materials, the rows already answered read back rather than solved
again. The partial file is locked while a run writes it, so a second run on the same output is
refused."""

from __future__ import annotations

import contextlib
import csv
import hashlib
import io
import json
import os

try:
    import fcntl
except ImportError:  # not POSIX: no lock (two runs on one output are then the user's to avoid)
    fcntl = None

import radialpn

from . import _errors

SUFFIX = ".partial"


def _digest(path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _key(args, chunk_rows: int) -> dict:
    """What the answers of a run depend on: a resumed run must match it exactly (the input's
    bytes, the options, every material's parameters, built-in or from --materials, the version)."""
    materials = hashlib.sha256(repr([radialpn.get_material(m) for m in radialpn.material_names()]).encode()).hexdigest()
    return {"input": os.path.abspath(args.input), "input_sha256": _digest(args.input),
            "engine": args.engine, "statistics": args.statistics, "ionisation": args.ionisation,
            "second_opinion": bool(args.second_opinion), "confirm": bool(args.confirm), "chunk_rows": chunk_rows,
            "materials_sha256": materials, "radialpn": radialpn.__version__}


class Checkpoint:
    """The partial output of one `batch -o OUT.csv` run and its record."""

    def __init__(self, args, chunk_rows: int):
        self.output = args.output
        self.path = args.output + SUFFIX
        self.record = self.path + ".json"
        self.key = _key(args, chunk_rows)
        self.rows = self.bytes = 0
        self.raw = self.fh = None

    def open(self, resume: bool):
        """Start (or, with ``resume``, continue) the partial file. Returns (text file, header
        of the rows already there or None, their ``status`` and ``regime`` cells)."""
        self._lock()
        old = self._read_record()
        kept = old is not None and int(old["rows"]) > 0 and os.path.exists(self.path)
        if not resume or (old is not None and int(old["rows"]) == 0):  # nothing finished yet: start afresh
            if kept and not resume:
                raise _errors.UsageError(f"-o {self.output}: {self.path} holds {old['rows']:,} answered rows of an "
                                         "interrupted run; add --resume to continue it, or delete it to start again")
            try:
                self.raw.truncate(0)
                self._write_record()  # from the start, so that even SIGKILL leaves the pair, never the file alone
            except OSError as exc:
                raise _errors.UsageError(f"-o {self.output}: cannot write {self.path} ({exc.strerror})") from None
            self.fh = io.TextIOWrapper(self.raw, encoding="utf-8", newline="", write_through=False)
            return self.fh, None, ([], [])
        if old is None or not os.path.exists(self.path):
            raise _errors.UsageError(f"--resume: no interrupted run to continue ({self.path} and its record "
                                     "are not both there)")
        differs = [k for k in self.key if old.get("key", {}).get(k) != self.key[k]]
        if differs:
            k = differs[0]
            what = {"input_sha256": "content of the input file", "materials_sha256": "material table (--materials "
                    "files or parameters)"}.get(k, f"{k.replace('_', ' ')} ({old['key'].get(k)!r}, now {self.key[k]!r})")
            self.release()
            raise _errors.UsageError(f"--resume: {self.path} was written with another {what}; "
                                     "delete it to start again")
        self.rows, self.bytes = int(old["rows"]), int(old["bytes"])
        self.raw.truncate(self.bytes)  # a chunk cut short by SIGKILL goes; its rows are answered again
        with open(self.path, newline="", encoding="utf-8") as fh:
            reader = csv.reader(fh)
            header = next(reader, None)
            if header is None or "status" not in header or "regime" not in header:
                raise _errors.UsageError(f"--resume: {self.path} is not a partial answer table; delete it")
            s, r = header.index("status"), header.index("regime")
            status, regime = [], []
            for row in reader:
                status.append(row[s])
                regime.append(row[r])
        if len(status) != self.rows:
            raise _errors.UsageError(f"--resume: {self.path} holds {len(status):,} rows, its record {self.rows:,}; "
                                     "delete it to start again")
        self.fh = io.TextIOWrapper(self.raw, encoding="utf-8", newline="", write_through=False)
        return self.fh, header, (status, regime)

    def release(self) -> None:
        """Let go of the partial file without changing it (a refused resume)."""
        with contextlib.suppress(Exception):
            (self.fh or self.raw).close()

    def _lock(self) -> None:
        """Open the partial file without truncating it and hold an exclusive lock on it for the
        run: a second run on the same output is refused instead of interleaving with the first."""
        try:
            self.raw = open(self.path, "a+b")
        except OSError as exc:
            raise _errors.UsageError(f"-o {self.output}: cannot write {self.path} ({exc.strerror})") from None
        if fcntl is not None:
            try:
                fcntl.flock(self.raw.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
            except OSError:
                self.raw.close()
                raise _errors.UsageError(f"-o {self.output}: another radialpn run is writing {self.path}; "
                                         "wait for it or name another output") from None

    def chunk_done(self, rows: int) -> None:
        """Record that the partial file now ends after ``rows`` more whole rows."""
        self.fh.flush()
        self.rows += rows
        self.bytes = self.raw.tell()
        self._write_record()

    def _write_record(self) -> None:
        tmp = self.record + ".tmp"
        with open(tmp, "w", encoding="utf-8") as fh:
            json.dump({"key": self.key, "rows": self.rows, "bytes": self.bytes}, fh)
        os.replace(tmp, self.record)

    def finish(self) -> None:
        """The run is complete: the partial file becomes the output, the record goes (renamed
        while the lock is held, so no other run can start on the partial file in between)."""
        self.fh.flush()
        os.replace(self.path, self.output)
        for p in (self.record, self.record + ".tmp"):
            with contextlib.suppress(OSError):
                os.unlink(p)
        self.fh.close()

    def interrupted(self) -> str:
        """Keep the whole chunks (cut off a chunk half written); the message to print."""
        if self.rows == 0:
            self.discard()
            return ""
        with contextlib.suppress(Exception):
            self.fh.flush()
        with contextlib.suppress(Exception):
            self.raw.truncate(self.bytes)
        with contextlib.suppress(Exception):
            self.fh.close()
        return (f"{self.rows:,} answered rows kept in {self.path}; run the same command with --resume "
                "to continue")

    def discard(self) -> None:
        for p in (self.path, self.record, self.record + ".tmp"):
            with contextlib.suppress(OSError):
                os.unlink(p)
        with contextlib.suppress(Exception):
            (self.fh or self.raw).close()

    def _read_record(self):
        try:
            with open(self.record, encoding="utf-8") as fh:
                rec = json.load(fh)
            return rec if isinstance(rec, dict) and {"key", "rows", "bytes"} <= set(rec) else None
        except (OSError, ValueError, RecursionError):
            return None
