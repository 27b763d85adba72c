"""Design tables as files: a strict CSV reader (UTF-8, delimiter sniffed among comma,
semicolon and tab, every cell kept as text; whole or streamed in chunks of rows) and atomic writes (a temporary file in the target
folder, renamed into place; removed on any exit, SIGTERM included)."""

from __future__ import annotations

import contextlib
import csv
import io
import itertools
import os
import re
import signal
import tempfile

from . import _errors

DELIMITERS = (",", ";", "\t")
_DECIMAL_COMMA = re.compile(r"^[-+]?[0-9]+,[0-9]+(?:[eE][-+]?[0-9]+)?$")


CHUNK_ROWS = 20_000  #: rows per chunk when a table is streamed (batch): bounds memory (surrogate ~380 MB)


def read_table(path: str, reserved=()) -> tuple:
    """(header, rows) of a CSV design table; each row a list of text cells as long as the
    header. Raises ``UsageError`` (one line) for an unreadable, non-UTF-8 or binary file, a
    missing header, a column given twice, a column named like one of ``reserved`` (the
    outputs that would overwrite it) and a row longer than the header."""
    header, chunks = open_table(path, reserved)
    rows = []
    for chunk in chunks:
        rows.extend(chunk)
    return header, rows


def _bad_byte(path: str) -> tuple:
    """(offset, value) of the first byte of ``path`` that is not UTF-8, read in blocks."""
    import codecs

    dec = codecs.getincrementaldecoder("utf-8")()
    base = 0
    with open(path, "rb") as fh:
        while True:
            block = fh.read(1 << 20)
            pending = dec.getstate()[0]  # the start of a sequence left from the last block
            try:
                dec.decode(block, final=not block)
            except UnicodeDecodeError as exc:
                data = pending + block
                return base - len(pending) + exc.start, data[exc.start]
            if not block:
                return base, 0
            base += len(block)


def open_table(path: str, reserved=(), chunk_rows: int = CHUNK_ROWS) -> tuple:
    """(header, chunks) of a CSV design table, streamed: ``chunks`` yields lists of at most
    ``chunk_rows`` rows, each a list of text cells as long as the header, in file order. The
    header is checked at once (same errors as ``read_table``); a bad row, a byte that is not
    UTF-8 or a NUL raises ``UsageError`` from the iteration when it is reached."""
    try:
        fh = open(path, "rb")
    except OSError as exc:
        raise _errors.UsageError(f"{path}: cannot read ({exc.strerror})") from None
    text = io.TextIOWrapper(fh, encoding="utf-8-sig", newline="")

    def not_utf8():
        off, byte = _bad_byte(path)
        return _errors.UsageError(f"{path}: not UTF-8 text (byte {off} is 0x{byte:02x}); save it as UTF-8 CSV")

    def nul():
        return _errors.UsageError(f"{path}: holds NUL bytes; expected a text CSV file")

    try:
        first = text.readline()
    except UnicodeDecodeError:
        text.close()
        raise not_utf8() from None
    if "\x00" in first:
        text.close()
        raise nul()
    if not first.strip():
        text.close()
        raise _errors.UsageError(f"{path}: empty file or blank first line (expected a header row with "
                                 "design-table columns)")
    delim = max(DELIMITERS, key=lambda d: (first.count(d), d == ","))

    def blocks():
        yield [first]
        try:
            while True:
                block = text.readlines(1 << 20)  # ~1 MB of whole lines at a time
                if not block:
                    return
                if "\x00" in "".join(block):
                    raise nul()
                yield block
        except UnicodeDecodeError:
            raise not_utf8() from None

    # lines are handed to csv in C (chain), so no Python code runs per line or per cell
    reader = csv.reader(itertools.chain.from_iterable(blocks()), delimiter=delim, strict=True)
    try:
        header = _records(path, reader, 1)
        header = header[0] if header else []
    except BaseException:
        text.close()
        raise
    try:
        check_header(path, header, reserved)
    except _errors.UsageError:
        text.close()
        raise
    return header, _chunks(path, text, reader, len(header), delim, max(1, int(chunk_rows)))


def check_header(path, header, reserved) -> None:
    """``UsageError`` for a column given twice or named like one of the ``reserved`` outputs."""
    seen = set()
    for name in header:
        if name in seen:
            raise _errors.UsageError(f"{path}: column {name!r} appears twice in the header; give each column once")
        seen.add(name)
    clash = [c for c in header if c in reserved]
    if clash:
        raise _errors.UsageError(f"{path}: input column {clash[0]!r} has the name of an output column that radialpn "
                                 "writes; rename it so it comes back unchanged")


def _records(path, reader, n) -> list:
    """The next ``n`` records of ``reader`` (fewer at the end)."""
    try:
        return list(itertools.islice(reader, n))
    except csv.Error as exc:
        raise _errors.UsageError(f"{path}: not a readable CSV file ({exc})") from None


def _chunks(path, text, reader, width, delim, chunk_rows):
    """Rows of ``reader`` (after the header) in lists of up to ``chunk_rows``, blank lines left
    out, short rows padded with empty cells; closes ``text`` at the end."""
    try:
        seen = 0  # records read after the header
        first = True
        while True:
            block = _records(path, reader, chunk_rows)
            if not block and not first:
                return
            lens = list(map(len, block))
            if lens and (min(lens) != width or max(lens) != width):
                rows = []
                for i, (row, n) in enumerate(zip(block, lens)):
                    if n > width:
                        raise _errors.UsageError(f"{path}: line {seen + i + 2} has {n} cells, the header {width}; "
                                                 "every cell needs a column")
                    if n:  # a blank line is no design (a line holding "" is a row with one empty cell)
                        rows.append(row + [""] * (width - n) if n < width else row)
                block = rows
            seen += len(lens)
            if first:
                _decimal_commas(path, block, delim)
                first = False
            yield block
            if len(lens) < chunk_rows:
                return
    finally:
        text.close()


def _decimal_commas(path, rows, delim):
    if delim == ";":
        for row in rows[:1000]:
            for cell in row:
                if _DECIMAL_COMMA.match(cell.strip()):
                    raise _errors.UsageError(f"{path}: decimal commas ({cell!r}); radialpn reads numbers with a "
                                             "decimal point: export the sheet with '.' as decimal separator")


class _Terminated(BaseException):
    """SIGTERM arrived while a file was being written."""


def _open_temp(folder: str):
    """(fd, name) of a new file in ``folder``; on Linux an unnamed one (O_TMPFILE, name None),
    so that even SIGKILL leaves nothing behind; elsewhere a hidden named temporary file."""
    if hasattr(os, "O_TMPFILE") and os.path.isdir("/proc/self/fd"):
        try:
            return os.open(folder, os.O_TMPFILE | os.O_WRONLY, 0o644), None
        except OSError:  # a file system without unnamed files
            pass
    return tempfile.mkstemp(prefix=".radialpn-", suffix=".part", dir=folder)


def check_suffix(target, option: str, allowed: tuple) -> None:
    """A one-line ``UsageError`` before any work if ``target`` (when given) does not end in one
    of ``allowed`` (lower-case suffixes): a file is never written under a suffix that names
    another format (HTML as .csv, PNG as .jpg)."""
    if target and os.path.splitext(str(target))[1].lower() not in allowed:
        raise _errors.UsageError(f"{option} {target}: this writes {' or '.join(allowed)} files; name one so")


def check_target(target, option: str) -> str:
    """The absolute path of an output ``target``, after checking it names a file (not a folder
    or a special file) in an existing folder: a one-line ``UsageError`` before any work."""
    path = os.path.abspath(target)
    if os.path.isdir(path):
        raise _errors.UsageError(f"{option} {target}: is a folder; name a file")
    if os.path.exists(path) and not os.path.isfile(path):
        raise _errors.UsageError(f"{option} {target}: not a regular file; name a file in a folder you can write")
    if not os.path.isdir(os.path.dirname(path)):
        raise _errors.UsageError(f"{option} {target}: folder {os.path.dirname(path)} does not exist")
    return path


@contextlib.contextmanager
def atomic_text(target: str, option: str, binary: bool = False):
    """Write text (bytes if ``binary``) to ``target`` all or nothing: yields a file object on a
    temporary file in the target's folder, renamed onto ``target`` when the block ends normally; on any error, Ctrl-C
    or SIGTERM the temporary file is removed and ``target`` is left as it was (on Linux the
    temporary file has no name until the end, so SIGKILL leaves nothing either)."""
    path = check_target(target, option)
    folder = os.path.dirname(path)
    try:
        fd, tmp = _open_temp(folder)
    except OSError as exc:
        raise _errors.UsageError(f"{option} {target}: cannot write in {folder} ({exc.strerror})") from None
    previous = None

    def on_term(signum, frame):
        raise _Terminated()

    try:
        previous = signal.signal(signal.SIGTERM, on_term)
    except ValueError:  # not the main thread: no handler, the finally clause still cleans up
        previous = None
    try:
        with (os.fdopen(fd, "wb") if binary else os.fdopen(fd, "w", newline="", encoding="utf-8")) as fh:
            yield fh
            fh.flush()
            if tmp is None:  # an unnamed file (O_TMPFILE): give it a name only now, then rename
                named = os.path.join(folder, f".radialpn-{os.getpid()}-{id(fh):x}.part")
                proc = os.open("/proc/self/fd", os.O_RDONLY)
                try:  # linkat(..., AT_SYMLINK_FOLLOW) on the magic link: plain link() would not follow it
                    os.link(str(fh.fileno()), named, src_dir_fd=proc, follow_symlinks=True)
                finally:
                    os.close(proc)
                tmp = named
        os.replace(tmp, path)
        tmp = None
    except OSError as exc:
        raise _errors.UsageError(f"{option} {target}: cannot write ({exc.strerror})") from None
    except _Terminated:
        raise KeyboardInterrupt from None
    finally:
        if tmp is not None:
            with contextlib.suppress(OSError):
                os.unlink(tmp)
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)
