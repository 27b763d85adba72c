"""Design tables as Parquet files for `batch` (the ``parquet`` extra: pyarrow). Same columns
and the same validation as CSV: the design columns go through ``normalize_designs`` as the
values the file holds (numbers as numbers, text as text, a null as a blank cell); every input
column is written back unchanged, in order, with its own type, followed by the output columns
(numbers as float64, counts as int64, flags as bool, text as string). Read and written in row
batches, so memory stays bounded; the output appears only when complete (``atomic_text``)."""

from __future__ import annotations

import contextlib

import numpy as np

from radialpn import INPUT_COLUMNS

from . import _errors
from ._csvio import check_header

EXTRA = "pip install 'radialpn[parquet]'"


def require_pyarrow(what: str):
    """pyarrow and pyarrow.parquet, or a one-line ``UsageError`` naming the extra."""
    try:
        import pyarrow
        import pyarrow.parquet
    except ImportError:
        raise _errors.UsageError(f"{what}: Parquet needs pyarrow: {EXTRA}") from None
    return pyarrow, pyarrow.parquet


class _ParquetChunk:
    """One record batch of the input."""

    def __init__(self, batch, total):
        self.batch, self.n, self._total = batch, batch.num_rows, total

    def designs(self) -> dict:
        names = self.batch.schema.names
        return {c: self.batch.column(names.index(c)).to_pylist() for c in INPUT_COLUMNS if c in names}

    def columns(self) -> list:
        """The input cells as CSV text, column by column (Parquet in, CSV out): numbers in their
        shortest round-trip form, a null as an empty cell."""
        return [["" if v is None else (repr(v) if isinstance(v, float) else str(v)) for v in col.to_pylist()]
                for col in self.batch.columns]

    def total_estimate(self, size: int) -> int:
        return self._total


def open_parquet(path: str, reserved=(), chunk_rows: int = 20_000):
    """(header, chunks) of a Parquet design table; the header checks of ``open_table``."""
    _, pq = require_pyarrow(path)
    try:
        f = pq.ParquetFile(path)
    except FileNotFoundError:
        raise _errors.UsageError(f"{path}: cannot read (No such file or directory)") from None
    except OSError as exc:
        raise _errors.UsageError(f"{path}: cannot read ({exc.strerror or 'not a Parquet file'})") from None
    except Exception as exc:  # pyarrow raises ArrowInvalid for a file that is not Parquet
        raise _errors.UsageError(f"{path}: not a readable Parquet file ({str(exc).splitlines()[0]})") from None
    header = list(f.schema_arrow.names)
    check_header(path, header, reserved)
    total = f.metadata.num_rows

    def chunks():
        got = False
        try:
            for batch in f.iter_batches(batch_size=max(1, int(chunk_rows))):
                got = True
                yield _ParquetChunk(batch, total)
        except OSError as exc:
            raise _errors.UsageError(f"{path}: cannot read ({exc})") from None
        if not got:
            import pyarrow

            yield _ParquetChunk(pyarrow.RecordBatch.from_pylist([], schema=f.schema_arrow), total)

    return header, chunks()


def _arrow_column(pa, values):
    a = np.asarray(values)
    if a.dtype.kind == "b":
        return pa.array(a, type=pa.bool_())
    if a.dtype.kind == "f":
        return pa.array(a, type=pa.float64())
    if a.dtype.kind in "iu":
        return pa.array(a.astype(np.int64), type=pa.int64())
    return pa.array(["" if x is None else str(x) for x in a], type=pa.string())


class ParquetSink:
    """Writes chunks as Parquet row groups into the binary file ``fh``."""

    def __init__(self, fh):
        self.pa, self.pq = require_pyarrow("-o")
        self.fh, self.writer, self.schema, self.names = fh, None, None, None

    def header(self, header):
        self.names = list(header)

    def write(self, chunk, result, out_cols):
        pa = self.pa
        if isinstance(chunk, _ParquetChunk):
            inputs = list(chunk.batch.columns)
        else:  # CSV in: the cells as text
            cols = chunk.columns() or [[] for _ in range(len(self.names) - len(out_cols))]
            inputs = [pa.array(c, type=pa.string()) for c in cols]
        outputs = [_arrow_column(pa, result[c]) for c in out_cols]
        table = pa.Table.from_arrays(inputs + outputs, names=self.names)
        if self.writer is None:
            self.schema = table.schema
            self.writer = self.pq.ParquetWriter(self.fh, self.schema)
        elif table.schema != self.schema:
            table = table.cast(self.schema)
        self.writer.write_table(table)

    def close(self):
        if self.writer is None:  # a header alone: an empty table with these columns
            pa = self.pa
            empty = pa.Table.from_arrays([pa.array([], type=pa.string()) for _ in self.names], names=self.names)
            self.writer = self.pq.ParquetWriter(self.fh, empty.schema)
            self.writer.write_table(empty)
        self.writer.close()

    def abandon(self):
        """Drop the writer without its footer while the file is still open (an interrupted or
        failed run): otherwise pyarrow's finaliser writes to the closed, discarded file later and
        prints a traceback after 'interrupted'."""
        writer, self.writer = self.writer, None
        if writer is not None:
            with contextlib.suppress(Exception):
                writer.close()
