"""Fuzzing the edges with generated inputs (hypothesis, fixed seed, bounded time): command-line
flags, CSV files, console JSON lines, material files, domain specs and the Python API. Each case asserts what the
validation layer promises: no internal error (exit 1), no traceback, the exit code of its kind,
every input cell back unchanged and the rows in order. The CI share is about 10,000 inputs; set
RADIALPN_FUZZ=N to multiply it by N."""

import csv
import io
import json
import os

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from rich.console import Console

import radialpn
from radialpn.cli import main
from radialpn.training import SpecError, spec_from_dict

SCALE = int(os.environ.get("RADIALPN_FUZZ", "1"))
FAST = dict(deadline=None, derandomize=True, suppress_health_check=list(HealthCheck))
COLS = list(radialpn.INPUT_COLUMNS)
GOOD = {"material": "GaAs", "core_type": "p", "core_radius_nm": "60", "shell_thickness_nm": "45",
        "core_doping_cm3": "2e18", "shell_doping_cm3": "2e18", "dit_cm2eV": "5e12"}
#: cell texts a spreadsheet or a hostile script may hold
CELL = st.one_of(
    st.sampled_from(["60", "45nm", "0.05um", "2e18", "2e18 cm⁻³", "5e12", "", " ", "nan", "NaN", "inf", "-inf", "1e999",
                     "-1", "0", "1_000", "١٢", "60\x00", "true", "None", "<NA>", "p", "n", "GaAs", "InAs", "Si",
                     "300K", "0.5eV", "500meV", "1,5", "'60'", '"60"', "6e1", ".5", "5.", "+3", "--3", "3e", "e3"]),
    st.text(alphabet=st.characters(blacklist_categories=("Cs",), blacklist_characters="\x00\r"), max_size=10))


def run(argv):
    buf, out = io.StringIO(), io.StringIO()
    code = main(argv, console=Console(file=buf, width=100, color_system=None), out=out)
    return code, buf.getvalue(), out.getvalue()


@settings(max_examples=2500 * SCALE, **FAST)
@given(st.dictionaries(st.sampled_from(COLS), CELL, max_size=len(COLS)))
def test_api_rows_always_get_an_answer_or_a_reason(row):
    out = radialpn.predict({**GOOD, **row}, engine="depletion")
    status = out["status"][0]
    assert isinstance(status, str) and status and "\n" not in status
    assert (status == "ok") == bool(np.isfinite(out["vbi_V"][0]))


@settings(max_examples=1500 * SCALE, **FAST)
@given(st.lists(st.dictionaries(st.sampled_from(COLS), CELL, max_size=4), min_size=1, max_size=4),
       st.sampled_from([",", ";", "\t"]))
def test_csv_files_keep_every_cell_or_fail_in_one_line(tmp_path_factory, rows, delim):
    path = tmp_path_factory.mktemp("fz") / "in.csv"
    header = list(GOOD) + ["note"]
    body = [[{**GOOD, **r}.get(c, "") if c != "note" else f"row{i}" for c in header] for i, r in enumerate(rows)]
    with open(path, "w", newline="", encoding="utf-8") as fh:
        csv.writer(fh, delimiter=delim).writerows([header] + body)
    code, text, out = run(["batch", str(path), "--engine", "depletion"])
    assert "Traceback" not in text and "internal error" not in text
    if code in (0, 3):
        back = list(csv.reader(io.StringIO(out)))
        assert [r[:len(header)] for r in back[1:]] == body  # every input cell, in order
    else:
        assert code == 2 and text.strip().count("\n") == 0


FLAGS = ["--core-radius", "--shell-thickness", "--core-doping", "--shell-doping", "--dit", "--cnl", "--temperature",
         "--interlayer", "--material", "--core-type"]


@settings(max_examples=1500 * SCALE, **FAST)
@given(st.sampled_from(FLAGS), CELL)
def test_ask_flags_never_fail_internally(flag, value):
    argv = ["ask", "--engine", "depletion", "--json"] + [x for k, v in zip(FLAGS, ["60nm", "45nm", "2e18", "2e18", "5e12"])
                                                         for x in (k, v)] + ["--material", "GaAs", "--core-type", "p"]
    argv += [flag, value]
    code, text, out = run(argv)
    assert code in (0, 2, 3) and "Traceback" not in text and "internal error" not in text
    if code == 0:
        assert json.loads(out)["status"] == "ok"


MATERIAL_VALUE = st.one_of(st.floats(allow_nan=True), st.integers(-10, 10 ** 25), st.booleans(), st.text(max_size=5),
                           st.lists(st.integers(), max_size=2), st.none())
MATERIAL_KEYS = ["band_gap_300_eV", "varshni_alpha_eV_K", "varshni_beta_K", "permittivity_rel", "nc_300_cm3",
                 "nv_300_cm3", "cnl_eV", "sources", "colour"]


@settings(max_examples=1500 * SCALE, **FAST)
@given(st.one_of(st.text(max_size=12), st.sampled_from(["GaAs", "AlGaAs30", "../x", "", "Mine-1"])),
       st.dictionaries(st.sampled_from(MATERIAL_KEYS), MATERIAL_VALUE, max_size=9))
def test_material_files_are_accepted_only_when_physical(tmp_path_factory, name, values):
    path = tmp_path_factory.mktemp("mat") / "m.json"
    path.write_text(json.dumps({name: values}, allow_nan=True))
    try:
        mats = radialpn.load_material_file(path)
    except radialpn.MaterialError as exc:
        assert "\n" not in str(exc)
        return
    (m,) = mats
    assert m.band_gap_300_eV > 0 and np.all(m.band_gap(np.linspace(20, 1000, 50)) > 0)


SPEC_VALUE = st.one_of(st.floats(allow_nan=True), st.integers(-5, 10 ** 9), st.text(max_size=6), st.booleans(),
                       st.dictionaries(st.text(max_size=3), st.integers(), max_size=2))


@settings(max_examples=1500 * SCALE, **FAST)
@given(st.sampled_from(["bundle", "variables", "fixed", "sizes"]), st.text(max_size=12), SPEC_VALUE)
def test_specs_fail_with_a_spec_error_naming_the_key(table, key, value):
    data = {"bundle": {"name": "t", "material": "GaAs", "core_type": "p", "seed": 1},
            "variables": {"core_radius_nm": {"min": 10, "max": 300, "transform": "log"},
                          "shell_thickness_nm": {"min": 2, "max": 300}, "core_doping_cm3": {"min": 1e16, "max": 1e19},
                          "shell_doping_cm3": {"min": 1e16, "max": 1e19}, "dit_cm2eV": {"min": 1e10, "max": 1e14}}}
    data.setdefault(table, {})
    data[table] = {**data[table], key: value}
    try:
        spec = spec_from_dict(data)
    except (SpecError, radialpn.MaterialError) as exc:
        assert "\n" not in str(exc)
        return
    assert spec.name == "t" and all(np.isfinite([v.lo, v.hi]).all() for v in spec.variables)


JSON_VALUE = st.recursive(st.one_of(st.none(), st.booleans(), st.floats(allow_nan=False), st.integers(-10, 10 ** 20),
                                    st.text(max_size=6), st.sampled_from(["40nm", "5e12", "GaAs", "n", "solver"])),
                          lambda inner: st.lists(inner, max_size=3) | st.dictionaries(st.text(max_size=5), inner,
                                                                                      max_size=3), max_leaves=6)
JSON_MESSAGE = st.one_of(
    JSON_VALUE,
    st.fixed_dictionaries({}, optional={"set": st.one_of(JSON_VALUE, st.dictionaries(st.sampled_from(COLS), JSON_VALUE,
                                                                                       max_size=3)),
                                        "cmd": st.one_of(st.sampled_from(["show", "undo", "verify", "engine", "help",
                                                                          "bogus"]), JSON_VALUE),
                                        "engine": st.sampled_from(["auto", "surrogate", "depletion", "quantum"]),
                                        "design": JSON_VALUE, "id": JSON_VALUE}))


@settings(max_examples=300 * SCALE, **FAST)
@given(st.lists(JSON_MESSAGE, min_size=1, max_size=6))
def test_console_json_lines_answer_every_line_in_strict_json(messages):
    # One reply per request line, each strict JSON (no bare NaN), the session never dies.
    def bad(name):
        raise AssertionError(f"non-JSON constant {name}")

    lines = "\n".join(json.dumps(m) for m in messages) + "\n"
    buf, out = io.StringIO(), io.StringIO()
    code = main(["console", "--jsonl", "--engine", "depletion"], console=Console(file=buf, width=100, color_system=None),
                out=out, stdin=io.StringIO(lines))
    replies = [json.loads(x, parse_constant=bad) for x in out.getvalue().splitlines()]
    assert code == 0 and len(replies) == len(messages) and "Traceback" not in buf.getvalue()
    assert all(isinstance(r, dict) and ("error" in r or r.get("ok")) for r in replies)
