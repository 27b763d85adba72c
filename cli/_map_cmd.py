"""`radialpn map`: regimes and V_bi over two design variables, in the terminal (and CSV/PNG)."""

from __future__ import annotations

import csv
import json
import math

import numpy as np
from rich.text import Text

import radialpn

from . import _errors, _png
from ._csvio import atomic_text, check_suffix
from ._axes import UNITS, axis_spec, fmt_value
from ._designargs import add_design_flags, design_from_args, engine_flags, progress_bar
from ._render import CAUTION, REGIME_STYLE, answered_by_text

#: V_bi colour scale (low -> high), eight steps of our own
SCALE = ("#2b1d3f", "#3b2f6b", "#33508f", "#1f7a99", "#1f9e8a", "#54b86a", "#a5cc4b", "#f0d83a")
NO_ANSWER = "#555555"
RISK = "bold #e0a526"  #: the tunnelling flag's colour (the flag glyph carries the meaning)
DIGITS = 10  #: the V_bi panel's levels, one digit each


def register(sub) -> None:
    mp = sub.add_parser("map", help="regimes and V_bi over two design variables, the rest fixed")
    add_design_flags(mp)
    engine_flags(mp)
    mp.add_argument("--x", required=True, metavar="NAME:LOW:HIGH", help="horizontal axis, e.g. shell-thickness:2nm:60nm "
                    "(radii, dopings and D_it on a log scale unless :linear is added)")
    mp.add_argument("--y", required=True, metavar="NAME:LOW:HIGH", help="vertical axis, e.g. core-radius:10nm:150nm")
    mp.add_argument("--cells", default="32x16", metavar="WxH", help="grid size (default 32x16)")
    mp.add_argument("--csv", metavar="FILE", help="also write every grid point as CSV")
    mp.add_argument("--png", metavar="FILE", help="also write a PNG (plot extra)")
    mp.add_argument("--json", action="store_true", help="print the grid as JSON instead")
    mp.set_defaults(handler=cmd_map)


def _ticks(values, col, n):
    idx = np.unique(np.linspace(0, len(values) - 1, n).round().astype(int))
    return {int(i): fmt_value(col, values[i]) for i in idx}


def tick_row(positions: dict, width: int, indent: int):
    """(text, kept): tick labels centred under their columns; a label that would touch its
    left neighbour (less than one blank between) is dropped, so labels never run together."""
    labels = [" "] * (width + indent)
    end, kept = -2, []
    for col in sorted(positions):
        s = positions[col]
        start = max(0, min(indent + col - len(s) // 2, len(labels) - len(s)))
        if start <= end + 1:
            continue
        labels[start:start + len(s)] = list(s)
        end = start + len(s) - 1
        kept.append(col)
    return "".join(labels).rstrip(), kept


def _x_ticks(xs, col, span):
    """As many evenly spread x ticks as fit ``span`` characters with their labels apart."""
    longest = max(len(fmt_value(col, v)) for v in xs)
    n = max(2, min(8, span // (longest + 2) + 1, len(xs)))
    return _ticks(xs, col, n)


def vbi_levels(vbi):
    """(low, step) of the ten V_bi digits 0..9 over the finite values [V]."""
    finite = vbi[np.isfinite(vbi)]
    lo, hi = (float(finite.min()), float(finite.max())) if finite.size else (0.0, 1.0)
    return lo, max(hi - lo, 1e-9) / DIGITS


def render_map(console, xs, ys, xcol, ycol, regime, vbi, mark=None, tunnel=None, risk=None):
    """Two panels (regime, V_bi) with axes; ``regime``/``vbi`` shaped (len(ys), len(xs)).
    The regime panel carries a glyph per regime, the V_bi panel a digit 0-9 per tenth of the
    V_bi range (colour as well, never colour alone). Where the engine gave tunnelling
    estimates (``tunnel``, ``risk`` of the same shape), a third panel marks the cells at risk
    with a flag. Cells are two characters wide where the console has room, else one."""
    ny, nx = regime.shape
    cw = 2 if 2 * nx + 12 <= console.width else 1
    vlo, step = vbi_levels(vbi)
    yt = _ticks(ys, ycol, min(ny, 6))
    xt = _x_ticks(xs, xcol, cw * (nx - 1))
    xlabels, kept = tick_row({cw * i: s for i, s in xt.items()}, cw * nx + 2, 10)
    titles = ("regime", "V_bi")
    if tunnel is not None and np.isfinite(tunnel).any():
        titles += ("tunnelling risk",)
    for title in titles:
        console.print(Text(f"{title} over {xcol} × {ycol}" + ("   (◆ the design given)" if mark else ""), style="bold"))
        for j in range(ny - 1, -1, -1):
            line = Text(f"{yt.get(j, ''):>9} ", style="dim")
            for i in range(nx):
                here = mark is not None and mark == (j, i)
                pad = " " * (cw - 1)
                if title == "tunnelling risk":
                    known = math.isfinite(tunnel[j, i])
                    glyph, style = (("⚑", RISK) if risk[j, i] else ("○", "dim")) if known else ("·", NO_ANSWER)
                    line.append(("◆" if here else glyph) + pad, style=style)
                elif title == "regime":
                    r = regime[j, i]
                    style, glyph, _ = REGIME_STYLE.get(r, (NO_ANSWER, "·", ""))
                    line.append(("◆" if here else glyph) + pad, style=style)
                else:
                    v = vbi[j, i]
                    if not math.isfinite(v):
                        line.append("·" + pad, style=NO_ANSWER)
                        continue
                    k = min(int((v - vlo) / step), DIGITS - 1)
                    colour = SCALE[k * len(SCALE) // DIGITS]
                    line.append(("◆" if here else str(k)) + pad, style=f"bold {'black' if k >= 6 else 'white'} on {colour}")
            console.print(line)
        axis_line = [" "] * (cw * nx)
        for c in kept:
            axis_line[c] = "┴"
        console.print(Text("          " + "".join(axis_line).replace(" ", "─"), style="dim"))
        console.print(Text(xlabels, style="dim"))
        console.print(Text(f"          {xcol} [{UNITS.get(xcol, '')}] →   ↑ {ycol} [{UNITS.get(ycol, '')}]", style="dim"))
        if title == "regime":
            legend = Text("  ")
            for r, (style, glyph, _) in REGIME_STYLE.items():
                legend.append(f"{glyph} {r}  ", style=style)
            legend.append("· no answer", style=NO_ANSWER)
        elif title == "V_bi":
            legend = Text(f"  digit d: V_bi ≥ {vlo:.3f} + d×{step:.3f} V (9: up to {vlo + DIGITS * step:.3f} V)"
                          "  · no answer")
        else:
            legend = Text.assemble(("  ⚑ ", RISK), f"estimate above 10^{radialpn.TUNNEL_RISK_LOG10:g} (an interlayer "
                                   "lowers it)  ", ("○ ", "dim"), "below  ", ("· ", NO_ANSWER),
                                   "no estimate (the surrogate gives none) or no answer")
        console.print(legend)


def cmd_map(args, console, out) -> int:
    check_suffix(args.png, "--png", (".png",))
    check_suffix(args.csv, "--csv", (".csv", ".txt"))
    x, y = axis_spec(args.x, "--x", scaled=True), axis_spec(args.y, "--y", scaled=True)
    try:
        cells = tuple(int(v) for v in args.cells.lower().split("x"))
    except ValueError:
        raise _errors.UsageError(f"--cells: expected WIDTHxHEIGHT, e.g. 32x16 (got {args.cells!r})") from None
    bar, update = progress_bar(console, f"{args.engine} engine")
    with bar:
        m = radialpn.regime_map(design_from_args(args), x, y, cells, args.engine, args.statistics, progress=update,
                                ionisation=args.ionisation)
    xs, ys, xcol, ycol = m["x_values"], m["y_values"], m["x_column"], m["y_column"]
    regime, vbi, res = m["regime"], m["vbi_V"], m["answers"]
    nx, ny = xs.size, ys.size
    if args.csv:
        _write_csv(args.csv, m["designs"], res)
    if args.png:
        _write_png(args.png, m, args.engine)
    if args.json:
        out.write(json.dumps({"x": {"column": xcol, "values": xs.tolist(), "log": m["x_log"]},
                              "y": {"column": ycol, "values": ys.tolist(), "log": m["y_log"]},
                              "regime": regime.tolist(), "vbi_V": [[None if not math.isfinite(v) else v for v in row]
                                                                   for row in vbi],
                              "mark": list(m["mark"]) if m["mark"] is not None else None, "engine": args.engine,
                              "answered_by": m["answered_by"],
                              "tunnel_log10": [[None if not math.isfinite(v) else v for v in row]
                                               for row in m["tunnel_log10"]],
                              "tunnel_risk": m["tunnel_risk"].tolist(), "caution": CAUTION}, allow_nan=False) + "\n")
        return _errors.OK
    render_map(console, xs, ys, xcol, ycol, regime, vbi, m["mark"], m["tunnel_log10"], m["tunnel_risk"])
    bad = int((res["status"] != "ok").sum())
    note = f" · {bad} cells without answer ({res['status'][res['status'] != 'ok'][0]})" if bad else ""
    by = answered_by_text(m["answered_by"], "cells")
    console.print(f"[dim]{nx}×{ny} designs by the {args.engine} engine{', ' + by if by else ''}{note}. {CAUTION}[/]")
    at_risk = int(m["tunnel_risk"].sum())
    if at_risk:
        console.print(f"[dim]⚑ {at_risk} cells at tunnelling risk: an intrinsic interlayer (an axis: "
                      "interlayer:0nm:20nm) lowers the junction's peak field.[/]")
    for path, what in ((args.csv, "CSV"), (args.png, "PNG")):
        if path:
            console.print(f"[dim]wrote {what} to {path}[/]")
    return _errors.OK




def _write_csv(path, designs, res):
    n = len(res["status"])
    cols = {k: np.broadcast_to(np.asarray(v, dtype=object if isinstance(v, str) else None), (n,))
            for k, v in designs.items()}
    keys = list(cols) + [k for k in res if k not in cols]
    with atomic_text(path, "--csv") as fh:
        w = csv.writer(fh, lineterminator="\r\n")  # RFC 4180
        w.writerow(keys)
        for i in range(n):
            w.writerow([_cell(cols[k][i] if k in cols else res[k][i]) for k in keys])


def _cell(x):
    if isinstance(x, (bool, np.bool_)):
        return "true" if x else "false"
    if isinstance(x, (float, np.floating)):
        return "" if math.isnan(x) else repr(float(x))
    return str(x)


def map_figure(plt, m, engine, design_mark=True):
    """The map as a matplotlib figure: regime panel with its boundaries, V_bi panel with a
    colour scale in volts, log ticks on log axes, the design point marked."""
    from matplotlib.colors import ListedColormap

    xs, ys, xcol, ycol = m["x_values"], m["y_values"], m["x_column"], m["y_column"]
    codes = {r: i for i, r in enumerate(REGIME_STYLE)}
    rc = np.array([[codes.get(r, np.nan) for r in row] for row in m["regime"]], dtype=float)
    fig, axes = plt.subplots(1, 2, figsize=(11, 4.4), dpi=120)
    colours = [REGIME_STYLE[r][0].split()[-1] for r in REGIME_STYLE]
    axes[0].pcolormesh(xs, ys, rc, cmap=ListedColormap(colours), vmin=-0.5, vmax=3.5, shading="nearest")
    axes[0].set_title("regime")
    handles = [plt.Rectangle((0, 0), 1, 1, color=c) for c in colours]
    axes[0].legend(handles, list(REGIME_STYLE), fontsize=7, loc="best", framealpha=0.85)
    mesh = axes[1].pcolormesh(xs, ys, m["vbi_V"], cmap=ListedColormap(SCALE), shading="nearest")
    fig.colorbar(mesh, ax=axes[1], label="built-in potential V_bi [V]")
    axes[1].set_title(f"V_bi ({engine} engine; design estimate)")
    from matplotlib.collections import LineCollection

    xe, ye = _edges(xs, m["x_log"]), _edges(ys, m["y_log"])
    for a in axes:
        a.add_collection(LineCollection(_boundaries(m["regime"], xe, ye), colors="black", linewidths=1.0))
        a.set_xlim(xe[0], xe[-1])
        a.set_ylim(ye[0], ye[-1])
        a.set_xlabel(f"{xcol} [{UNITS.get(xcol, '')}]")
        a.set_ylabel(f"{ycol} [{UNITS.get(ycol, '')}]")
        for log, values, axis, set_scale in ((m["x_log"], xs, a.xaxis, a.set_xscale),
                                             (m["y_log"], ys, a.yaxis, a.set_yscale)):
            if log:
                _log_axis(axis, set_scale, values)
        if design_mark and m["mark"] is not None:
            j, i = m["mark"]
            a.plot([xs[i]], [ys[j]], marker="D", ms=8, mfc="white", mec="black", ls="none", label="design")
    axes[1].legend(loc="best", fontsize=7) if m["mark"] is not None else None
    return fig


def _edges(values, log):
    """Cell edges around grid points (geometric midpoints on a log axis)."""
    v = np.log(values) if log else np.asarray(values, dtype=float)
    mid = 0.5 * (v[1:] + v[:-1])
    e = np.concatenate([[v[0] - (mid[0] - v[0])], mid, [v[-1] + (v[-1] - mid[-1])]])
    return np.exp(e) if log else e


def _boundaries(regime, xe, ye):
    """Line segments along every cell edge where the regime changes."""
    segs = []
    ny, nx = regime.shape
    for j in range(ny):
        for i in range(nx):
            if i + 1 < nx and regime[j, i] != regime[j, i + 1]:
                segs.append([(xe[i + 1], ye[j]), (xe[i + 1], ye[j + 1])])
            if j + 1 < ny and regime[j, i] != regime[j + 1, i]:
                segs.append([(xe[i], ye[j + 1]), (xe[i + 1], ye[j + 1])])
    return segs


def _log_axis(axis, set_scale, values):
    """A log axis with labelled ticks: powers of ten over wide ranges, 1-2-5 steps in plain
    numbers over less than two decades (so a 20-150 nm axis reads 20, 50, 100)."""
    from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

    set_scale("log")
    if values[-1] / values[0] < 100:
        axis.set_major_locator(LogLocator(base=10, subs=(1.0, 2.0, 5.0)))
        axis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
        axis.set_minor_formatter(NullFormatter())


def _write_png(path, m, engine):
    plt = _png.pyplot()
    _png.save(map_figure(plt, m, engine), path)
