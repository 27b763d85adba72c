"""radialpn's terminal front end. ``main(argv, console, out)`` runs one command and returns
its exit code; ``console`` (rich) receives human-readable output and ``out`` machine-readable
output (JSON, CSV), so tests can render both to strings. Each command module declares its own
flags and handler (``register(subparsers)``); this module only assembles them and turns the
library's typed errors into exit codes."""

from __future__ import annotations

import argparse
import importlib
import os
import re
import sys

from . import _errors

__all__ = ["main", "build_parser", "COMMANDS"]

#: command modules, in the order `radialpn --help` lists their commands
COMMAND_MODULES = ("_commands", "_profile_cmd", "_map_cmd", "_size_cmd", "_spread_cmd", "_calibrate_cmd", "_report_cmd", "_console",
                   "_models_cmd", "_dataset_cmd", "_demo")
#: command -> the module that registers it: a command line naming one loads only that module
COMMANDS = {"ask": "_commands", "batch": "_commands", "materials": "_commands", "profile": "_profile_cmd",
            "map": "_map_cmd", "size": "_size_cmd", "search": "_size_cmd", "spread": "_spread_cmd",
            "calibrate": "_calibrate_cmd", "report": "_report_cmd", "console": "_console", "models": "_models_cmd",
            "validate": "_models_cmd", "train": "_models_cmd", "dataset": "_dataset_cmd", "demo": "_demo"}


_NEGATIVE_VALUE = re.compile(r"^-\.?\d")


class _Parser(argparse.ArgumentParser):
    """argparse with one-line errors (no usage dump) that name the command's --help. A word
    that starts with a minus and a digit (``-5nm``, ``-0.2eV``, ``-1e3``) is a value, never an
    option (no option of ours starts with a digit), so the validation layer, not argparse, says
    what range a negative value breaks."""

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self._negative_number_matcher = _NEGATIVE_VALUE  # argparse's own hook for this (private)

    def error(self, message):
        raise _errors.UsageError(f"{message} (see `{self.prog} --help`)")


def _command_of(argv) -> str | None:
    """The command an argument list names (the first word that is not a global option)."""
    words = iter(argv)
    for w in words:
        if w == "--materials":
            next(words, None)
        elif not w.startswith("-"):
            return w
    return None


def build_parser(command: str | None = None) -> argparse.ArgumentParser:
    """The parser of every command, or with ``command`` (a key of ``COMMANDS``) of that
    command's module only (what a command line needs; start-up stays short)."""
    p = _Parser(prog="radialpn", description="Depletion regime and built-in potential of core-shell "
                "(radial p-n) nanowires. Answers are design estimates, not measurements.")
    p.add_argument("--version", action="store_true", help="print the version and exit")
    p.add_argument("--materials", metavar="FILE", action="append", default=[],
                   help="add materials from a TOML or JSON file (repeatable)")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name in (COMMANDS[command],) if command in COMMANDS else COMMAND_MODULES:
        importlib.import_module(f"{__name__}.{name}").register(sub)
    return p


def main(argv=None, console=None, out=None, stdin=None) -> int:
    """Run ``radialpn`` with ``argv`` (default: sys.argv[1:]); return the exit code. ``stdin``
    feeds the console's commands (default: sys.stdin)."""
    from rich.console import Console

    import radialpn

    out = out if out is not None else sys.stdout
    err_console = Console(stderr=True, highlight=False) if console is None else console
    if argv is None:  # the command line: SIGTERM stops a run as Ctrl-C does (outputs cleaned, exit 130)
        import signal

        def _stop(signum, frame):
            raise KeyboardInterrupt

        signal.signal(signal.SIGTERM, _stop)
    try:
        argv = sys.argv[1:] if argv is None else list(argv)
        parser = build_parser(_command_of(argv))
        args = parser.parse_args(argv)
        if args.version:
            out.write(f"radialpn {radialpn.__version__}\n")
            return _errors.OK
        radialpn.worker_threads()  # a malformed RADIALPN_THREADS stops here, before any work
        for path in args.materials:
            for m in radialpn.load_material_file(path):
                radialpn.register_material(m)
        if args.command is None:
            parser.print_help(out)
            return _errors.OK
        if console is None:
            to_stdout_machine = args.command == "batch" and args.output in (None, "-")
            console = err_console if to_stdout_machine else Console(highlight=False)
        if args.command == "console":
            return args.handler(args, console, out, stdin=stdin)
        return args.handler(args, console, out)
    except (_errors.UsageError, radialpn.RadialpnError) as exc:
        err_console.print(f"radialpn: error: {exc}", markup=False, highlight=False, emoji=False, soft_wrap=True)
        return _errors.BAD_INPUT
    except KeyboardInterrupt:
        err_console.print("radialpn: interrupted", markup=False)
        return _errors.INTERRUPTED
    except BrokenPipeError:  # the reader left (`| head`): stop quietly, as command-line tools do
        try:
            os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        except (OSError, ValueError):
            pass
        return _errors.OK
    except Exception as exc:  # a bug: one line, traceback only on request
        if os.environ.get("RADIALPN_DEBUG"):
            raise
        err_console.print(f"radialpn: internal error: {type(exc).__name__}: {exc} (set RADIALPN_DEBUG=1 for "
                          "the traceback, and please report it)", markup=False, highlight=False, soft_wrap=True)
        return _errors.INTERNAL
