"""The console: scripted sessions, the JSON-lines protocol (docs/console-jsonl.md), completion,
and a real terminal (a pseudo-terminal) for line editing, history, Ctrl-C and Ctrl-D."""

import io
import json
import os
import re
import select
import subprocess
import sys
import time

import pytest
from rich.console import Console

import radialpn
from radialpn.cli import main
from radialpn.cli._console import COMMANDS, completions


def run(argv, stdin):
    buf, out = io.StringIO(), io.StringIO()
    code = main(argv, console=Console(file=buf, width=80, color_system=None), out=out, stdin=io.StringIO(stdin))
    return code, buf.getvalue(), out.getvalue()


def strict(text):
    """Parse one reply line as strict JSON: a bare NaN/Infinity is an error."""
    def bad(name):
        raise AssertionError(f"non-JSON constant {name}")
    return json.loads(text, parse_constant=bad)


def test_console_says_what_it_assumed_and_helps():
    code, text, _ = run(["console", "--core-radius", "50nm"], "help\nbogus\nquit\n")
    flat = " ".join(text.split())
    assert code == 0 and "assumed, not given on the command line" in flat
    assert "core_radius_nm=50" not in flat.split("assumed")[1].split(";")[0]  # given, so not assumed
    for name, (_, example) in COMMANDS.items():
        assert name in flat and example.split(" · ")[0] in flat
    assert "error: unknown command 'bogus'" in flat


def test_console_full_design_assumes_nothing():
    argv = ["console", "--material", "GaAs", "--core-type", "p", "--core-radius", "60nm", "--shell-thickness",
            "45nm", "--core-doping", "2e18", "--shell-doping", "2e18", "--dit", "5e12"]
    code, text, _ = run(argv, "quit\n")
    assert code == 0 and "assumed" not in text


def test_console_verify_clears_the_flag():
    # a wire on the edge of the shell's depletion (regime probability 0.86 < 0.99, a flag that does
    # not hang on the GP's calibration): flagged until the solver has checked this very design,
    # then shown as verified
    argv = ["console", "--material", "GaAs", "--core-type", "p", "--core-radius", "80nm", "--shell-thickness",
            "36.6nm", "--core-doping", "1e18", "--shell-doping", "2e18", "--dit", "5e12"]
    code, text, _ = run(argv, "verify\nshow\n")
    flat = " ".join(text.split())
    assert code == 0 and "solver: " in flat
    before, after = flat.split("solver: ", 1)
    assert re.search("⚑ verify(?!ed)", before.split("⚑: uncertain", 1)[1])
    assert "⚑ verified" in after and not re.search("⚑ verify(?!ed)", after)


def test_jsonl_protocol_strict_all_or_nothing():
    reqs = [{"set": {"shell_thickness_nm": 35}, "id": 1},
            {"set": {"shell": 35}},                                   # unknown column
            {"cmd": "bogus"},                                         # unknown command
            {"set": {"shell_thickness_nm": 40}, "colour": "red"},     # unknown key
            {"set": {"shell_thickness_nm": 40, "dit_cm2eV": -1}},     # one bad value: nothing applied
            {"cmd": "show", "id": "x"},
            {"set": {"core_radius_nm": 800}},                         # valid design, outside the bundle: null numbers
            {"cmd": "undo"}, {"cmd": "verify"}]
    lines = "\n".join(json.dumps(r) for r in reqs) + "\nshow\n"
    code, _, out = run(["console", "--jsonl"], lines)
    replies = [strict(x) for x in out.splitlines()]
    assert code == 0 and len(replies) == len(reqs) + 1
    assert replies[0]["ok"] and replies[0]["id"] == 1 and replies[0]["design"]["shell_thickness_nm"] == 35
    assert "assumed" in replies[0] and "shell_thickness_nm" not in replies[0]["assumed"]
    assert not replies[1]["ok"] and "unknown column 'shell'" in replies[1]["error"]
    assert not replies[2]["ok"] and "unknown command 'bogus'" in replies[2]["error"]
    assert not replies[3]["ok"] and "unknown key 'colour'" in replies[3]["error"]
    assert not replies[4]["ok"] and "dit_cm2eV" in replies[4]["error"]
    show = replies[5]
    assert show["id"] == "x" and show["design"]["shell_thickness_nm"] == 35 and show["design"]["dit_cm2eV"] == 5e12
    # the default auto engine answers a design outside the bundle with the solver, and says so
    assert replies[6]["ok"] and replies[6]["engine"] == "solver" and replies[6]["vbi_V"] > 0
    assert "outside the model's domain" in replies[6]["engine_note"]
    assert replies[7]["design"]["core_radius_nm"] == 45.0
    assert replies[8]["verify"]["status"] == "ok" and replies[8]["verify"]["regime"] in radialpn.REGIMES
    assert not replies[9]["ok"] and "JSON-lines mode" in replies[9]["error"]


def test_completion_of_commands_names_and_values():
    assert completions("", "ve") == ["verify"]
    assert completions("set sh", "sh") == ["shell", "shell-doping", "shell-thickness"]
    # the material table's names (another test module may have registered a user material)
    got = set(completions("set material G", "G"))
    assert {"GaAs", "GaN", "Ge"} <= got and got == {m for m in radialpn.material_names() if m.startswith("G")}
    assert set(completions("engine ", "")) == set(radialpn.ENGINES)
    assert completions("set core-type ", "") == ["p", "n"]


def _read_until(fd, needle, timeout=60.0):
    """Read the terminal until ``needle`` appears (or fail after ``timeout`` seconds)."""
    buf, end = b"", time.monotonic() + timeout
    while needle.encode() not in buf:
        left = end - time.monotonic()
        assert left > 0, f"timed out waiting for {needle!r}; got {buf[-400:]!r}"
        ready, _, _ = select.select([fd], [], [], left)
        if ready:
            try:
                chunk = os.read(fd, 4096)
            except OSError:
                break
            if not chunk:
                break
            buf += chunk
    return buf.decode("utf-8", "replace")


@pytest.mark.skipif(sys.platform == "win32", reason="needs a POSIX pseudo-terminal")
def test_real_terminal_edits_recalls_cancels_and_keeps_history(tmp_path):
    pytest.importorskip("readline")
    import pty

    hist = tmp_path / "history"
    env = {**os.environ, "RADIALPN_HISTORY": str(hist), "NO_COLOR": "1", "TERM": "xterm", "COLUMNS": "80"}
    import fcntl
    import termios

    main_fd, child_fd = pty.openpty()
    # a new session whose controlling terminal is the pseudo-terminal, so Ctrl-C sends SIGINT
    # to the console as a real terminal does
    proc = subprocess.Popen([sys.executable, "-m", "radialpn.cli", "console", "--core-radius", "80nm"],
                            stdin=child_fd, stdout=child_fd, stderr=child_fd, env=env, start_new_session=True,
                            preexec_fn=lambda: fcntl.ioctl(0, termios.TIOCSCTTY, 0), close_fds=True)
    os.close(child_fd)
    try:
        _read_until(main_fd, "radialpn> ")
        os.write(main_fd, b"set shell 35nm\r")
        _read_until(main_fd, "radialpn> ")
        # Up recalls the line; four backspaces and new text edit it into `set shell 40nm`
        os.write(main_fd, b"\x1b[A\x7f\x7f\x7f\x7f40nm\r")
        text = _read_until(main_fd, "radialpn> ")
        assert "unknown command" not in text and "Δ" in text
        os.write(main_fd, b"set sh")                   # half a line, then Ctrl-C: cancelled, session goes on
        time.sleep(0.3)
        os.write(main_fd, b"\x03")
        text = _read_until(main_fd, "radialpn> ")
        assert "line cancelled" in text
        os.write(main_fd, b"hist\t\r")                 # Tab completes `history`
        text = _read_until(main_fd, "radialpn> ")
        assert "shell_thickness_nm=40" in text
        os.write(main_fd, b"\x04")                     # Ctrl-D leaves
        _read_until(main_fd, "Design estimate")
        assert proc.wait(timeout=30) == 0
    finally:
        if proc.poll() is None:
            proc.kill()
        os.close(main_fd)
    saved = hist.read_text().splitlines()
    assert "set shell 35nm" in saved and "set shell 40nm" in saved
