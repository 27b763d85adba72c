"""Design tables as files: a strict CSV reader (UTF-8, delimiter sniffed among comma,
semicolon and tab, every cell kept as text) and atomic writes (a temporary file in the target
folder, renamed into place; removed on any exit, SIGTERM included)."""

from __future__ import annotations

import contextlib
import csv
import io
import os
import re
import signal
import tempfile

from . import _errors

DELIMITERS = (",", ";", "\t")
_DECIMAL_COMMA = re.compile(r"^[-+]?[0-9]+,[0-9]+(?:[eE][-+]?[0-9]+)?$")


def read_table(path: str, reserved=()) -> tuple:
    """(header, rows) of a CSV design table; each row a list of text cells as long as the
    header. Raises ``UsageError`` (one line) for an unreadable, non-UTF-8 or binary file, a
    missing header, a column given twice, a column named like one of ``reserved`` (the
    outputs that would overwrite it) and a row longer than the header."""
    try:
        with open(path, "rb") as fh:
            data = fh.read()
    except OSError as exc:
        raise _errors.UsageError(f"{path}: cannot read ({exc.strerror})") from None
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise _errors.UsageError(f"{path}: not UTF-8 text (byte {exc.start} is 0x{data[exc.start]:02x}); "
                                 "save it as UTF-8 CSV") from None
    if "\x00" in text:
        raise _errors.UsageError(f"{path}: holds NUL bytes; expected a text CSV file")
    first = text.split("\n", 1)[0]
    if not first.strip():
        raise _errors.UsageError(f"{path}: empty file or blank first line (expected a header row with "
                                 "design-table columns)")
    delim = max(DELIMITERS, key=lambda d: (first.count(d), d == ","))
    try:
        rows = list(csv.reader(io.StringIO(text, newline=""), delimiter=delim, strict=True))
    except csv.Error as exc:
        raise _errors.UsageError(f"{path}: not a readable CSV file ({exc})") from None
    header, body = rows[0], rows[1:]
    seen = set()
    for name in header:
        if name in seen:
            raise _errors.UsageError(f"{path}: column {name!r} appears twice in the header; give each column once")
        seen.add(name)
    clash = [c for c in header if c in reserved]
    if clash:
        raise _errors.UsageError(f"{path}: input column {clash[0]!r} has the name of an output column that radialpn "
                                 "writes; rename it so it comes back unchanged")
    width = len(header)
    out = []
    for i, row in enumerate(body):
        if not row:
            continue  # a blank line is no design (a line holding "" is a row with one empty cell)
        if len(row) > width:
            raise _errors.UsageError(f"{path}: line {i + 2} has {len(row)} cells, the header {width}; "
                                     "every cell needs a column")
        out.append(row + [""] * (width - len(row)))
    if delim == ";":
        for row in out[:1000]:
            for cell in row:
                if _DECIMAL_COMMA.match(cell.strip()):
                    raise _errors.UsageError(f"{path}: decimal commas ({cell!r}); radialpn reads numbers with a "
                                             "decimal point: export the sheet with '.' as decimal separator")
    return header, out


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


@contextlib.contextmanager
def atomic_text(target: str, option: str):
    """Write text to ``target`` all or nothing: yields a file object on a temporary file in the
    target's folder, renamed onto ``target`` when the block ends normally; on any error, Ctrl-C
    or SIGTERM the temporary file is removed and ``target`` is left as it was (on Linux the
    temporary file has no name until the end, so SIGKILL leaves nothing either)."""
    path = os.path.abspath(target)
    folder = os.path.dirname(path)
    if os.path.isdir(path):
        raise _errors.UsageError(f"{option} {target}: is a folder; name a file")
    if os.path.exists(path) and not os.path.isfile(path):
        raise _errors.UsageError(f"{option} {target}: not a regular file; name a file in a folder you can write")
    if not os.path.isdir(folder):
        raise _errors.UsageError(f"{option} {target}: folder {folder} does not exist")
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
        with os.fdopen(fd, "w", newline="", encoding="utf-8") as fh:
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
