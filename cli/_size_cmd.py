"""`radialpn size` (critical dimensions, sweeps) and `radialpn search` (constrained search over
many candidates): flags into ``radialpn.critical_dimensions`` / ``radialpn.search``, answers drawn."""

from __future__ import annotations

import math

import numpy as np
from rich.markup import escape
from rich.table import Table
from rich.text import Text

import radialpn

from . import _errors, _png
from . import _format as F
from ._axes import SHORT_LABEL, UNITS, axis_spec, fmt_value
from ._export import dumps, write_csv
from ._designargs import (add_design_flags, design_from_args, engine_flags, progress_bar, target_flags,
                          target_from_args)
from ._plot import BrailleCanvas
from ._render import CAUTION, answered_by_text, regime_text

OBJ_LABEL = {"total-radius": "a + t", "core-radius": "a", "shell-thickness": "t"}
LOG_COLUMNS = ("core_radius_nm", "shell_thickness_nm", "core_doping_cm3", "shell_doping_cm3", "dit_cm2eV")


def register(sub) -> None:
    sz = sub.add_parser("size", help="smallest core and thinnest shell that keep V_bi above a target")
    add_design_flags(sz)
    engine_flags(sz)
    target_flags(sz)
    sz.add_argument("--sweep", metavar="NAME:LOW:HIGH", help="critical dimensions against a variable, e.g. dit:1e11:1e13")
    sz.add_argument("--points", type=int, default=9, help="points of the sweep (default 9)")
    sz.add_argument("--png", metavar="FILE", help="sweep plot as PNG (plot extra)")
    sz.add_argument("--no-confirm", action="store_true", help="skip the reference-solver checks")
    sz.add_argument("--sized", default="core,shell", metavar="LIST",
                    help="what to size, comma-separated: core, shell, interlayer (the thickest interlayer that keeps "
                         "the target and the thinnest out of tunnelling risk); default core,shell")
    _export_flags(sz)
    sz.set_defaults(handler=cmd_size)

    se = sub.add_parser("search", help="best design among many random candidates under a V_bi target")
    add_design_flags(se)
    engine_flags(se)
    target_flags(se)
    se.add_argument("--vary", action="append", default=[], metavar="NAME:LOW:HIGH", help="a free variable (repeatable)")
    se.add_argument("--minimize", choices=("total-radius", "core-radius", "shell-thickness"), default="total-radius")
    se.add_argument("--regime", action="append", choices=radialpn.REGIMES, help="also require this regime (repeatable)")
    se.add_argument("--candidates", type=int, default=200_000, help="random candidates (default 200000)")
    se.add_argument("--top", type=int, default=5, help="winners to show and re-check with the solver")
    se.add_argument("--seed", type=int, default=0)
    se.add_argument("--allow-tunnelling", action="store_true",
                    help="keep candidates whose junction is at tunnelling risk (left out by default)")
    se.add_argument("--scheduler", metavar="ADDRESS",
                    help="answer the candidates in partitions on a Dask cluster, e.g. tcp://10.0.0.5:8786 "
                         "(the cluster extra); same answer as a local run")
    _export_flags(se)
    se.set_defaults(handler=cmd_search)


def _export_flags(sp) -> None:
    sp.add_argument("--json", action="store_true", help="print the answer as JSON instead")
    sp.add_argument("--csv", metavar="FILE", help="also write the answer as CSV")


SIZE_FIELDS = ("dimension", "value_nm", "optimistic_nm", "conservative_nm", "regime", "confirmed",
               "solver_vbi_above_V", "solver_vbi_below_V", "fixed_nm", "reason", "engine")
SIZED = {"core": "core_radius_nm", "shell": "shell_thickness_nm", "interlayer": "interlayer_nm"}


def _sized(text: str) -> tuple:
    cols = []
    for name in text.split(","):
        col = SIZED.get(name.strip())
        if col is None:
            raise _errors.UsageError(f"--sized: each one of {', '.join(SIZED)} (got {name.strip()!r})")
        cols.append(col)
    return tuple(dict.fromkeys(cols))


def _above_below(col, pair) -> tuple:
    """The solver's two checks as (above, below) the critical value: ``critical_dimensions`` gives
    them meeting side first, which for the interlayer (thinner meets) is below."""
    return (pair[1], pair[0]) if col == "interlayer_nm" else (pair[0], pair[1])


def size_rows(res) -> list:
    """One row per critical dimension in ``SIZE_FIELDS`` order (for CSV and JSON); a sized
    interlayer gives two: ``interlayer_nm`` (the thickest keeping the target) and ``interlayer_nm_tunnel_free`` (the thinnest out of tunnelling risk)."""
    rows = []
    for col in (c for c in ("core_radius_nm", "shell_thickness_nm", "interlayer_nm") if c in res):
        r = res[col]
        other = {"core_radius_nm": "shell_thickness_nm"}.get(col, "core_radius_nm" if col != "interlayer_nm"
                                                              else "shell_thickness_nm")
        rows.append([col, r["value_nm"], r["optimistic_nm"], r["conservative_nm"], r["regime"], r["confirmed"],
                     *_above_below(col, r["solver_vbi_V"]), res["design"][other], r["reason"], r["engine"]])
        if col == "interlayer_nm":
            rows.append([col + "_tunnel_free", r["tunnel_free_nm"], r["tunnel_free_nm"], r["tunnel_free_nm"], "", None,
                         float("nan"), float("nan"), res["design"][other], r["tunnel_reason"], r["tunnel_engine"]])
    return rows



def _check_text(r, no_confirm: bool, reasons: list) -> Text:
    """The solver check's cell of one sized dimension (its reason, if any, joins ``reasons``)."""
    if r["confirmed"] is not None:
        return Text("✓ confirmed" if r["confirmed"] else "✗ not confirmed",
                    style="#3aa876" if r["confirmed"] else "bold #d9534f")
    if r["reason"]:
        reasons.append(r["reason"])
        return Text("not checked: see below")
    return Text("not checked (--no-confirm)" if no_confirm else "")

def cmd_size(args, console, out) -> int:
    target = target_from_args(args)
    design = design_from_args(args)
    goal = radialpn.target_text(**target)
    sized = _sized(args.sized)
    if args.sweep:
        if sized != _sized("core,shell"):
            raise _errors.UsageError(f"--sized: with --sweep only core,shell (a sweep traces both); got {args.sized}")
        return _sweep(args, console, out, design, target, goal)
    res = radialpn.critical_dimensions(design, **target, engine=args.engine, statistics=args.statistics,
                                       ionisation=args.ionisation, confirm=not args.no_confirm, sized=sized)
    rows = size_rows(res)
    if args.csv:
        write_csv(args.csv, SIZE_FIELDS, rows)
    if args.json:
        out.write(dumps({"target": goal, "engine": args.engine, "design": res["design"],
                         "scan_ranges_nm": res["scan_ranges_nm"], "confirm_step_nm": res["confirm_step_nm"],
                         "dimensions": [dict(zip(SIZE_FIELDS, r)) for r in rows], "caution": CAUTION}) + "\n")
        return _errors.OK
    base = res["design"]
    step = res["confirm_step_nm"]
    t = Table(title=f"critical dimensions for {goal} ({args.engine} engine)", title_justify="left")
    for c in ("dimension", "critical", "interval range", "regime there", f"solver ±{step:g} nm"):
        t.add_column(c)
    reasons = []
    for col in (c for c in ("core_radius_nm", "shell_thickness_nm") if c in res):
        r = res[col]
        other = "shell_thickness_nm" if col == "core_radius_nm" else "core_radius_nm"
        label = "smallest core" if col == "core_radius_nm" else "thinnest shell"
        label = f"{label}\n({'shell' if col == 'core_radius_nm' else 'core'} {F.nm(base[other])})"
        if not math.isfinite(r["value_nm"]):
            lo, hi = res["scan_ranges_nm"][col]
            t.add_row(label, Text("none", style="bold #d9534f"), f"{F.nm(lo, False)}–{F.nm(hi)} scanned", "",
                      "see why below")
            reasons.append(r["reason"])
            continue
        if not math.isfinite(r["optimistic_nm"]) or r["optimistic_nm"] == r["conservative_nm"]:
            rng = "no interval" if args.engine != "surrogate" else F.nm(r["value_nm"])
        else:
            rng = F.nm_range(r["optimistic_nm"], r["conservative_nm"])
        check = _check_text(r, args.no_confirm, reasons)
        t.add_row(label, Text(F.nm(r["value_nm"]), style="bold"), rng, regime_text(r["regime"]), check)
    if "interlayer_nm" in res:
        _interlayer_rows(t, res, base, args, reasons)
    console.print(t)
    for why in reasons:
        console.print(f"[#e0a526]why:[/] {escape(why)}")
    if "solver_seconds" in res:
        console.print(f"[dim]✓: the reference solver meets the target {step:g} nm above and misses it "
                      f"{step:g} nm below ({F.milliseconds(res['solver_seconds'])}). Interval range: the critical value "
                      "read from the upper and the lower end of the 95 % interval."
                      + (" The interlayer is checked the other way round: met below, missed above." if
                         "interlayer_nm" in res else "") + "[/]")
    engines = sorted({res[c]["engine"] for c in sized if res[c]["engine"]})
    if engines:
        console.print(f"[dim]answered by the {' and the '.join(engines)} engine{'s' if len(engines) > 1 else ''}"
                      + (f"; tunnelling judged by the {res['interlayer_nm']['tunnel_engine']} engine"
                         if "interlayer_nm" in res else "") + ".[/]")
    if args.csv:
        console.print(f"[dim]wrote CSV to {escape(args.csv)}[/]")
    console.print(f"[dim]{CAUTION}[/]")
    return _errors.OK


def _interlayer_rows(t, res, base, args, reasons):
    """Two rows of the size table: the thickest interlayer keeping the target (the solver checks
    it from below) and the thinnest out of tunnelling risk."""
    r = res["interlayer_nm"]
    label = f"thickest interlayer\n(core {F.nm(base['core_radius_nm'])}, shell {F.nm(base['shell_thickness_nm'])})"
    lo, hi = r["scan_nm"]
    if not math.isfinite(r["value_nm"]):
        t.add_row(label, Text("none", style="bold #d9534f"), f"{F.nm(lo, False)}–{F.nm(hi)} scanned", "", "see why below")
        reasons.append(r["reason"])
    else:
        check = _check_text(r, args.no_confirm, reasons)
        ok_range = math.isfinite(r["optimistic_nm"]) and r["optimistic_nm"] != r["conservative_nm"]
        t.add_row(label, Text(F.nm(r["value_nm"]), style="bold"),
                  F.nm_range(r["conservative_nm"], r["optimistic_nm"]) if ok_range else "no interval",
                  regime_text(r["regime"]), check)
    free = r["tunnel_free_nm"]
    if math.isfinite(free):
        t.add_row("thinnest interlayer\nout of tunnelling risk", Text(F.nm(free), style="bold"), "", "",
                  f"{r['tunnel_engine']} estimate ≤ 10^{radialpn.TUNNEL_RISK_LOG10:g}")
    else:
        t.add_row("thinnest interlayer\nout of tunnelling risk", Text("none", style="bold #d9534f"), "", "",
                  "see why below")
        reasons.append(r["tunnel_reason"])


def _sweep(args, console, out, design, target, goal):
    col, lo, hi = axis_spec(args.sweep, "--sweep")
    bar, update = progress_bar(console, "sweeping")
    with bar:
        res = radialpn.critical_dimensions(design, **target, engine=args.engine, statistics=args.statistics, ionisation=args.ionisation,
                                           sweep=(col, lo, hi), points=args.points, progress=update)
    base = res["design"]
    xs, core, shell = res["sweep_values"], res["core_radius_nm"], res["shell_thickness_nm"]
    header = (col, "smallest_core_radius_nm", "thinnest_shell_thickness_nm")
    if args.csv:
        write_csv(args.csv, header, zip(xs, core, shell))
    if args.json:
        out.write(dumps({"target": goal, "engine": args.engine, "design": base, "sweep_column": col,
                         "sweep_values": xs, "core_radius_nm": core, "shell_thickness_nm": shell,
                         "caution": CAUTION}) + "\n")
        return _errors.OK
    t = Table(title=f"critical dimensions for {goal} against {col}", title_justify="left")
    for c in (f"{SHORT_LABEL.get(col, col)}", f"smallest core [nm]\n(shell {F.nm(base['shell_thickness_nm'])})",
              f"thinnest shell [nm]\n(core {F.nm(base['core_radius_nm'])})"):
        t.add_column(escape(c), justify="right")
    for x, a, s in zip(xs, core, shell):
        t.add_row(fmt_value(col, x), F.nm(a, False) if math.isfinite(a) else "none",
                  F.nm(s, False) if math.isfinite(s) else "none")
    console.print(t)
    if not (np.isfinite(core).all() and np.isfinite(shell).all()):
        console.print("[dim]none: no value in the scanned range keeps the target there; `radialpn size` at that "
                      "point says why.[/]")
    arr = np.column_stack([xs, core, shell])
    finite = np.isfinite(arr[:, 1:])
    if finite.any():
        xv = np.log10(arr[:, 0]) if col in LOG_COLUMNS else arr[:, 0]
        top = float(np.nanmax(arr[:, 1:])) * 1.08
        canvas = BrailleCanvas(min(64, console.width - 12), 12, (float(xv[0]), float(xv[-1])), (0.0, top))
        for k, style in ((1, "bold #5b8def"), (2, "bold #e8803a")):
            ok = np.isfinite(arr[:, k])
            if ok.sum() >= 2:
                canvas.line(xv[ok], arr[ok, k], style)
        console.print(canvas.render(ylabel="critical dimension [nm]",
                                    xlabel=f"{'log10 ' if col in LOG_COLUMNS else ''}{col}"))
        console.print(Text.assemble(("  ━ smallest core", "bold #5b8def"), "   ", ("━ thinnest shell", "bold #e8803a")))
    if args.png:
        _sweep_png(args.png, arr, col, goal)
        console.print(f"[dim]wrote {escape(args.png)}[/]")
    console.print(f"[dim]{args.engine} engine; confirm chosen points with `radialpn ask --verify`. {CAUTION}[/]")
    return _errors.OK


def _sweep_png(path, arr, col, goal):
    plt = _png.pyplot()
    fig, ax = plt.subplots(figsize=(6.5, 4), dpi=120)
    ax.plot(arr[:, 0], arr[:, 1], "o-", color="#3b6fd8", label="smallest core radius")
    ax.plot(arr[:, 0], arr[:, 2], "s-", color="#d8702a", label="thinnest shell")
    if col in LOG_COLUMNS:
        ax.set_xscale("log")
    ax.set_xlabel(f"{col} [{UNITS.get(col, '')}]")
    ax.set_ylabel("critical dimension [nm]")
    ax.set_title(f"{goal} (design estimate)", fontsize=10)
    ax.legend()
    _png.save(fig, path)


SEARCH_EXTRA = ("objective", "regime", "vbi_V", "tunnel_log10", "engine", "solver_regime", "solver_vbi_V",
                "solver_tunnel_log10", "solver_meets")


def cmd_search(args, console, out) -> int:
    target = target_from_args(args)
    fixed = design_from_args(args)
    vary = {}
    for spec in args.vary:
        col, lo, hi = axis_spec(spec, "--vary")
        if col in vary:
            raise _errors.UsageError(f"--vary: {col} is given twice (got {spec!r}); give each free variable once")
        vary[col] = (lo, hi)
        fixed.pop(col, None)
    if not vary:
        raise _errors.UsageError("--vary: give at least one free variable, e.g. --vary shell-thickness:2nm:100nm")
    mapper = None
    if getattr(args, "scheduler", None):
        from ._cluster import chunk_mapper

        mapper = chunk_mapper(args.scheduler, console)
    bar, update = progress_bar(console, "searching")
    try:
        with bar:
            res = radialpn.search(fixed, vary, args.minimize, **target, regimes=args.regime,
                                  candidates=args.candidates, top=args.top, seed=args.seed, engine=args.engine,
                                  statistics=args.statistics, ionisation=args.ionisation, progress=update,
                                  avoid_tunnelling=not args.allow_tunnelling, map_chunks=mapper)
    finally:
        if mapper is not None:
            mapper.close()
    w, n, elapsed = res["winners"], res["candidates"], res["seconds"]
    header = [c for c in list(vary) + list(SEARCH_EXTRA) if c in w]
    rows = [[w[c][k] for c in header] for k in range(w["objective"].size)]
    if args.csv:
        write_csv(args.csv, ["rank"] + header, [[k + 1] + r for k, r in enumerate(rows)])
    if args.json:
        out.write(dumps({"winners": [dict(zip(header, r)) for r in rows], "feasible": res["feasible"],
                         "candidates": n, "seconds": elapsed, "minimize": args.minimize, "target": res["target"],
                         "engine": args.engine, "fixed": res["fixed"], "space": res["space"], "reason": res["reason"],
                         "avoid_tunnelling": res["avoid_tunnelling"], "tunnelling_excluded": res["tunnelling_excluded"],
                         "tunnelling_unchecked": res["tunnelling_unchecked"], "answered_by": res["answered_by"],
                         "caution": CAUTION}) + "\n")
        return _errors.NO_ANSWER if res["reason"] else _errors.OK
    if res["reason"]:
        console.print(f"[bold #d9534f]no answer:[/] {escape(res['reason'])}")
        return _errors.NO_ANSWER
    t = Table(title=f"best of {n:,} candidates ({elapsed:.1f} s, {n / elapsed:,.0f}/s): minimise {args.minimize}",
              title_justify="left")
    for c in ["#", *[SHORT_LABEL.get(c, c) for c in vary], f"{OBJ_LABEL[args.minimize]} [nm]", "V_bi [V]",
              "solver V_bi [V]", "target"]:
        t.add_column(escape(c), justify="right")
    confirmed = "solver_meets" in w
    for k in range(w["objective"].size):
        ok_k = bool(w["solver_meets"][k]) if confirmed else None
        missed = "✗ TUNNELS" if confirmed and not ok_k and res["avoid_tunnelling"] and w["solver_tunnel_risk"][k] \
            else "✗ MISSES"
        check = (Text("✓ meets" if ok_k else missed, style="#3aa876" if ok_k else "#d9534f") if confirmed
                 else Text("—"))
        t.add_row(str(k + 1), *[fmt_value(c, w[c][k]) for c in vary], F.nm(w["objective"][k], False),
                  F.volts(w["vbi_V"][k], False), F.volts(w["solver_vbi_V"][k], False) if confirmed else "—", check)
    console.print(t)
    console.print(f"[dim]{res['feasible']:,} candidates meet {res['target']}; feasibility judged on the lower end of "
                  f"the 95 % interval (conservative). {CAUTION}[/]")
    by = answered_by_text(res["answered_by"], "candidates")
    console.print(f"[dim]{_tunnel_note(res)} {by[:1].upper() + by[1:]}.[/]")
    if args.csv:
        console.print(f"[dim]wrote CSV to {escape(args.csv)}[/]")
    return _errors.OK


def _tunnel_note(res) -> str:
    """What the tunnelling filter did, in one sentence (counts from the API)."""
    thr = f"10^{radialpn.TUNNEL_RISK_LOG10:g}"
    if not res["avoid_tunnelling"]:
        return "Tunnelling risk not filtered (--allow-tunnelling); the estimates are in --json and --csv."
    text = (f"{res['tunnelling_excluded']:,} candidates at tunnelling risk (estimate above {thr}) left out; "
            "--allow-tunnelling keeps them.")
    if res["tunnelling_unchecked"]:
        text += (f" {res['tunnelling_unchecked']:,} feasible candidates had no estimate (the surrogate gives none); "
                 "the solver's check judges the winners (✗ TUNNELS).")
    return text
