"""The console's JSON-lines mode for programs: one JSON object per request line, one JSON object
per reply line, strict JSON (null, never NaN). Every request is applied all or nothing; an
unknown key, column or command is an error reply that changes nothing. The schema is in
docs/console-jsonl.md."""

from __future__ import annotations

import json

import radialpn

from . import _errors
from ._export import dumps
from ._render import CAUTION

#: request keys; a request holds exactly one of ACTIONS, plus "id" (echoed) and "engine" (with cmd "engine")
ACTIONS = ("set", "design", "cmd")
KEYS = ACTIONS + ("id", "engine")
CMDS = ("show", "verify", "undo", "engine", "history", "help")


class RequestError(ValueError):
    """A request this mode cannot run: its reply is {"ok": false, "error": ...}."""


def _columns(obj, what) -> dict:
    if not isinstance(obj, dict) or not obj:
        raise RequestError(f"{what}: expected an object of design-table columns, e.g. {{\"shell_thickness_nm\": 35}}")
    unknown = [k for k in obj if k not in radialpn.INPUT_COLUMNS]
    if unknown:
        raise RequestError(f"{what}: unknown column {unknown[0]!r}; one of {', '.join(radialpn.INPUT_COLUMNS)}")
    return obj


def handle(session, msg) -> dict:
    """The reply to one decoded request (raises RequestError / RadialpnError / UsageError)."""
    if not isinstance(msg, dict):
        raise RequestError("expected a JSON object, e.g. {\"cmd\": \"show\"}")
    unknown = [k for k in msg if k not in KEYS]
    if unknown:
        raise RequestError(f"unknown key {unknown[0]!r}; a request has one of {', '.join(ACTIONS)} (and optionally id)")
    actions = [k for k in ACTIONS if k in msg]
    if len(actions) != 1:
        raise RequestError(f"a request has exactly one of {', '.join(ACTIONS)} (got {', '.join(actions) or 'none'})")
    if "engine" in msg and msg.get("cmd") != "engine":
        raise RequestError("key 'engine' belongs to {\"cmd\": \"engine\", \"engine\": NAME}")
    extra = {}
    if "set" in msg:
        session.apply(_columns(msg["set"], "set"))
    elif "design" in msg:
        session.replace(_columns(msg["design"], "design"))
    else:
        cmd = msg["cmd"]
        if cmd not in CMDS:
            raise RequestError(f"cmd: unknown command {cmd!r}; one of {', '.join(CMDS)}")
        if cmd == "undo" and not session.undo():
            raise RequestError("undo: nothing to undo")
        if cmd == "engine":
            if msg.get("engine") not in radialpn.ENGINES:
                raise RequestError(f"engine: one of {', '.join(radialpn.ENGINES)} (got {msg.get('engine')!r})")
            session.engine = msg["engine"]
        if cmd == "history":
            return {"ok": True, "history": [h for h, _ in session.history] + [session.design]}
        if cmd == "help":
            return {"ok": True, "help": {"keys": list(KEYS), "cmds": list(CMDS), "columns": list(radialpn.INPUT_COLUMNS),
                                         "schema": "docs/console-jsonl.md"}}
        if cmd == "verify":
            extra["verify"] = session.verify()
    row = session.answer()
    return {"ok": True, **row, **extra, "design": session.design, "assumed": sorted(session.assumed),
            "caution": CAUTION}


def serve(session, stdin, out) -> int:
    for line in stdin:
        if not line.strip():
            continue
        rid = None
        try:
            try:
                msg = json.loads(line)
            except ValueError as exc:
                raise RequestError(f"not JSON ({exc}); this is JSON-lines mode: send one object per line, e.g. "
                                   "{\"cmd\": \"show\"}") from None
            rid = msg.get("id") if isinstance(msg, dict) else None
            reply = handle(session, msg)
        except (RequestError, _errors.UsageError, radialpn.RadialpnError) as exc:
            reply = {"ok": False, "error": str(exc).splitlines()[0]}
        if rid is not None:
            reply["id"] = rid
        out.write(dumps(reply, default=str) + "\n")
        out.flush()
    return _errors.OK
