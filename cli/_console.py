"""`radialpn console`: an interactive what-if session that keeps the model warm, with line
editing, persistent history and tab completion through the standard library's readline where it
exists; and a JSON-lines mode for programs (cli/_jsonl.py, docs/console-jsonl.md). Reads from
``stdin`` (a stream argument), so tests script it."""

from __future__ import annotations

import math
import os
import sys
import time

from rich.markup import escape
from rich.text import Text

import radialpn

from . import _errors
from . import _format as F
from ._axes import VARIABLES, value
from ._designargs import add_design_flags, design_from_args, engine_flags
from ._render import CAUTION, regime_text

#: the demo's invented wire: what the console assumes for a variable not given on the command line
PLAN = dict(material="GaAs", core_type="p", core_radius_nm=45.0, shell_thickness_nm=30.0, core_doping_cm3=5e17,
            shell_doping_cm3=2e18, dit_cm2eV=5e12)
#: command -> (what it does, an example)
COMMANDS = {
    "set": ("change one variable (unit suffixes accepted)", "set shell 35nm · set dit 3e11 · set core-type n"),
    "show": ("the current design and its answer", "show"),
    "verify": ("run the reference solver on the current design and compare", "verify"),
    "engine": ("answer with another engine: surrogate, depletion or solver", "engine depletion"),
    "undo": ("go back one change", "undo"),
    "history": ("the designs so far, oldest first", "history"),
    "help": ("this list", "help"),
    "quit": ("leave (also `exit` or Ctrl-D); Ctrl-C cancels the line typed", "quit"),
}
SET_NAMES = sorted(VARIABLES) + ["material", "core-type"]
HISTORY_LENGTH = 1000  #: lines kept in the history file


def register(sub) -> None:
    co = sub.add_parser("console", help="interactive what-if session (or --jsonl for programs)")
    add_design_flags(co)
    engine_flags(co)
    co.add_argument("--jsonl", action="store_true", help="JSON-lines mode for programs: one JSON request per line, "
                    "one JSON reply per line (docs/console-jsonl.md)")
    co.set_defaults(handler=cmd_console)


def help_text() -> str:
    lines = ["commands, each with an example:"]
    for name, (what, example) in COMMANDS.items():
        lines.append(f"  {name:<8} {what}")
        if example != name:
            lines.append(f"  {'':<8}   e.g. {example}")
    lines.append("  set names: " + ", ".join(SET_NAMES[:6]))
    lines.append("             " + ", ".join(SET_NAMES[6:]))
    lines.append("  Up/Down recall earlier lines, Tab completes commands and names (where readline exists)")
    return "\n".join(lines)


class Session:
    """The design being explored, its engine, the undo history and the last answers."""

    def __init__(self, design: dict, engine: str, statistics: str, assumed=(), ionisation: str = "auto"):
        self.design, self.engine, self.statistics = dict(design), engine, statistics
        self.ionisation = ionisation
        self.assumed = set(assumed)  #: columns taken from PLAN and not set since
        self.history: list = []
        self.last = None
        self.verified = None  #: (design, engine) the solver last checked

    def answer(self) -> dict:
        t = time.perf_counter()
        res = radialpn.predict({k: [v] for k, v in self.design.items()}, self.engine, self.statistics,
                               second_opinion=self.engine in ("surrogate", "auto"), ionisation=self.ionisation)
        row = {k: (v[0].item() if hasattr(v[0], "item") else v[0]) for k, v in res.items()}
        row["ms"] = 1e3 * (time.perf_counter() - t)
        row["verified"] = self.verified == (self.design, self.engine)
        return row

    def parse_set(self, name: str, text: str) -> tuple:
        """(column, value) of ``set NAME VALUE``, validated; raises UsageError/RadialpnError."""
        if name == "material":
            return "material", radialpn.get_material(text).name  # raises MaterialError with the known names
        if name in ("core-type", "type"):
            if text.lower() not in ("p", "n"):
                raise _errors.UsageError(f"core_type: must be p or n (got {text!r})")
            return "core_type", text.lower()
        col = VARIABLES.get(name)
        if col is None:
            raise _errors.UsageError(f"set: unknown variable {name!r}; one of {', '.join(SET_NAMES)}")
        return col, value(col, text, "set")

    def apply(self, changes: dict) -> None:
        """Apply column -> value changes all together, or none if the result is not a valid design."""
        table = radialpn.normalize_designs({k: [v] for k, v in {**self.design, **changes}.items()})
        if table.status[0] != "ok":
            raise _errors.UsageError(str(table.status[0]))
        self.history.append((dict(self.design), set(self.assumed)))
        self.design = clean_design(table)
        self.assumed -= set(changes)

    def replace(self, design: dict) -> None:
        """A whole new design (validated first; nothing changes if it is not valid)."""
        table = radialpn.check_design(design)
        self.history.append((dict(self.design), set(self.assumed)))
        self.design, self.assumed = clean_design(table), set()

    def undo(self) -> bool:
        if not self.history:
            return False
        self.design, self.assumed = self.history.pop()
        return True

    def verify(self) -> dict:
        """The reference solver on the current design, compared with the last answer."""
        t = time.perf_counter()
        ref = radialpn.solve({k: [v] for k, v in self.design.items()}, self.statistics, ionisation=self.ionisation)
        out = {"regime": str(ref["regime"][0]), "vbi_V": float(ref["vbi_V"][0]), "status": str(ref["status"][0]),
               "ms": 1e3 * (time.perf_counter() - t)}
        last = self.answer()
        out["difference_mV"] = (1e3 * (last["vbi_V"] - out["vbi_V"]) if last["status"] == "ok" and out["status"] == "ok"
                                else math.nan)
        out["same_regime"] = last.get("regime") == out["regime"]
        if out["status"] == "ok":
            self.verified = (dict(self.design), self.engine)
        return out


def clean_design(table) -> dict:
    """The first row of a validated ``DesignTable`` as plain values (numbers, not as typed)."""
    return {"material": str(table.material[0]), "core_type": "p" if table.p_core[0] else "n",
            **{k: float(v[0]) for k, v in table.values.items() if not math.isnan(v[0])}}


def start_session(args) -> Session:
    """The session's first design: the flags given, the rest assumed from PLAN (and said so)."""
    given = design_from_args(args)
    design = {**PLAN, **given}
    table = radialpn.normalize_designs({k: [v] for k, v in design.items()})
    if table.status[0] != "ok":
        raise _errors.UsageError(str(table.status[0]))
    clean = clean_design(table)
    session = Session(clean, args.engine, args.statistics, assumed=[k for k in PLAN if k not in given],
                      ionisation=args.ionisation)
    if args.engine in ("surrogate", "auto"):
        try:
            radialpn.load(clean["material"], clean["core_type"])  # warm before the first answer
        except radialpn.BundleError:
            pass
    session.answer()  # the first call builds lookup tables; later answers take about a millisecond
    return session


def _line(row: dict, prev) -> Text:
    if row["status"] != "ok":
        return Text(f"no answer: {row['status']}", style="#d9534f")
    t = Text.assemble(regime_text(row["regime"]))
    if math.isfinite(row.get("regime_prob", math.nan)):
        t.append(f" {F.probability(row['regime_prob'])}")
    t.append(f" V_bi {F.volts(row['vbi_V'], False)}")
    if math.isfinite(row.get("vbi_low_V", math.nan)):
        t.append(f" [{F.volts(row['vbi_low_V'], False)}, {F.volts(row['vbi_high_V'], False)}]")
    t.append(f" V ({F.percent(row['vbi_V'] / row['vbi0_V'])})")
    if prev is not None and prev.get("status") == "ok":
        d = 1e3 * (row["vbi_V"] - prev["vbi_V"])
        t.append(f" Δ {F.millivolts(d)}", style="#3aa876" if d >= 0 else "#d9534f")
    if row.get("confirm_with_solver"):
        t.append(" ⚑ verified" if row.get("verified") else " ⚑ verify", style="bold #e0a526")
    t.append(f" {F.milliseconds(row['ms'] / 1e3)}", style="dim")
    return t


def _design_text(d: dict) -> str:
    return " · ".join(f"{k}={F.quantity(k, v)}" if isinstance(v, float) else f"{k}={v}" for k, v in d.items())


def _assumed_text(session: Session) -> str:
    names = [k for k in PLAN if k in session.assumed]
    return ("assumed, not given on the command line (the demo's invented wire): "
            + ", ".join(f"{k}={F.quantity(k, PLAN[k]) if isinstance(PLAN[k], float) else PLAN[k]}" for k in names)
            + "; change any with `set`")


class LineReader:
    """Lines from ``stdin``. On an interactive terminal: ``input()`` with readline's line editing,
    persistent history (``RADIALPN_HISTORY`` or ~/.local/state/radialpn/history) and tab
    completion; without readline a plain prompt, said once."""

    def __init__(self, stdin, console):
        self.stdin, self.console = stdin, console
        self.interactive = stdin is sys.stdin and hasattr(stdin, "isatty") and stdin.isatty()
        self.readline = None
        self.history_file = None
        if self.interactive:
            try:
                import readline
            except ImportError:  # e.g. Windows without pyreadline
                console.print("[dim]line editing is not available here (no readline module): arrow keys and Tab "
                              "will not work; commands still do.[/]")
            else:
                self.readline = readline
                self._set_up(readline)

    def _set_up(self, readline) -> None:
        self.history_file = history_path()
        try:
            os.makedirs(os.path.dirname(self.history_file), exist_ok=True)
            readline.read_history_file(self.history_file)
        except OSError:
            pass
        readline.set_history_length(HISTORY_LENGTH)
        readline.set_completer(completer(readline))
        readline.set_completer_delims(" \t")
        if "libedit" in (readline.__doc__ or ""):
            readline.parse_and_bind("bind ^I rl_complete")
        else:
            readline.parse_and_bind("tab: complete")

    def read(self, prompt: str = "radialpn> "):
        """The next line, '' for a cancelled line (Ctrl-C), None at the end (Ctrl-D)."""
        if not self.interactive:
            line = self.stdin.readline()
            return None if not line else line
        try:
            return input(prompt)
        except KeyboardInterrupt:
            self.console.print("[dim]^C: line cancelled (Ctrl-D or `quit` leaves)[/]")
            return ""
        except EOFError:
            self.console.print("")
            return None

    def close(self) -> None:
        if self.readline is not None and self.history_file:
            try:
                self.readline.write_history_file(self.history_file)
            except OSError:
                pass


def history_path() -> str:
    if os.environ.get("RADIALPN_HISTORY"):
        return os.environ["RADIALPN_HISTORY"]
    state = os.environ.get("XDG_STATE_HOME") or os.path.join(os.path.expanduser("~"), ".local", "state")
    return os.path.join(state, "radialpn", "history")


def completions(line: str, text: str) -> list:
    """Candidates for the word ``text`` being typed at the end of ``line`` (before the cursor)."""
    words = line.split()
    if len(words) == 0 or (len(words) == 1 and not line.endswith(" ")):
        options = list(COMMANDS) + ["exit"]
    elif words[0] == "set" and (len(words) == 1 or (len(words) == 2 and not line.endswith(" "))):
        options = SET_NAMES
    elif words[0] == "set" and words[1] == "material":
        options = list(radialpn.material_names())
    elif words[0] == "set" and words[1] in ("core-type", "type"):
        options = ["p", "n"]
    elif words[0] == "engine":
        options = list(radialpn.ENGINES)
    else:
        options = []
    return [o for o in options if o.startswith(text)]


def completer(readline):
    def complete(text, state):
        found = completions(readline.get_line_buffer()[:readline.get_endidx()], text)
        return (found[state] + " ") if state < len(found) else None

    return complete


def cmd_console(args, console, out, stdin=None) -> int:
    stdin = stdin if stdin is not None else sys.stdin
    session = start_session(args)
    if args.jsonl:
        from ._jsonl import serve

        return serve(session, stdin, out)
    reader = LineReader(stdin, console)
    console.print(Text("radialpn console · `help` lists the commands; each change answers at once", style="bold"))
    console.print(Text(_design_text(session.design), style="dim"))
    if session.assumed:
        console.print(Text(_assumed_text(session), style="#e0a526"))
    session.last = session.answer()
    console.print(Text("each line: regime prob. V_bi [95 % interval] V (of V_bi0) Δ time; ⚑: uncertain",
                       style="dim"))
    console.print(_line(session.last, None))
    try:
        while True:
            line = reader.read()
            if line is None:
                break
            if _step(session, line, console) == "quit":
                break
    finally:
        reader.close()
    console.print(Text(CAUTION, style="dim"))
    return _errors.OK


def _step(session: Session, line: str, console):
    """Run one console line; 'quit' to leave."""
    words = line.split()
    if not words:
        return None
    cmd = words[0].lower()
    try:
        if "\x1b" in line:
            raise _errors.UsageError("that was a terminal key sequence (arrow key?): line editing needs readline, "
                                     "which this session does not have; type the command")
        if cmd in ("quit", "exit", "q"):
            return "quit"
        if cmd == "help":
            console.print(help_text(), markup=False, highlight=False)
            return None
        if cmd == "history":
            for k, (h, _) in enumerate(session.history + [(session.design, None)]):
                console.print(Text(f"{k}: {_design_text(h)}", style="dim"))
            return None
        if cmd == "show":
            console.print(Text(_design_text(session.design), style="dim"))
            console.print(_line(session.answer(), None))
            return None
        if cmd == "verify":
            ref = session.verify()
            if ref["status"] != "ok":
                console.print(f"solver: {escape(ref['status'])}")
            else:
                console.print(Text.assemble("solver: ", regime_text(ref["regime"]),
                                            f"  V_bi {F.volts(ref['vbi_V'])}  ({ref['ms']:.0f} ms; {session.engine} "
                                            f"differs by {F.millivolts(ref['difference_mV'])}"
                                            + ("" if ref["same_regime"] else "; REGIME DIFFERS") + ")"))
            return None
        if cmd == "engine":
            if len(words) != 2 or words[1] not in radialpn.ENGINES:
                raise _errors.UsageError(f"engine: one of {', '.join(radialpn.ENGINES)}, e.g. `engine depletion`")
            session.engine = words[1]
        elif cmd == "undo":
            if not session.undo():
                console.print("nothing to undo")
                return None
        elif cmd == "set":
            if len(words) < 3:
                raise _errors.UsageError("set: expected NAME VALUE, e.g. `set shell 35nm`")
            name = words[1] if words[1] == "T" else words[1].lower()
            session.apply(dict([session.parse_set(name, " ".join(words[2:]))]))
        else:
            raise _errors.UsageError(f"unknown command {line.strip()!r}; one of {', '.join(COMMANDS)} (`help`)")
    except (_errors.UsageError, radialpn.RadialpnError) as exc:
        console.print(Text(f"error: {exc}", style="#d9534f"))
        return None
    row = session.answer()
    console.print(_line(row, session.last))
    session.last = row
    return None
