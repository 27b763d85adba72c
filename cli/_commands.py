"""The design commands: ask, batch, materials. Thin: parse, call the library, render."""

from __future__ import annotations

import json
import math

import numpy as np
from rich.markup import escape
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

import radialpn
from radialpn import normalize_designs

from . import _errors
from ._designargs import add_design_flags, confirm_flag, design_from_args, engine_flags, flag_hint, progress_bar
from ._render import CAUTION, answer_table, design_line, verify_line

EXTRA_OUTPUTS = ("regime_prob", "vbi_low_V", "vbi_high_V", "in_domain", "confirm_with_solver",  # surrogate
                 "vbi_gp_V", "vbi_gp_low_V", "vbi_gp_high_V",
                 "core_margin", "shell_margin", "junction_edge_nm",  # depletion engine
                 "core_majority_ln", "shell_majority_ln", "charge_residual", "surface_accumulation_V",  # solver
                 "peak_field_V_per_cm", "tunnel_log10", "iterations", "solver_version",
                 "ionisation", "engine_note")  # auto: why the solver answered a row


def register(sub) -> None:
    ask = sub.add_parser("ask", help="regime and built-in potential of one design")
    add_design_flags(ask)
    engine_flags(ask)
    confirm_flag(ask)
    ask.add_argument("--json", action="store_true", help="print one JSON row (design-table columns)")
    ask.add_argument("--verify", action="store_true", help="also run the reference solver and compare")
    ask.set_defaults(handler=cmd_ask)

    batch = sub.add_parser("batch", help="answer every row of a CSV (or Parquet) design table")
    batch.add_argument("input", metavar="IN.csv", help="CSV with design-table columns (extra columns kept); "
                       "a .parquet file is read as Parquet (the parquet extra)")
    batch.add_argument("-o", "--output", metavar="OUT.csv", help="where to write (default: standard output); "
                       "a .parquet name writes Parquet")
    engine_flags(batch)
    confirm_flag(batch)
    batch.add_argument("--keep-going", action="store_true",
                       help="exit 0 even when some rows have no answer (their reason is in status)")
    batch.add_argument("--second-opinion", action="store_true",
                       help="surrogate engine: add the Gaussian-process columns and flag disagreements (slower)")
    batch.add_argument("--chunk-rows", type=int, default=None, metavar="N",
                       help="rows read, answered and written at a time (default 20000; bounds memory)")
    batch.add_argument("--resume", action="store_true",
                       help="continue an interrupted `batch -o FILE.csv` (the same command): the rows already in "
                            "FILE.csv.partial are kept, the rest answered")
    batch.add_argument("--scheduler", metavar="ADDRESS",
                       help="answer the chunks on a Dask cluster, e.g. tcp://10.0.0.5:8786 (the cluster extra)")
    batch.set_defaults(handler=cmd_batch)

    mats = sub.add_parser("materials", help="the material table with sources")
    mats.add_argument("--json", action="store_true", help="print JSON keyed by material name")
    mats.add_argument("--temperature", default="300", metavar="K", help="temperature (default 300 K)")
    mats.set_defaults(handler=cmd_materials)


def answer_with_progress(designs, engine, statistics, console, label=None, **options):
    """``radialpn.predict`` under a transient progress bar (shown only on long runs)."""
    bar, update = progress_bar(console, label or f"{engine} engine")
    with bar:
        return radialpn.predict(designs, engine=engine, statistics=statistics, progress=update, **options)


def _row(table, out, i) -> dict:
    row = {"material": table.material[i], "core_type": "p" if table.p_core[i] else "n"}
    for k, v in table.values.items():
        row[k] = float(v[i])
    for k, v in out.items():
        x = v[i]
        row[k] = float(x) if isinstance(x, (float, np.floating)) else (x.item() if hasattr(x, "item") else x)
    row.setdefault("engine", "")
    return row


def _json_value(x):
    return None if isinstance(x, float) and math.isnan(x) else x


def cmd_ask(args, console, out) -> int:
    import time

    design = design_from_args(args)
    table = normalize_designs({k: [v] for k, v in design.items()})
    if table.status[0] != "ok":
        raise _errors.UsageError(flag_hint(str(table.status[0])))
    if args.engine in ("surrogate", "auto"):  # load (and verify) the bundle before the clock starts
        try:
            radialpn.load(table.material[0], "p" if table.p_core[0] else "n")
        except (radialpn.BundleError, radialpn.DesignError):
            pass  # predict reports it in status
    if args.engine != "solver":  # warm up (lookup tables built on first use), then time the answer
        radialpn.predict(table, args.engine, args.statistics, second_opinion=True, confirm=args.confirm,
                         ionisation=args.ionisation)
    t = time.perf_counter()
    result = radialpn.predict(table, args.engine, args.statistics, second_opinion=True, confirm=args.confirm,
                         ionisation=args.ionisation)
    elapsed = time.perf_counter() - t
    mat = radialpn.get_material(table.material[0])
    if math.isnan(table.values["cnl_eV"][0]):  # show the material's default explicitly
        table.values["cnl_eV"][0] = mat.cnl_eV
    row = _row(table, result, 0)
    row["seconds"] = elapsed
    check = None
    if args.verify and row["status"] == "ok" and row["engine"] != "solver":
        t = time.perf_counter()
        check = _row(table, radialpn.solve(table, args.statistics, ionisation=args.ionisation), 0)
        check["seconds"] = time.perf_counter() - t
    if args.json:
        data = {k: _json_value(v) for k, v in row.items()}
        if check is not None:
            data["verify"] = {k: _json_value(check[k]) for k in ("regime", "vbi_V", "status", "seconds")}
        out.write(json.dumps(data, indent=2) + "\n")
        return _errors.OK if row["status"] == "ok" else _errors.NO_ANSWER
    console.print(Panel.fit(design_line(row), title=f"radialpn · {args.engine} engine · {args.statistics}",
                            border_style="#5b8def"))
    if row["status"] != "ok":
        console.print(f"[bold #d9534f]no answer:[/] {row['status']}")
        return _errors.NO_ANSWER
    console.print(answer_table(row, verified=check is not None))
    if row.get("engine_note"):
        console.print(Text(f"auto engine: {row['engine_note']}", style="dim"))
    if check is not None:
        console.print(verify_line(row, check))
    elif args.verify:  # nothing to compare: say so rather than print nothing
        console.print(Text("verify  the reference solver gave this answer itself; no second run", style="dim"))
    console.print(f"[dim]{CAUTION}[/]")
    return _errors.OK


def cmd_batch(args, console, out) -> int:
    from ._batchio import run_batch

    return run_batch(args, console, out, radialpn.OUTPUT_COLUMNS + EXTRA_OUTPUTS, progress_bar)


def cmd_materials(args, console, out) -> int:
    t = args.temperature
    try:
        t = radialpn.parse_quantity("temperature_K", t)
    except radialpn.DesignError as exc:
        raise _errors.UsageError(str(exc)) from None
    if not 20.0 <= t <= 1000.0:
        raise _errors.UsageError(f"temperature_K: allowed range [20, 1000] (got {t:g})")
    data = {name: radialpn.get_material(name).at(t) for name in radialpn.material_names()}
    if args.json:
        out.write(json.dumps(data, indent=2) + "\n")
        return _errors.OK
    table = Table(title=f"Material table at {t:g} K", title_justify="left")
    for col in ("material", "E_g [eV]", "ε_r [1]", "N_c [cm⁻³]", "N_v [cm⁻³]", "E_cnl − E_v [eV]"):
        # a user material's name (up to 40 characters) folds onto a second line rather than losing its end
        table.add_column(escape(col), justify="right" if col != "material" else "left",
                         overflow="fold" if col == "material" else "ellipsis")
    for name, row in data.items():
        table.add_row(name, f"{row['band_gap_eV']:.3f}", f"{row['permittivity_rel']:.3g}", f"{row['nc_cm3']:.2e}",
                      f"{row['nv_cm3']:.2e}", f"{row['cnl_eV']:.3f}")
    console.print(table)
    console.print("[dim]Sources: `radialpn materials --json` lists the source of every value.[/]")
    return _errors.OK

