"""`radialpn spread`: growth tolerance by Monte Carlo over run-to-run spreads."""

from __future__ import annotations

import time

import numpy as np
from rich.table import Table
from rich.text import Text

from surrogate._search import main_effects, meets, regime_probabilities, spread_samples, standard_scores

from . import _engines, _errors
from ._axes import UNITS, spread_spec
from ._designargs import design_from_args
from ._render import CAUTION, REGIME_STYLE, regime_text
from ._size_cmd import _check_base, _target

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
    target = _target(args)
    spreads = dict(spread_spec(s, "--spread") for s in args.spread)
    if not spreads:
        raise _errors.UsageError("--spread: give at least one, e.g. --spread shell-thickness=2nm --spread dit=50%")
    if not 1000 <= args.samples <= 20_000_000:
        raise _errors.UsageError(f"--samples: allowed range [1000, 20000000] (got {args.samples})")
    nominal = _check_base(design_from_args(args), {})
    predict = _engines.predictor(args.engine, args.statistics, console)
    t0 = time.perf_counter()
    samples = spread_samples(nominal, spreads, args.samples, args.seed)
    res = predict(samples)
    elapsed = time.perf_counter() - t0
    ok = res["status"] == "ok"
    success = meets(res, **target)
    if args.regime:
        success &= np.isin(res["regime"], args.regime)
    effects = main_effects({k: np.asarray(v)[ok] for k, v in samples.items() if k in spreads}, list(spreads),
                           success[ok])
    z = standard_scores(samples, nominal, spreads)
    failing = ok & ~success
    shift = {c: float(z[c][failing].mean()) if failing.any() else 0.0 for c in spreads}
    probs = regime_probabilities(res)
    vb = res["vbi_V"][ok]
    pct = np.percentile(vb, [5, 25, 50, 75, 95]) if vb.size else [np.nan] * 5
    goal = (f"V_bi >= {target['vbi_min']:g} V" if target["vbi_min"] is not None
            else f"V_bi >= {target['fraction_min']:.0%} of V_bi0") + (f" in {', '.join(args.regime)}" if args.regime else "")
    if args.json:
        import json

        out.write(json.dumps({"samples": int(args.samples), "answered": int(ok.sum()), "seconds": elapsed,
                              "regime_probability": probs, "vbi_percentiles_V": dict(zip(("p5", "p25", "p50", "p75", "p95"),
                                                                                         map(float, pct))),
                              "target": goal, "yield": float(success[ok].mean()) if ok.any() else None,
                              "main_effects": effects, "failing_runs_mean_z": shift, "engine": args.engine}) + "\n")
        return _errors.OK
    console.print(Text(f"{args.samples:,} growth runs around the nominal design, {elapsed:.2f} s "
                       f"({args.engine} engine, seed {args.seed})", style="bold"))
    t = Table(show_header=True, title="regime", title_justify="left")
    t.add_column("regime")
    t.add_column("probability", justify="right")
    t.add_column("")
    for r, p in probs.items():
        t.add_row(regime_text(r), f"{p:.1%}", Text("█" * int(round(30 * p)), style=REGIME_STYLE[r][0]))
    console.print(t)
    console.print(Text.assemble("V_bi  ", histogram(vb)))
    console.print("      5 / 25 / 50 / 75 / 95 %: " + " / ".join(f"{x:.3f}" for x in pct) + " V")
    y = float(success[ok].mean()) if ok.any() else float("nan")
    console.print(Text.assemble("yield (", goal, "): ", (f"{y:.1%}", "bold")))
    ranking = sorted(effects.items(), key=lambda kv: (-kv[1], -abs(shift[kv[0]])))
    s = Table(title="what the yield is most sensitive to", title_justify="left")
    s.add_column("variable")
    s.add_column("spread")
    s.add_column("share of yield variance", justify="right")
    s.add_column("failing runs sit at", justify="right")
    for col, e in ranking:
        kind, size, rel = spreads[col]
        desc = f"{'±' if kind == 'uniform' else 'σ '}{size:.0%}" if rel else f"{'±' if kind == 'uniform' else 'σ '}{size:g} {UNITS.get(col, '')}"
        s.add_row(col, desc + (" (log)" if rel and col not in ("cnl_eV", "temperature_K") else ""), f"{e:.1%}",
                  f"{shift[col]:+.2f} σ" if failing.any() else "—")
    console.print(s)
    console.print("[dim]Share: main-effect share of the yield's variance (binned, Saltelli et al. 2008). "
                  "Failing runs: their mean deviation from nominal in spreads (σ, or half widths).[/]")
    if (~ok).any():
        console.print(f"[dim]{int((~ok).sum()):,} samples had no answer (e.g. {res['status'][~ok][0]}); left out.[/]")
    console.print(f"[dim]Relative spreads of radii, dopings and D_it act in log (20 % = a factor e^0.2 per σ). {CAUTION}[/]")
    return _errors.OK
