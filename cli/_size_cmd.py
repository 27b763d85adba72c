"""`radialpn size` (critical dimensions, sweeps) and `radialpn search` (constrained search over
many candidates); answers from an engine, winners confirmed by the reference solver."""

from __future__ import annotations

import math
import time

import numpy as np
from rich.table import Table
from rich.text import Text

import surrogate
from surrogate._search import LOG_COLUMNS, axis, candidates, critical, meets, objective

from . import _engines, _errors, _png
from ._axes import UNITS, axis_spec, fmt_value, value
from ._designargs import design_from_args, flag_hint
from ._plot import BrailleCanvas
from ._render import CAUTION, regime_text

CONFIRM_STEP_NM = 0.5  #: the solver checks this much above and below the critical value
RANGES = {"core_radius_nm": (5.0, 500.0), "shell_thickness_nm": (1.0, 500.0)}


def _target(args):
    if args.vbi_min is not None:
        return {"vbi_min": value("cnl_eV", args.vbi_min, "--vbi-min"), "fraction_min": None}
    if not 0 < args.fraction <= 1:
        raise _errors.UsageError(f"--fraction: allowed range (0, 1] (got {args.fraction:g})")
    return {"vbi_min": None, "fraction_min": args.fraction}


def _ranges(args, base):
    """Scan ranges: the bundle's domain for the surrogate, else wide defaults."""
    out = dict(RANGES)
    if args.engine == "surrogate":
        try:
            dom = surrogate.load(base["material"], base["core_type"]).domain
            out = {k: dom[k] for k in out if k in dom}
        except (surrogate.BundleError, KeyError):
            pass
    return out


def _check_base(design, fill):
    table = surrogate.normalize_designs({k: [v] for k, v in {**fill, **design}.items()})
    if table.status[0] != "ok":
        raise _errors.UsageError(flag_hint(str(table.status[0])))
    return {"material": table.material[0], "core_type": "p" if table.p_core[0] else "n",
            **{k: float(v[0]) for k, v in table.values.items() if not (k == "cnl_eV" and math.isnan(v[0]))}}


def _criticals(predict, base, ranges, target):
    res = {}
    for col in ("core_radius_nm", "shell_thickness_nm"):
        lo, hi = ranges[col]
        res[col] = critical(predict, base, col, lo, hi, **target)
    return res


def _confirm(base, res, target, statistics):
    from training import solve

    rows, where = [], []
    for col, r in res.items():
        if math.isfinite(r["value"]):
            for dx in (CONFIRM_STEP_NM, -CONFIRM_STEP_NM):
                rows.append({**base, col: max(r["value"] + dx, 1.0)})
                where.append((col, dx))
    if not rows:
        return {}
    t = time.perf_counter()
    out = solve({k: [r[k] for r in rows] for k in rows[0]}, statistics)
    ok = meets(out, **target)
    seconds = time.perf_counter() - t
    return {key: (bool(ok[i]), float(out["vbi_V"][i]), seconds) for i, key in enumerate(where)}


def cmd_size(args, console, out) -> int:
    target = _target(args)
    design = design_from_args(args)
    base = _check_base(design, {"core_radius_nm": 100.0, "shell_thickness_nm": 100.0})
    base["core_radius_nm"] = base["core_radius_nm"] if "core_radius_nm" in design else 100.0
    base["shell_thickness_nm"] = base["shell_thickness_nm"] if "shell_thickness_nm" in design else 100.0
    predict = _engines.predictor(args.engine, args.statistics)
    ranges = _ranges(args, base)
    goal = (f"V_bi >= {target['vbi_min']:g} V" if target["vbi_min"] is not None
            else f"V_bi >= {target['fraction_min']:.0%} of V_bi0")
    if args.sweep:
        return _sweep(args, console, predict, base, ranges, target, goal)
    res = _criticals(predict, base, ranges, target)
    checks = _confirm(base, res, target, args.statistics) if not args.no_confirm else {}
    t = Table(title=f"critical dimensions for {goal} ({args.engine} engine)", title_justify="left")
    for c in ("dimension", "critical", "interval", "regime there", f"solver ±{CONFIRM_STEP_NM:g}"):
        t.add_column(c, no_wrap=True)
    for col, r in res.items():
        other = "shell_thickness_nm" if col == "core_radius_nm" else "core_radius_nm"
        label = "smallest core" if col == "core_radius_nm" else "thinnest shell"
        label = f"{label}\n({'shell' if col == 'core_radius_nm' else 'core'} {base[other]:g} nm)"
        if not math.isfinite(r["value"]):
            t.add_row(label, "none", f"{ranges[col][0]:g}–{ranges[col][1]:g} nm scanned", "", "")
            continue
        rng = f"{r['optimistic']:.3g}–{r['conservative']:.3g} nm" if r["optimistic"] != r["conservative"] else "—"
        check = Text("")
        if (col, CONFIRM_STEP_NM) in checks:
            above, _, _ = checks[(col, CONFIRM_STEP_NM)]
            below, _, _ = checks[(col, -CONFIRM_STEP_NM)]
            good = above and not below
            check = Text("✓ confirmed" if good else f"✗ {'fails above' if not above else 'holds below'}",
                         style="#3aa876" if good else "bold #d9534f")
        t.add_row(label, Text(f"{r['value']:.3g} nm", style="bold"), rng, regime_text(r["answer"]["regime"]), check)
    console.print(t)
    if checks:
        secs = next(iter(checks.values()))[2]
        console.print(f"[dim]✓: the reference solver meets the target {CONFIRM_STEP_NM:g} nm above and misses it "
                      f"{CONFIRM_STEP_NM:g} nm below ({1e3 * secs:.0f} ms). Interval range: the critical value read "
                      f"from the upper and the lower end of the 95 % interval.[/]")
    console.print(f"[dim]{CAUTION}[/]")
    return _errors.OK


def _sweep(args, console, predict, base, ranges, target, goal):
    col, lo, hi = axis_spec(args.sweep, "--sweep")
    if col in ("core_radius_nm", "shell_thickness_nm"):
        raise _errors.UsageError(f"--sweep: sweep a doping, D_it, cnl or temperature, not {col}")
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

    if not 2 <= args.points <= 200:
        raise _errors.UsageError(f"--points: allowed range [2, 200] (got {args.points})")
    xs = axis(col, lo, hi, args.points)
    rows = []
    with Progress(TextColumn("[#5b8def]sweeping"), BarColumn(), MofNCompleteColumn(), TimeRemainingColumn(),
                  console=console, transient=True) as bar:
        task = bar.add_task("", total=len(xs))
        for x in xs:
            res = _criticals(predict, {**base, col: x}, ranges, target)
            rows.append((x, res["core_radius_nm"]["value"], res["shell_thickness_nm"]["value"]))
            bar.advance(task)
    t = Table(title=f"critical dimensions for {goal} against {col}", title_justify="left")
    for c in (f"{col} [{UNITS.get(col, '')}]", f"smallest core [nm] (shell {base['shell_thickness_nm']:g} nm)",
              f"thinnest shell [nm] (core {base['core_radius_nm']:g} nm)"):
        t.add_column(c, justify="right")
    for x, a, s in rows:
        t.add_row(fmt_value(col, x), f"{a:.3g}" if math.isfinite(a) else "none", f"{s:.3g}" if math.isfinite(s) else "none")
    console.print(t)
    arr = np.array(rows, dtype=float)
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
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

    target = _target(args)
    fixed = design_from_args(args)
    space = {}
    for spec in args.vary:
        col, lo, hi = axis_spec(spec, "--vary")
        space[col] = (lo, hi)
        fixed.pop(col, None)
    if not space:
        raise _errors.UsageError("--vary: give at least one free variable, e.g. --vary shell-thickness:2nm:100nm")
    probe = _check_base(fixed, {c: lo for c, (lo, _) in space.items()})
    for c in ("core_radius_nm", "shell_thickness_nm"):
        if c not in space and c not in fixed:
            raise _errors.UsageError(f"--{c.split('_')[0]}-{'radius' if c.startswith('core') else 'thickness'}: "
                                     f"fix it or --vary it")
    fixed = {k: v for k, v in probe.items() if k not in space}
    n = args.candidates
    if not 1000 <= n <= 50_000_000:
        raise _errors.UsageError(f"--candidates: allowed range [1000, 50000000] (got {n})")
    cand = candidates(space, fixed, n, args.seed)
    predict = _engines.predictor(args.engine, args.statistics)
    chunk = 100_000
    best = []
    t0 = time.perf_counter()
    with Progress(TextColumn("[#5b8def]searching"), BarColumn(), MofNCompleteColumn(), TimeRemainingColumn(),
                  console=console, transient=True) as bar:
        task = bar.add_task("", total=n)
        for s in range(0, n, chunk):
            part = {k: (v[s:s + chunk] if np.ndim(v) else v) for k, v in cand.items()}
            res = predict(part)
            ok = meets(res, **target, bound="low" if "vbi_low_V" in res else "value")
            if args.regime:
                ok &= np.isin(res["regime"], args.regime)
            obj = objective(part, args.minimize)
            idx = np.flatnonzero(ok)
            for i in idx[np.argsort(obj[idx])[: args.top]]:
                best.append((float(obj[i]), {k: (float(v[i]) if np.ndim(v) else v) for k, v in part.items()},
                             {k: res[k][i] for k in ("regime", "vbi_V")}))
            best = sorted(best, key=lambda b: b[0])[: args.top]
            bar.update(task, completed=min(s + chunk, n))
    elapsed = time.perf_counter() - t0
    if not best:
        console.print(f"No candidate of {n:,} meets the target; widen --vary ranges or relax it.")
        return _errors.NO_ANSWER
    from training import solve

    rows = [b[1] for b in best]
    check = solve({k: [r[k] for r in rows] for k in rows[0]}, args.statistics)
    ok = meets(check, **target)
    if args.regime:
        ok &= np.isin(check["regime"], args.regime)
    t = Table(title=f"best of {n:,} candidates ({elapsed:.1f} s, {n / elapsed:,.0f}/s): minimise {args.minimize}",
              title_justify="left")
    for c in ["#", *[f"{c} [{UNITS.get(c, '')}]" for c in space], args.minimize, "V_bi (engine)", "solver V_bi",
              "solver check"]:
        t.add_column(c, justify="right")
    for k, ((obj, d, r), ok_k) in enumerate(zip(best, ok)):
        t.add_row(str(k + 1), *[fmt_value(c, d[c]) for c in space], f"{obj:.4g}", f"{r['vbi_V']:.4f}",
                  f"{check['vbi_V'][k]:.4f}", Text("meets target" if ok_k else "MISSES", style="#3aa876" if ok_k else "#d9534f"))
    console.print(t)
    console.print(f"[dim]Feasibility judged on the lower end of the 95 % interval (conservative). {CAUTION}[/]")
    return _errors.OK
