"""`radialpn batch`, streamed: the design table is read in chunks of rows; each chunk is
validated, answered and written before the next one is read, into an output file that appears
only once it is complete (``_csvio.atomic_text``; standard output is spooled to an unnamed
temporary file and copied out at the end, so a bad row late in the file still prints nothing).
Memory stays bounded by the chunk size whatever the table's length. Input and output are CSV,
or Parquet by file suffix when pyarrow is installed (``_parquetio``). With ``--scheduler`` the
chunks are answered on a Dask cluster (``_cluster``), written in the same order."""

from __future__ import annotations

import contextlib
import csv
import itertools
import os
import shutil
import tempfile

import numpy as np

import radialpn
from radialpn import INPUT_COLUMNS, normalize_designs

from . import _errors
from ._csvio import CHUNK_ROWS, atomic_text, check_target, open_table
from ._resume import Checkpoint


SOLVER_EXTRAS = ("core_majority_ln", "shell_majority_ln", "charge_residual", "surface_accumulation_V",
                 "peak_field_V_per_cm", "tunnel_log10", "iterations", "solver_version")  #: solver-only outputs


def is_parquet(path) -> bool:
    return str(path).lower().endswith((".parquet", ".pq"))


#: output suffixes `batch` writes: CSV (also for no suffix and .txt) or Parquet; any other
#: suffix (.json, .xlsx, ...) promises a format it would not get, so it is refused up front
CSV_SUFFIXES = ("", ".csv", ".txt")


def check_output(path, source=None) -> None:
    """A one-line ``UsageError`` if ``-o path`` names a format `batch` does not write, or the
    input file ``source`` itself (replacing the input with the answers would lose it)."""
    if path in (None, "-"):
        return
    if source not in (None, "-") and os.path.exists(path) and os.path.exists(source) \
            and os.path.samefile(path, source):
        raise _errors.UsageError(f"-o {path}: that is the input file; write the answers to another file")
    if is_parquet(path):
        return
    suffix = os.path.splitext(str(path))[1].lower()
    if suffix not in CSV_SUFFIXES:
        raise _errors.UsageError(f"-o {path}: batch writes CSV (.csv, .txt or no suffix) or Parquet (.parquet, .pq), "
                                 f"not {suffix!r}")


def column_text(values) -> list:
    """A result column as CSV text, formatted column-wise: floats in their shortest round-trip
    form (repr, the same text numpy's str gives), NaN as empty, booleans as true/false."""
    a = np.asarray(values)
    if a.dtype.kind == "b":
        return np.where(a, "true", "false").tolist()
    if a.dtype.kind == "f":
        text = list(map(repr, a.astype(float).tolist()))
        for i in np.flatnonzero(np.isnan(a)).tolist():
            text[i] = ""
        return text
    if a.dtype.kind in "iu":
        return list(map(str, a.tolist()))
    return ["" if x is None else str(x) for x in a.tolist()]


_SPECIAL = (",", '"', "\r", "\n")  # a cell holding one of these is quoted (csv's QUOTE_MINIMAL)


def _quoted(col) -> list:
    """CSV cells of one column: as they are, or quoted with inner quotes doubled where needed
    (the same text csv.writer writes); one scan of the joined column decides."""
    joined = "\x1f".join(col)
    if not any(ch in joined for ch in _SPECIAL):
        return col
    return [('"' + c.replace('"', '""') + '"') if any(ch in c for ch in _SPECIAL) else c for c in col]


class _CsvSink:
    """Writes chunks as CSV (RFC 4180 line ends; any cell holding a comma, quote, \r or \n is
    quoted, so user text passes through unchanged), a whole chunk per write."""

    def __init__(self, fh):
        self.fh = fh

    def header(self, header):
        csv.writer(self.fh, lineterminator="\r\n").writerow(header)

    def write(self, chunk, result, out_cols):
        if not chunk.n:
            return
        cols = [_quoted(c) for c in chunk.columns()] + [_quoted(column_text(result[c])) for c in out_cols]
        self.fh.write("\r\n".join(map(",".join, zip(*cols))))
        self.fh.write("\r\n")

    def close(self):
        pass


class _CsvChunk:
    """A chunk of CSV rows (lists of text cells)."""

    def __init__(self, rows, index):
        self._rows, self.index, self._cols = rows, index, None
        self.n = len(rows)

    def columns(self) -> list:
        """The input cells column by column (lists of text)."""
        if self._cols is None:
            self._cols = [list(c) for c in zip(*self._rows)] if self._rows else []
        return self._cols

    def designs(self) -> dict:
        """The design columns as numpy text arrays (validated by ``normalize_designs`` exactly
        as lists of the same strings would be, without a Python step per cell)."""
        if not self._rows:
            return {}
        cols = self.columns()
        return {c: np.array(cols[self.index[c]], dtype=str) for c in INPUT_COLUMNS if c in self.index}

    def rows(self):
        return self._rows

    def total_estimate(self, size: int) -> int:
        """Rows in a file of ``size`` bytes, judged by this (first) chunk's bytes per row."""
        if not self.n:
            return 0
        nbytes = sum(map(len, itertools.chain.from_iterable(self._rows))) + self.n * len(self._rows[0])
        return max(self.n, int(size * self.n / max(nbytes, 1)))


def _skip_rows(chunks, rows: int, partial: str):
    """``chunks`` without their first ``rows`` rows, which must end on a chunk boundary (the
    same --chunk-rows as the interrupted run, recorded with it)."""
    done = 0
    for c in chunks:
        if done < rows:
            done += c.n
            if done > rows:
                raise _errors.UsageError(f"--resume: {partial} does not end where a chunk of the input does; "
                                         "delete it to start again")
            continue
        yield c
    if done < rows:
        raise _errors.UsageError(f"--resume: {partial} holds more rows than the input; delete it to start again")


def _answer(designs, engine, statistics, second_opinion, confirm, ionisation="auto", progress=None):
    return radialpn.predict(normalize_designs(designs), engine=engine, statistics=statistics,
                            second_opinion=second_opinion, confirm=confirm, progress=progress, ionisation=ionisation)


def run_batch(args, console, out, reserved, progress_bar) -> int:
    chunk_rows = getattr(args, "chunk_rows", None)
    chunk_rows = CHUNK_ROWS if chunk_rows is None else chunk_rows
    if chunk_rows < 1:
        raise _errors.UsageError(f"--chunk-rows: a number of rows >= 1 (got {chunk_rows})")
    check_output(args.output, args.input)
    if is_parquet(args.input):
        from ._parquetio import open_parquet

        fields, chunks = open_parquet(args.input, reserved, chunk_rows)
    else:
        fields, raw = open_table(args.input, reserved, chunk_rows)
        index = {c: k for k, c in enumerate(fields)}
        chunks = (_CsvChunk(rows, index) for rows in raw)
    try:  # a header that means an input column but misspells it would be carried along unread
        radialpn.check_columns(fields)
    except radialpn.DesignError as exc:
        raise _errors.UsageError(f"{args.input}: column {exc}") from None
    if not set(fields) & {"material", "core_type", "core_radius_nm"}:
        with contextlib.suppress(Exception):
            chunks.close()
        raise _errors.UsageError(f"{args.input}: no design-table columns in the header (expected e.g. "
                                 f"{', '.join(INPUT_COLUMNS[:4])}; got {', '.join(fields[:4]) or 'nothing'})")
    to_parquet = args.output not in (None, "-") and is_parquet(args.output)
    resume = bool(getattr(args, "resume", False))
    checkpoint = None
    if args.output not in (None, "-") and not to_parquet:  # CSV file out: finished chunks survive an interrupt
        check_target(args.output, "-o")
        checkpoint = Checkpoint(args, chunk_rows)
    elif resume:
        raise _errors.UsageError("--resume: continues an interrupted `batch -o FILE.csv` (CSV output to a file)")
    if to_parquet:
        from ._parquetio import ParquetSink, require_pyarrow

        require_pyarrow("-o " + args.output)
    size = os.path.getsize(args.input) if os.path.isfile(args.input) else 0
    opts = dict(engine=args.engine, statistics=args.statistics, second_opinion=args.second_opinion,
                confirm=args.confirm, ionisation=args.ionisation)
    scheduler = getattr(args, "scheduler", None)
    tally = {"rows": 0, "good": 0, "first": None, "regimes": dict.fromkeys(radialpn.REGIMES, 0)}
    bar, update = progress_bar(console, f"{args.engine} engine")

    def answers():
        """(chunk, result) in file order: answered here, or on the cluster."""
        if scheduler:
            from ._cluster import ordered_map

            pairs = ((c, c.designs()) for c in chunks)
            first = next(pairs, None)
            if first is None:
                return
            chunk_q = []

            def feed():
                for c, d in itertools.chain([first], pairs):
                    chunk_q.append(c)
                    yield d

            for res in ordered_map(scheduler, _answer, feed(), console=console, **opts):
                yield chunk_q.pop(0), res
            return
        done, total = 0, None
        for c in chunks:
            if total is None:
                total = c.total_estimate(size)
            total = max(total, done + c.n)

            def prog(k, t, done=done, total=total):
                update(done + k, max(total, done + t))

            yield c, (_answer(c.designs(), progress=prog, **opts) if c.n else None)
            done += c.n
            if size > 20_000_000:  # ~ a second per chunk or more: show the rows done so far
                update(done, max(total, done))

    def write_all(sink, resumed=None):
        header_done = resumed is not None
        out_cols = resumed[len(fields):] if header_done else None
        if header_done and resumed[:len(fields)] != fields:
            raise _errors.UsageError(f"--resume: {checkpoint.path} has other input columns than {args.input}; "
                                     "delete it to start again")
        for chunk, res in answers():
            if res is None:
                res = {c: np.zeros(0, dtype=object) for c in radialpn.OUTPUT_COLUMNS}
            if out_cols is None:  # the auto engine may call the solver in any chunk: its columns always
                out_cols = [c for c in reserved if c in res or (args.engine == "auto" and c in SOLVER_EXTRAS)]
            if not header_done:
                sink.header(fields + out_cols)
                header_done = True
            for c in out_cols:  # a column this chunk's answer lacks (auto, no solver row here): blank
                if c not in res:
                    res[c] = (np.zeros(chunk.n, dtype=np.int64) if c == "iterations" else
                              np.full(chunk.n, "", dtype=object) if c == "solver_version" else np.full(chunk.n, np.nan))
            sink.write(chunk, res, out_cols)
            if checkpoint is not None:
                checkpoint.chunk_done(chunk.n)
            st = np.asarray(res["status"])
            ok = st == "ok"
            if tally["first"] is None and not ok.all():
                k = int(np.flatnonzero(~ok)[0])
                tally["first"] = (tally["rows"] + k, str(st[k]))
            tally["rows"] += chunk.n
            tally["good"] += int(ok.sum())
            for r in radialpn.REGIMES:
                tally["regimes"][r] += int((np.asarray(res["regime"]) == r).sum())
        sink.close()

    with bar:
        if args.output in (None, "-"):
            with tempfile.TemporaryFile("w+", newline="", encoding="utf-8") as spool:
                write_all(_CsvSink(spool))
                spool.seek(0)
                shutil.copyfileobj(spool, out, 1 << 20)
        elif to_parquet:
            with atomic_text(args.output, "-o", binary=True) as fh:
                sink = ParquetSink(fh)
                try:
                    write_all(sink)
                except BaseException:
                    sink.abandon()
                    raise
        else:
            try:
                fh, header, (done_status, done_regime) = checkpoint.open(resume)
            except BaseException:
                checkpoint.release()
                raise
            if header is not None:  # the rows a resumed run already has: counted, not answered again
                st = np.asarray(done_status, dtype=object)
                tally["rows"], tally["good"] = st.size, int((st == "ok").sum())
                if (st != "ok").any():
                    k = int(np.flatnonzero(st != "ok")[0])
                    tally["first"] = (k, str(st[k]))
                for r in radialpn.REGIMES:
                    tally["regimes"][r] += done_regime.count(r)
                chunks = _skip_rows(chunks, st.size, checkpoint.path)
            try:
                write_all(_CsvSink(fh), header)
            except _errors.UsageError:  # bad input (a malformed line late in the file): its rows would
                if not resume:          # not match the corrected file, so a fresh run leaves nothing
                    checkpoint.discard()
                else:
                    checkpoint.interrupted()  # a resumed run keeps what it was given
                raise
            except BaseException as exc:  # interrupted or failed: the whole chunks stay for --resume
                kept = checkpoint.interrupted()
                if kept:
                    console.print(f"[dim]{kept}[/]")
                if isinstance(exc, OSError):
                    raise _errors.UsageError(f"-o {args.output}: cannot write ({exc.strerror})") from None
                raise
            checkpoint.finish()
    n, good = tally["rows"], tally["good"]
    summary = ", ".join(f"{k} {r}" for r, k in tally["regimes"].items() if k) or "none"
    console.print(f"[dim]{n} rows · {good} answered ({summary}) · {n - good} with a reason "
                  f"in status · engine {args.engine}[/]")
    if good < n:
        first, why = tally["first"]
        console.print(f"[dim]first row without an answer: line {first + 2}: {why}[/]")
        return _errors.OK if args.keep_going else _errors.NO_ANSWER
    return _errors.OK
