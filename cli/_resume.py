"""Interrupted `batch` runs keep their finished chunks: `batch IN -o OUT.csv` writes into
``OUT.csv.partial`` and, after every chunk, records in ``OUT.csv.partial.json`` how many rows
and bytes of it are complete, with what the answers depend on (the input file's size and time,
the options, the radialpn version). A finished run renames the partial file onto ``OUT.csv``
and removes the record, so ``OUT.csv`` only ever appears whole. Ctrl-C or SIGTERM cuts the
partial file back to its last whole chunk and keeps both; so does SIGKILL in effect (the record
names the last whole chunk). ``--resume`` continues such a run: the same command, the same
input, the rows already answered read back rather than solved again. Any other failure removes
both files (their rows would not match a corrected input)."""

from __future__ import annotations

import contextlib
import csv
import io
import json
import os

import radialpn

from . import _errors

SUFFIX = ".partial"


def _key(args, chunk_rows: int) -> dict:
    """What the answers of a run depend on: a resumed run must match it exactly."""
    st = os.stat(args.input)
    return {"input": os.path.abspath(args.input), "input_bytes": st.st_size, "input_mtime_ns": st.st_mtime_ns,
            "engine": args.engine, "statistics": args.statistics, "ionisation": args.ionisation,
            "second_opinion": bool(args.second_opinion), "confirm": bool(args.confirm), "chunk_rows": chunk_rows,
            "radialpn": radialpn.__version__}


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
        old = self._read_record()
        kept = old is not None and int(old["rows"]) > 0 and os.path.exists(self.path)
        if not resume or (old is not None and int(old["rows"]) == 0):  # nothing finished yet: start afresh
            if kept and not resume:
                raise _errors.UsageError(f"-o {self.output}: {self.path} holds {old['rows']:,} answered rows of an "
                                         "interrupted run; add --resume to continue it, or delete it to start again")
            try:
                self.raw = open(self.path, "wb")
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
            raise _errors.UsageError(f"--resume: {self.path} was written with another {differs[0].replace('_', ' ')} "
                                     f"({old['key'].get(differs[0])!r}, now {self.key[differs[0]]!r}); "
                                     "delete it to start again")
        self.rows, self.bytes = int(old["rows"]), int(old["bytes"])
        with open(self.path, "r+b") as fh:
            fh.truncate(self.bytes)  # a chunk cut short by SIGKILL goes; its rows are answered again
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
        self.raw = open(self.path, "ab")
        self.fh = io.TextIOWrapper(self.raw, encoding="utf-8", newline="", write_through=False)
        return self.fh, header, (status, regime)

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
        """The run is complete: the partial file becomes the output, the record goes."""
        self.fh.close()
        os.replace(self.path, self.output)
        with contextlib.suppress(OSError):
            os.unlink(self.record)

    def interrupted(self) -> str:
        """Keep the whole chunks (cut off a chunk half written); the message to print."""
        with contextlib.suppress(Exception):
            self.fh.close()
        if self.rows == 0:
            self.discard()
            return ""
        with open(self.path, "r+b") as fh:
            fh.truncate(self.bytes)
        return (f"{self.rows:,} answered rows kept in {self.path}; run the same command with --resume "
                "to continue")

    def discard(self) -> None:
        with contextlib.suppress(Exception):
            self.fh.close()
        for p in (self.path, self.record, self.record + ".tmp"):
            with contextlib.suppress(OSError):
                os.unlink(p)

    def _read_record(self):
        try:
            with open(self.record, encoding="utf-8") as fh:
                rec = json.load(fh)
            return rec if isinstance(rec, dict) and {"key", "rows", "bytes"} <= set(rec) else None
        except (OSError, ValueError, RecursionError):
            return None
