"""`radialpn spread`: growth tolerance by Monte Carlo over run-to-run spreads."""

from __future__ import annotations

import math

import numpy as np
from rich.markup import escape
from rich.table import Table
from rich.text import Text

import radialpn

from . import _errors
from . import _format as F
from ._axes import UNITS, column
from ._export import dumps, write_csv
from ._designargs import add_design_flags, design_from_args, engine_flags, progress_bar, target_flags, target_from_args
from ._render import CAUTION, REGIME_STYLE, answered_by_text, regime_text

LOG_SPREAD = ("core_radius_nm", "shell_thickness_nm", "core_doping_cm3", "shell_doping_cm3", "dit_cm2eV")


def register(sub) -> None:
    sp = sub.add_parser("spread", help="growth tolerance: regimes, V_bi percentiles and yield under run-to-run spread")
    add_design_flags(sp)
    engine_flags(sp)
    target_flags(sp)
    sp.add_argument("--spread", action="append", default=[], metavar="NAME=SIZE[%][,uniform]",
                    help="a spread, e.g. shell-thickness=2nm (σ) or dit=50%%,uniform (repeatable)")
    sp.add_argument("--samples", type=int, default=100_000, help="Monte Carlo samples (default 100000)")
    sp.add_argument("--regime", action="append", choices=radialpn.REGIMES, help="yield also requires this regime")
    sp.add_argument("--seed", type=int, default=0)
    sp.add_argument("--json", action="store_true", help="print the summary as JSON")
    sp.add_argument("--csv", metavar="FILE", help="also write the summary as CSV (quantity, variable, value)")
    sp.set_defaults(handler=cmd_spread)


def _spreads(texts) -> dict:
    out = {}
    for text in texts:
        if "=" not in text:
            raise _errors.UsageError(f"--spread: expected NAME=SIZE[%][,uniform], e.g. shell-thickness=2nm or dit=50% "
                                     f"(got {text!r})")
        name, rest = text.split("=", 1)
        col = column(name, "--spread")
        if col in out:
            raise _errors.UsageError(f"--spread: {col} is given twice (got {text!r}); give each spread once")
        out[col] = rest
    if not out:
        raise _errors.UsageError("--spread: give at least one, e.g. --spread shell-thickness=2nm --spread dit=50%")
    return out


def spread_rows(r) -> list:
    """The spread summary as long-format rows (quantity, variable, value): every value numeric."""
    rows = [("samples", "", r["samples"]), ("answered", "", r["answered"]), ("yield", "", r["yield"])]
    rows += [("regime_probability", k, v) for k, v in r["regime_probability"].items()]
    rows += [("vbi_percentile_V", k, v) for k, v in r["vbi_percentiles_V"].items()]
    rows += [("main_effect", k, v) for k, v in r["main_effects"].items()]
    rows += [("failing_runs_mean_z", k, v) for k, v in r["failing_mean_z"].items()]
    return rows


BARS = " ▁▂▃▄▅▆▇█"


def histogram(values, bins: int = 40) -> Text:
    """A one-line bar histogram with its range."""
    v = values[np.isfinite(values)]
    if v.size == 0:
        return Text("no finite values")
    counts, edges = np.histogram(v, bins=bins)
    top = counts.max() or 1
    line = Text("".join(BARS[int(round(c / top * (len(BARS) - 1)))] for c in counts), style="#1f9e8a")
    return Text.assemble(f"{edges[0]:.3f} V ", line, f" {edges[-1]:.3f} V")


def cmd_spread(args, console, out) -> int:
    target = target_from_args(args)
    spreads = _spreads(args.spread)
    bar, update = progress_bar(console, f"{args.engine} engine")
    with bar:
        r = radialpn.spread(design_from_args(args), spreads, args.samples, args.seed, **target, regimes=args.regime,
                            engine=args.engine, statistics=args.statistics, progress=update,
                            ionisation=args.ionisation)
    spreads, probs, effects, shift = r["spreads"], r["regime_probability"], r["main_effects"], r["failing_mean_z"]
    elapsed, vb, goal = r["seconds"], r["vbi_V"], r["target"]
    pct = list(r["vbi_percentiles_V"].values())
    failing = r["yield"] < 1.0
    if args.csv:
        write_csv(args.csv, ("quantity", "variable", "value"), spread_rows(r))
    if args.json:
        out.write(dumps({"samples": r["samples"], "answered": r["answered"], "seconds": elapsed, "seed": r["seed"],
                         "regime_probability": probs, "vbi_percentiles_V": r["vbi_percentiles_V"],
                         "target": goal, "yield": r["yield"], "main_effects": effects, "failing_runs_mean_z": shift,
                         "spreads": {c: {"kind": k, "size": v, "relative": rel} for c, (k, v, rel) in spreads.items()},
                         "engine": args.engine, "answered_by": r["answered_by"], "tunnelling_risk": r["tunnelling_risk"],
                         "reason": r["reason"], "caution": CAUTION}) + "\n")
        return _errors.NO_ANSWER if r["reason"] else _errors.OK
    if r["reason"]:
        console.print(f"[bold #d9534f]no answer:[/] {escape(r['reason'])}")
        return _errors.NO_ANSWER
    console.print(Text(f"{args.samples:,} growth runs around the nominal design, {elapsed:.2f} s "
                       f"({args.engine} engine, seed {args.seed})", style="bold"))
    t = Table(show_header=True, title="regime", title_justify="left")
    t.add_column("regime")
    t.add_column("probability", justify="right")
    t.add_column("")
    for name, p in probs.items():
        t.add_row(regime_text(name), F.percent(p), Text("█" * int(round(30 * p)), style=REGIME_STYLE[name][0]))
    console.print(t)
    console.print(Text.assemble("V_bi  ", histogram(vb)))
    console.print("      5 / 25 / 50 / 75 / 95 %: " + " / ".join(F.volts(x, False) for x in pct) + " V")
    y = r["yield"]
    console.print(Text.assemble("yield (", goal, "): ", (F.percent(y), "bold")))
    if math.isfinite(r["tunnelling_risk"]):
        console.print(f"tunnelling risk (estimate above 10^{radialpn.TUNNEL_RISK_LOG10:g}): "
                      f"{F.percent(r['tunnelling_risk'])} of the runs with an estimate")
    ranking = sorted(effects.items(), key=lambda kv: (-kv[1], -abs(shift[kv[0]])))
    s = Table(title="what the yield is most sensitive to", title_justify="left")
    s.add_column("variable")
    s.add_column("spread")
    s.add_column("share of\nyield variance", justify="right")
    s.add_column("failing runs\nsit at", justify="right")
    for col, e in ranking:
        kind, size, rel = spreads[col]
        desc = f"{'±' if kind == 'uniform' else 'σ '}{size:.0%}" if rel else f"{'±' if kind == 'uniform' else 'σ '}{size:g} {UNITS.get(col, '')}"
        s.add_row(col, desc + (" (log)" if rel and col in LOG_SPREAD else ""), F.percent(e),
                  f"{shift[col]:+.2f} σ" if failing else "—")
    console.print(s)
    console.print("[dim]Share: main-effect share of the yield's variance (binned, Saltelli et al. 2008). "
                  "Failing runs: their mean deviation from nominal in spreads (σ, or half widths).[/]")
    if r["answered"] < r["samples"]:
        console.print(f"[dim]{r['samples'] - r['answered']:,} samples had no answer (e.g. {r['first_unanswered']}); "
                      "left out.[/]")
    console.print(f"[dim]{answered_by_text(r['answered_by'], 'runs')}.[/]")
    if args.csv:
        console.print(f"[dim]wrote CSV to {escape(args.csv)}[/]")
    console.print(f"[dim]Relative spreads of radii, dopings and D_it act in log (20 % = a factor e^0.2 per σ). {CAUTION}[/]")
    return _errors.OK
