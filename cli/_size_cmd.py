"""`radialpn size` (critical dimensions, sweeps) and `radialpn search` (constrained search over
many candidates): flags into ``radialpn.critical_dimensions`` / ``radialpn.search``, answers drawn."""

from __future__ import annotations

import math

import numpy as np
from rich.table import Table
from rich.text import Text

import radialpn

from . import _errors, _png
from ._axes import UNITS, axis_spec, fmt_value
from ._designargs import (add_design_flags, design_from_args, engine_flags, progress_bar, target_flags,
                          target_from_args)
from ._plot import BrailleCanvas
from ._render import CAUTION, regime_text

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
    se.set_defaults(handler=cmd_search)


def cmd_size(args, console, out) -> int:
    target = target_from_args(args)
    design = design_from_args(args)
    goal = radialpn.target_text(**target)
    if args.sweep:
        return _sweep(args, console, design, target, goal)
    res = radialpn.critical_dimensions(design, **target, engine=args.engine, statistics=args.statistics,
                                       confirm=not args.no_confirm)
    base = res["design"]
    step = res["confirm_step_nm"]
    t = Table(title=f"critical dimensions for {goal} ({args.engine} engine)", title_justify="left")
    for c in ("dimension", "critical", "interval", "regime there", f"solver ±{step:g}"):
        t.add_column(c, no_wrap=True)
    reasons = []
    for col in ("core_radius_nm", "shell_thickness_nm"):
        r = res[col]
        other = "shell_thickness_nm" if col == "core_radius_nm" else "core_radius_nm"
        label = "smallest core" if col == "core_radius_nm" else "thinnest shell"
        label = f"{label}\n({'shell' if col == 'core_radius_nm' else 'core'} {base[other]:g} nm)"
        if not math.isfinite(r["value_nm"]):
            lo, hi = res["scan_ranges_nm"][col]
            t.add_row(label, "none", f"{lo:g}–{hi:g} nm scanned", "", "")
            reasons.append(r["reason"])
            continue
        rng = (f"{r['optimistic_nm']:.3g}–{r['conservative_nm']:.3g} nm" if r["optimistic_nm"] != r["conservative_nm"]
               else "—")
        check = Text("")
        if r["confirmed"] is not None:
            check = Text("✓ confirmed" if r["confirmed"] else "✗ not confirmed",
                         style="#3aa876" if r["confirmed"] else "bold #d9534f")
        elif r["reason"]:
            reasons.append(r["reason"])
        t.add_row(label, Text(f"{r['value_nm']:.3g} nm", style="bold"), rng, regime_text(r["regime"]), check)
    console.print(t)
    for why in reasons:
        console.print(f"[#e0a526]why:[/] {why}")
    if "solver_seconds" in res:
        console.print(f"[dim]✓: the reference solver meets the target {step:g} nm above and misses it "
                      f"{step:g} nm below ({1e3 * res['solver_seconds']:.0f} ms). Interval range: the critical value read "
                      f"from the upper and the lower end of the 95 % interval.[/]")
    console.print(f"[dim]{CAUTION}[/]")
    return _errors.OK


def _sweep(args, console, design, target, goal):
    col, lo, hi = axis_spec(args.sweep, "--sweep")
    bar, update = progress_bar(console, "sweeping")
    with bar:
        res = radialpn.critical_dimensions(design, **target, engine=args.engine, statistics=args.statistics,
                                           sweep=(col, lo, hi), points=args.points, progress=update)
    base = res["design"]
    xs, core, shell = res["sweep_values"], res["core_radius_nm"], res["shell_thickness_nm"]
    t = Table(title=f"critical dimensions for {goal} against {col}", title_justify="left")
    for c in (f"{col} [{UNITS.get(col, '')}]", f"smallest core [nm] (shell {base['shell_thickness_nm']:g} nm)",
              f"thinnest shell [nm] (core {base['core_radius_nm']:g} nm)"):
        t.add_column(c, justify="right")
    for x, a, s in zip(xs, core, shell):
        t.add_row(fmt_value(col, x), f"{a:.3g}" if math.isfinite(a) else "none", f"{s:.3g}" if math.isfinite(s) else "none")
    console.print(t)
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
        console.print(f"[dim]wrote {args.png}[/]")
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


def cmd_search(args, console, out) -> int:
    target = target_from_args(args)
    fixed = design_from_args(args)
    vary = {}
    for spec in args.vary:
        col, lo, hi = axis_spec(spec, "--vary")
        vary[col] = (lo, hi)
        fixed.pop(col, None)
    if not vary:
        raise _errors.UsageError("--vary: give at least one free variable, e.g. --vary shell-thickness:2nm:100nm")
    bar, update = progress_bar(console, "searching")
    with bar:
        res = radialpn.search(fixed, vary, args.minimize, **target, regimes=args.regime, candidates=args.candidates,
                              top=args.top, seed=args.seed, engine=args.engine, statistics=args.statistics,
                              progress=update)
    if res["reason"]:
        console.print(f"no answer: {res['reason']}")
        return _errors.NO_ANSWER
    w, n, elapsed = res["winners"], res["candidates"], res["seconds"]
    t = Table(title=f"best of {n:,} candidates ({elapsed:.1f} s, {n / elapsed:,.0f}/s): minimise {args.minimize}",
              title_justify="left")
    for c in ["#", *[f"{c} [{UNITS.get(c, '')}]" for c in vary], args.minimize, "V_bi (engine)", "solver V_bi",
              "solver check"]:
        t.add_column(c, justify="right")
    for k in range(w["objective"].size):
        ok_k = bool(w["solver_meets"][k])
        t.add_row(str(k + 1), *[fmt_value(c, w[c][k]) for c in vary], f"{w['objective'][k]:.4g}", f"{w['vbi_V'][k]:.4f}",
                  f"{w['solver_vbi_V'][k]:.4f}", Text("meets target" if ok_k else "MISSES", style="#3aa876" if ok_k else "#d9534f"))
    console.print(t)
    console.print(f"[dim]Feasibility judged on the lower end of the 95 % interval (conservative). {CAUTION}[/]")
    return _errors.OK
