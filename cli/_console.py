"""`radialpn console`: an interactive what-if session that keeps the model warm, and a
JSON-lines mode for driving it from another program. Reads commands from ``stdin`` (a stream
argument), so tests script it."""

from __future__ import annotations

import json
import math
import time

from rich.text import Text

import radialpn

from . import _errors
from ._axes import VARIABLES, value
from ._designargs import add_design_flags, design_from_args, engine_flags
from ._render import CAUTION, regime_text

PLAN = dict(material="GaAs", core_type="p", core_radius_nm=45.0, shell_thickness_nm=30.0, core_doping_cm3=5e17,
            shell_doping_cm3=2e18, dit_cm2eV=5e12)
HELP = """commands:
  set NAME VALUE     change one variable, e.g. `set shell 35nm`, `set dit 3e11`, `set core-type n`
                     names: core, shell, core-doping, shell-doping, dit, cnl, temperature, material, core-type
  show               the current design and its answer
  verify             run the reference solver on the current design and compare
  engine NAME        surrogate | depletion | solver
  undo               go back one change        history   the changes so far
  help               this text                 quit      leave (also Ctrl-D)"""


def register(sub) -> None:
    co = sub.add_parser("console", help="interactive what-if session (or --jsonl for programs)")
    add_design_flags(co)
    engine_flags(co)
    co.add_argument("--jsonl", action="store_true", help="read JSON commands per line, answer JSON per line")
    co.set_defaults(handler=cmd_console)


class Session:
    def __init__(self, design: dict, engine: str, statistics: str):
        self.design, self.engine, self.statistics = dict(design), engine, statistics
        self.history: list = []
        self.last = None

    def answer(self) -> dict:
        t = time.perf_counter()
        res = radialpn.predict({k: [v] for k, v in self.design.items()}, self.engine, self.statistics,
                               second_opinion=self.engine == "surrogate")
        row = {k: (v[0].item() if hasattr(v[0], "item") else v[0]) for k, v in res.items()}
        row["ms"] = 1e3 * (time.perf_counter() - t)
        return row

    def set(self, name: str, text: str) -> None:
        if name in ("material",):
            radialpn.get_material(text)  # raises MaterialError with the known names
            col, val = "material", text
        elif name in ("core-type", "type"):
            if text.lower() not in ("p", "n"):
                raise _errors.UsageError(f"core_type: must be p or n (got {text!r})")
            col, val = "core_type", text.lower()
        else:
            col = VARIABLES.get(name)
            if col is None:
                raise _errors.UsageError(f"set: unknown variable {name!r}; one of {', '.join(sorted(VARIABLES))}, "
                                         "material, core-type")
            val = value(col, text, "set")
        self.history.append(dict(self.design))
        self.design[col] = val

    def undo(self) -> bool:
        if not self.history:
            return False
        self.design = self.history.pop()
        return True


def _line(row: dict, prev) -> Text:
    if row["status"] != "ok":
        return Text(f"no answer: {row['status']}", style="#d9534f")
    t = Text.assemble(regime_text(row["regime"]))
    if "regime_prob" in row and math.isfinite(row.get("regime_prob", float("nan"))):
        t.append(f" {row['regime_prob']:.2f}")
    t.append(f"  V_bi {row['vbi_V']:.4f} V")
    if "vbi_low_V" in row and math.isfinite(row["vbi_low_V"]):
        t.append(f" [{row['vbi_low_V']:.3f}, {row['vbi_high_V']:.3f}]")
    t.append(f"  ({row['vbi_V'] / row['vbi0_V']:.0%} of V_bi0)")
    if prev is not None and prev.get("status") == "ok":
        d = 1e3 * (row["vbi_V"] - prev["vbi_V"])
        t.append(f"  Δ {d:+.1f} mV", style="#3aa876" if d >= 0 else "#d9534f")
    if row.get("confirm_with_solver"):
        t.append("  ⚑ verify", style="bold #e0a526")
    t.append(f"  {row['ms']:.2f} ms", style="dim")
    return t


def _design_text(d: dict) -> str:
    return " · ".join(f"{k}={v:g}" if isinstance(v, float) else f"{k}={v}" for k, v in d.items())


def cmd_console(args, console, out, stdin=None) -> int:
    import sys

    stdin = stdin if stdin is not None else sys.stdin
    design = {**PLAN, **design_from_args(args)}
    table = radialpn.normalize_designs({k: [v] for k, v in design.items()})
    if table.status[0] != "ok":
        raise _errors.UsageError(str(table.status[0]))
    session = Session({"material": table.material[0], "core_type": "p" if table.p_core[0] else "n",
                       **{k: float(v[0]) for k, v in table.values.items() if not math.isnan(v[0])}},
                      args.engine, args.statistics)
    if args.engine in ("surrogate", "auto"):
        try:
            radialpn.load(session.design["material"], session.design["core_type"])  # warm before the first answer
        except radialpn.BundleError:
            pass
    session.answer()  # first call builds lookup tables; later answers take about a millisecond
    if args.jsonl:
        return _jsonl(session, stdin, out)
    interactive = hasattr(stdin, "isatty") and stdin.isatty()
    if interactive:
        try:
            import readline  # noqa: F401  (line editing and arrow-key history where available)
        except ImportError:
            pass
    console.print(Text("radialpn console · type `help`; changes answer at once", style="bold"))
    console.print(Text(_design_text(session.design), style="dim"))
    session.last = session.answer()
    console.print(_line(session.last, None))
    while True:
        if interactive:
            console.print("radialpn> ", end="")
        line = stdin.readline()
        if not line:
            break
        words = line.split()
        if not words:
            continue
        cmd = words[0].lower()
        try:
            if cmd in ("quit", "exit", "q"):
                break
            if cmd == "help":
                console.print(HELP, markup=False)
                continue
            if cmd == "history":
                for k, h in enumerate(session.history + [session.design]):
                    console.print(Text(f"{k}: {_design_text(h)}", style="dim"))
                continue
            if cmd == "show":
                console.print(Text(_design_text(session.design), style="dim"))
                console.print(_line(session.answer(), None))
                continue
            if cmd == "engine":
                if len(words) != 2 or words[1] not in radialpn.ENGINES:
                    raise _errors.UsageError(f"engine: one of {', '.join(radialpn.ENGINES)}")
                session.engine = words[1]
            elif cmd == "undo":
                if not session.undo():
                    console.print("nothing to undo")
                    continue
            elif cmd == "verify":
                t = time.perf_counter()
                ref = radialpn.solve({k: [v] for k, v in session.design.items()}, session.statistics)
                ms = 1e3 * (time.perf_counter() - t)
                if ref["status"][0] != "ok":
                    console.print(f"solver: {ref['status'][0]}")
                else:
                    d = 1e3 * (session.last["vbi_V"] - ref["vbi_V"][0]) if session.last["status"] == "ok" else float("nan")
                    console.print(Text.assemble("solver: ", regime_text(ref["regime"][0]),
                                                f"  V_bi {ref['vbi_V'][0]:.4f} V  ({ms:.0f} ms; {session.engine} "
                                                f"differs by {d:+.1f} mV)"))
                continue
            elif cmd == "set" and len(words) >= 3:
                session.set(words[1].lower() if words[1] != "T" else "T", " ".join(words[2:]))
            else:
                raise _errors.UsageError(f"unknown command {line.strip()!r}; type `help`")
        except (_errors.UsageError, radialpn.RadialpnError) as exc:
            console.print(Text(f"error: {exc}", style="#d9534f"))
            continue
        row = session.answer()
        console.print(_line(row, session.last))
        session.last = row
    console.print(Text(CAUTION, style="dim"))
    return _errors.OK


def _jsonl(session: Session, stdin, out) -> int:
    """One JSON object per input line: {"set": {column: value, ...}} | {"design": {...}} |
    {"cmd": "undo" | "show" | "engine", ...}; one JSON answer per line back."""
    for line in stdin:
        if not line.strip():
            continue
        try:
            msg = json.loads(line)
            if not isinstance(msg, dict):
                raise ValueError("expected a JSON object")
            if "design" in msg:
                session.history.append(dict(session.design))
                session.design = {**session.design, **msg["design"]}
            for col, v in (msg.get("set") or {}).items():
                session.history.append(dict(session.design))
                session.design[col] = v
            if msg.get("cmd") == "undo":
                session.undo()
            elif msg.get("cmd") == "engine":
                if msg.get("engine") not in radialpn.ENGINES:
                    raise ValueError(f"engine: one of {', '.join(radialpn.ENGINES)}")
                session.engine = msg["engine"]
            table = radialpn.normalize_designs({k: [v] for k, v in session.design.items()})
            if table.status[0] != "ok":
                reply = {"error": str(table.status[0])}
                session.undo()
            else:
                row = session.answer()
                reply = {k: (None if isinstance(v, float) and math.isnan(v) else v) for k, v in row.items()}
                reply["design"] = session.design
        except (ValueError, TypeError, radialpn.RadialpnError) as exc:
            reply = {"error": str(exc).splitlines()[0]}
        out.write(json.dumps(reply, default=lambda o: o.item() if hasattr(o, "item") else str(o)) + "\n")
        out.flush()
    return _errors.OK
