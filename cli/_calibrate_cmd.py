"""`radialpn calibrate OBS.csv --unknown dit --unknown cnl ...`: infer unknown design columns
of a measured series with credible intervals (radialpn.calibrate), a terminal corner view,
--json and --png."""

from __future__ import annotations

import json
import math

import numpy as np
from rich.table import Table
from rich.text import Text

import radialpn

from . import _errors
from ._csvio import check_suffix, read_table
from ._designargs import engine_flags, progress_bar
from ._plot import BrailleCanvas

BARS = " ▁▂▃▄▅▆▇█"
UNIT = {"dit_cm2eV": "cm⁻²eV⁻¹", "cnl_eV": "eV", "shell_doping_cm3": "cm⁻³", "core_doping_cm3": "cm⁻³"}
LABEL = {"dit_cm2eV": "D_it", "cnl_eV": "E_cnl", "shell_doping_cm3": "N_shell", "core_doping_cm3": "N_core"}


def register(sub) -> None:
    sp = sub.add_parser("calibrate", help="infer D_it, neutral level and dopings from measurements on a grown series")
    sp.add_argument("observations", metavar="OBS.csv",
                    help="design-table rows of the measured wires plus observed columns (vbi_V with vbi_V_sigma, "
                         "surface_bending_V, neutral extents, regime, shell_keeps_neutral, core_keeps_neutral); "
                         "a `series` column calibrates each series on its own")
    sp.add_argument("--unknown", action="append", default=[], metavar="NAME[=PRIOR:LOW:HIGH][,per-row]",
                    help="an unknown: dit, cnl, shell-doping or core-doping; prior log-uniform:LOW:HIGH, "
                         "uniform:LOW:HIGH, normal:MEAN:SD, log-normal:MEDIAN:SD_DEX (default: docs/calibrate.md); "
                         ",per-row for one per wire (repeatable)")
    # calibration keeps the default ionisation ("auto"): its engines answer the bundles' domain
    engine_flags(sp, engines=("surrogate", "depletion", "solver"), default="surrogate", ionisation=False)
    sp.add_argument("--steps", type=int, default=1500, help="kept sampler steps (default 1500)")
    sp.add_argument("--burn", type=int, default=500, help="discarded sampler steps (default 500)")
    sp.add_argument("--walkers", type=int, default=None, help="walkers (default max(32, 4 per unknown))")
    sp.add_argument("--seed", type=int, default=0)
    sp.add_argument("--reference-row", type=int, default=1, metavar="N",
                    help="wire whose critical core radius and shell thickness are reported (default 1)")
    sp.add_argument("--fraction", type=float, default=0.9, help="critical dimensions for V_bi >= FRACTION * V_bi0")
    sp.add_argument("--no-recheck", action="store_true", help="skip the reference solver's re-check")
    sp.add_argument("--json", action="store_true", help="print the result as JSON")
    sp.add_argument("--png", metavar="FILE", help="write a corner plot of the posterior (needs the plot extra)")
    sp.set_defaults(handler=cmd_calibrate)


def parse_unknown(text: str):
    """NAME[=PRIOR:A:B][,per-row] -> (name, spec or None)."""
    body, per_row = text.strip(), False
    if body.lower().endswith(",per-row"):
        body, per_row = body[:-len(",per-row")], True
    name, _, prior = body.partition("=")
    spec = {}
    if prior:
        parts = prior.split(":")
        keys = {"log-uniform": ("low", "high"), "uniform": ("low", "high"), "normal": ("mean", "sd"),
                "log-normal": ("median", "sd_dex")}
        if parts[0] not in keys or len(parts) != 3:
            raise _errors.UsageError(f"--unknown: expected NAME=PRIOR:LOW:HIGH (or :MEAN:SD) with PRIOR one of {', '.join(keys)}, "
                                     f"e.g. dit=log-uniform:1e11:1e13 (got {text!r})")
        spec = {"prior": parts[0], keys[parts[0]][0]: parts[1], keys[parts[0]][1]: parts[2]}
        if parts[0] == "log-normal":
            try:
                spec["sd_dex"] = float(parts[2])
            except ValueError:
                raise _errors.UsageError(f"--unknown: log-normal sd in decades must be a number (got {parts[2]!r})") from None
    if per_row:
        spec["per_row"] = True
    return name.strip(), (spec or None)


def _fmt(col, v):
    if not math.isfinite(v):
        return "—"
    return f"{v:.3f}" if col == "cnl_eV" else f"{v:.3g}"


def unknowns_table(r) -> Table:
    t = Table(title="posterior", title_justify="left")
    for c, j in (("unknown", "left"), ("prior", "left"), ("median", "right"), ("68 % interval", "right"),
                 ("95 % interval", "right"), ("R-hat", "right")):
        t.add_column(c, justify=j)
    for u in r["unknowns"]:
        unit = UNIT.get(u["column"], "")
        t.add_row(u["name"], u["prior"], f"{_fmt(u['column'], u['median'])} {unit}",
                  f"{_fmt(u['column'], u['ci68'][0])} – {_fmt(u['column'], u['ci68'][1])}",
                  f"{_fmt(u['column'], u['ci95'][0])} – {_fmt(u['column'], u['ci95'][1])}", f"{u['rhat']:.3f}")
    return t


def _coord(r, j):
    s = r["samples"][:, j]
    return np.log10(s) if r["unknowns"][j]["log_scale"] else s


def corner_text(r, width: int = 22, height: int = 6) -> Text:
    """Marginals as bar lines and each pair as a braille scatter of up to 1,500 draws (log10
    axes for D_it and dopings)."""
    out = Text()
    P = len(r["unknowns"])
    rng = np.random.default_rng(0)
    take = rng.choice(len(r["samples"]), min(1500, len(r["samples"])), replace=False)
    for j, u in enumerate(r["unknowns"]):
        x = _coord(r, j)
        counts, edges = np.histogram(x, bins=30)
        top = counts.max() or 1
        line = "".join(BARS[int(round(c / top * (len(BARS) - 1)))] for c in counts)
        lab = ("log10 " if u["log_scale"] else "") + LABEL.get(u["column"], u["name"])
        out.append(f"{lab:>16} {edges[0]:8.3f} ", style="dim")
        out.append(line, style="#1f9e8a")
        out.append(f" {edges[-1]:.3f}\n", style="dim")
    for i in range(P):
        for j in range(i + 1, P):
            x, y = _coord(r, i)[take], _coord(r, j)[take]
            xl, yl = (float(x.min()), float(x.max())), (float(y.min()), float(y.max()))
            if xl[0] == xl[1] or yl[0] == yl[1]:
                continue
            c = BrailleCanvas(width, height, xl, yl)
            px = np.clip(((x - xl[0]) / (xl[1] - xl[0]) * (2 * width - 1)).round().astype(int), 0, 2 * width - 1)
            py = np.clip(((yl[1] - y) / (yl[1] - yl[0]) * (4 * height - 1)).round().astype(int), 0, 4 * height - 1)
            for a, b in zip(px, py):
                c._dot(int(a), int(b), "#5b8def")
            name = lambda k: ("log10 " if r["unknowns"][k]["log_scale"] else "") + LABEL.get(  # noqa: E731
                r["unknowns"][k]["column"], r["unknowns"][k]["name"])
            out.append(f"{name(j)} against {name(i)}   (correlation {r['correlation'][i, j]:+.2f})\n", style="bold")
            out.append(c.render())
    return out


def _summary(r, console) -> None:
    head = f"{r['wires']} wires, {sum(r['observations'].values())} observations, {r['engine']} engine, " \
           f"{r['seconds']['total']:.1f} s"
    console.print(Text(("series " + str(r["series"]) + " · " if "series" in r else "") + head, style="bold"))
    console.print(unknowns_table(r))
    console.print(corner_text(r))
    d = r["diagnostics"]
    console.print(f"convergence  split-R-hat max {d['rhat_max']:.3f} · autocorrelation {d['autocorr_max_steps']:.0f} "
                  f"steps · {d['effective_draws_min']:,.0f} effective draws · acceptance {d['acceptance']:.2f} · "
                  + ("[green]converged[/]" if d["converged"] else "[red]not converged: raise --steps[/]"))
    rc = r.get("recheck")
    if rc:
        mm, md = rc["median_labels_matched"], rc["draws_labels_matched"]
        console.print(f"solver check at the median and {rc['points'] - 1} draws: mean z² {rc['median_mean_z2']:.2f} "
                      f"(draws {rc['draws_mean_z2']:.2f}), regimes matched {mm[0]}/{mm[1]} ({md[0]}/{md[1]}), "
                      f"largest V_bi table-vs-solver difference {1000 * rc['max_vbi_difference_V']:.1f} mV")
    cr = r.get("critical")
    if cr:
        for col, what in (("shell_thickness_nm", "critical shell thickness"), ("core_radius_nm", "critical core radius")):
            c = cr[col]
            fixed = "core" if col == "shell_thickness_nm" else "shell"
            if math.isnan(c["median_nm"]):
                console.print(f"{what:25} none in {c['scan_nm'][0]:g}-{c['scan_nm'][1]:g} nm with the {fixed} of wire "
                              f"{cr['reference_row']} ({c['fixed_nm']:g} nm)")
                continue
            miss = f", none holds in {c['none_holds']:.0%} of draws" if c["none_holds"] else ""
            console.print(f"{what:25} {c['median_nm']:.1f} nm  68 % [{c['ci68_nm'][0]:.1f}, {c['ci68_nm'][1]:.1f}]  "
                          f"95 % [{c['ci95_nm'][0]:.1f}, {c['ci95_nm'][1]:.1f}] nm  ({fixed} {c['fixed_nm']:g} nm of "
                          f"wire {cr['reference_row']}, V_bi >= {cr['fraction_min']:.0%} of V_bi0{miss})")
    console.print(f"[dim]{r['caution']}[/]")


def _clean(v):
    """JSON-ready: arrays to lists, NaN and infinities to null."""
    if isinstance(v, dict):
        return {k: _clean(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_clean(x) for x in v]
    if isinstance(v, np.ndarray):
        return _clean(v.tolist())
    if isinstance(v, (np.bool_, bool)):
        return bool(v)
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, (float, np.floating)):
        return float(v) if math.isfinite(v) else None
    return v


def _jsonable(r) -> dict:
    return _clean({k: v for k, v in r.items() if k != "samples"})


def write_png(results, path) -> None:
    from . import _png

    plt = _png.pyplot()
    r = results[0]
    P = len(r["unknowns"])
    fig, axes = plt.subplots(P, P, figsize=(2.4 * P + 1, 2.4 * P + 1), squeeze=False)
    for i in range(P):
        for j in range(P):
            ax = axes[i, j]
            if j > i:
                ax.axis("off")
                continue
            if i == j:
                ax.hist(_coord(r, i), bins=40, color="#1f9e8a")
                u = r["unknowns"][i]
                for q in u["ci68"]:
                    ax.axvline(math.log10(q) if u["log_scale"] else q, color="#444", lw=0.8, ls="--")
            else:
                ax.plot(_coord(r, j), _coord(r, i), ",", color="#5b8def", alpha=0.3)
            if i == P - 1:
                u = r["unknowns"][j]
                ax.set_xlabel(("log10 " if u["log_scale"] else "") + u["name"])
            if j == 0 and i > 0:
                u = r["unknowns"][i]
                ax.set_ylabel(("log10 " if u["log_scale"] else "") + u["name"])
    fig.suptitle("posterior (model-dependent estimate; confirm by independent measurement)", fontsize=9)
    _png.save(fig, path)


def cmd_calibrate(args, console, out) -> int:
    check_suffix(args.png, "--png", (".png",))
    if not args.unknown:
        raise _errors.UsageError("--unknown: give at least one, e.g. --unknown dit --unknown cnl")
    unknowns = {}
    for text in args.unknown:
        name, spec = parse_unknown(text)
        unknowns[name] = spec
    header, rows = read_table(args.observations)
    cols = {h: [row[k] for row in rows] for k, h in enumerate(header)}
    opts = dict(engine=args.engine, statistics=args.statistics, walkers=args.walkers, steps=args.steps, burn=args.burn,
                seed=args.seed, recheck=not args.no_recheck, reference_row=args.reference_row,
                fraction_min=args.fraction)
    for k in ("core_radius_nm", "shell_thickness_nm"):
        if k not in cols:
            raise _errors.UsageError(f"{args.observations}: needs a {k} column (the known design of each wire)")
    bar, update = progress_bar(console, f"{args.engine} table")
    with bar:
        if "series" in cols:
            results = radialpn.calibrate_many(cols, unknowns, by="series", progress=update, **opts)
        else:
            results = [radialpn.calibrate(cols, unknowns, progress=update, **opts)]
    if args.png:
        write_png(results, args.png)
    if args.json:
        payload = [_jsonable(r) for r in results]
        out.write(json.dumps(payload if "series" in cols else payload[0]) + "\n")
        return _errors.OK
    for r in results:
        _summary(r, console)
    if args.png:
        console.print(f"[dim]corner plot written to {args.png}[/]")
    return _errors.OK
