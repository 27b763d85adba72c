"""`radialpn map`: regimes and V_bi over two design variables, in the terminal (and CSV/PNG)."""

from __future__ import annotations

import csv
import json
import math

import numpy as np
from rich.text import Text

import radialpn

from . import _errors, _png
from ._csvio import atomic_text
from ._axes import UNITS, axis_spec, fmt_value
from ._designargs import add_design_flags, design_from_args, engine_flags, progress_bar
from ._render import CAUTION, REGIME_STYLE

#: V_bi colour scale (low -> high), eight steps of our own
SCALE = ("#2b1d3f", "#3b2f6b", "#33508f", "#1f7a99", "#1f9e8a", "#54b86a", "#a5cc4b", "#f0d83a")
NO_ANSWER = "#555555"


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


def render_map(console, xs, ys, xcol, ycol, regime, vbi, mark=None):
    """Two panels (regime, V_bi) with axes; ``regime``/``vbi`` shaped (len(ys), len(xs)).
    Cells are two characters wide where the console has room, else one."""
    ny, nx = regime.shape
    cw = 2 if 2 * nx + 12 <= console.width else 1
    finite = vbi[np.isfinite(vbi)]
    vlo, vhi = (float(finite.min()), float(finite.max())) if finite.size else (0.0, 1.0)
    vhi = vhi if vhi > vlo else vlo + 1e-9
    yt = _ticks(ys, ycol, min(ny, 6))
    xt = _ticks(xs, xcol, min(nx // 6 + 1, 6))
    for title in ("regime", "V_bi"):
        console.print(Text(f"{title} over {xcol} × {ycol}" + ("   (◆ the design given)" if mark else ""), style="bold"))
        for j in range(ny - 1, -1, -1):
            line = Text(f"{yt.get(j, ''):>9} ", style="dim")
            for i in range(nx):
                here = mark is not None and mark == (j, i)
                pad = " " * (cw - 1)
                if title == "regime":
                    r = regime[j, i]
                    style, glyph, _ = REGIME_STYLE.get(r, (NO_ANSWER, "·", ""))
                    line.append(("◆" if here else glyph) + pad, style=style)
                else:
                    v = vbi[j, i]
                    if not math.isfinite(v):
                        line.append("·" + pad, style=NO_ANSWER)
                        continue
                    k = min(int((v - vlo) / (vhi - vlo) * len(SCALE)), len(SCALE) - 1)
                    line.append(("◆" if here else " ") + pad, style=f"bold white on {SCALE[k]}")
            console.print(line)
        axis_line = [" "] * (cw * nx)
        labels = [" "] * (cw * nx + 12)
        for i, s in xt.items():
            axis_line[cw * i] = "┴"
            start = max(0, min(10 + cw * i - len(s) // 2, len(labels) - len(s)))
            labels[start:start + len(s)] = list(s)
        console.print(Text("          " + "".join(axis_line).replace(" ", "─"), style="dim"))
        console.print(Text("".join(labels).rstrip(), style="dim"))
        console.print(Text(f"          {xcol} [{UNITS.get(xcol, '')}] →   ↑ {ycol} [{UNITS.get(ycol, '')}]", style="dim"))
        if title == "regime":
            legend = Text("  ")
            for r, (style, glyph, _) in REGIME_STYLE.items():
                legend.append(f"{glyph} {r}   ", style=style)
            legend.append("· no answer", style=NO_ANSWER)
        else:
            legend = Text("  V_bi  ")
            for k, c in enumerate(SCALE):
                legend.append("  ", style=f"on {c}")
                if k in (0, len(SCALE) - 1):
                    legend.append(f" {vlo + (vhi - vlo) * k / (len(SCALE) - 1):.3f} V ")
            legend.append("   · no answer", style=NO_ANSWER)
        console.print(legend)


def cmd_map(args, console, out) -> int:
    x, y = axis_spec(args.x, "--x", scaled=True), axis_spec(args.y, "--y", scaled=True)
    try:
        cells = tuple(int(v) for v in args.cells.lower().split("x"))
    except ValueError:
        raise _errors.UsageError(f"--cells: expected WIDTHxHEIGHT, e.g. 32x16 (got {args.cells!r})") from None
    bar, update = progress_bar(console, f"{args.engine} engine")
    with bar:
        m = radialpn.regime_map(design_from_args(args), x, y, cells, args.engine, args.statistics, progress=update)
    xs, ys, xcol, ycol = m["x_values"], m["y_values"], m["x_column"], m["y_column"]
    regime, vbi, res = m["regime"], m["vbi_V"], m["answers"]
    nx, ny = xs.size, ys.size
    if args.csv:
        _write_csv(args.csv, m["designs"], res)
    if args.png:
        _write_png(args.png, xs, ys, xcol, ycol, regime, vbi, args.engine)
    if args.json:
        out.write(json.dumps({"x": {"column": xcol, "values": xs.tolist()}, "y": {"column": ycol, "values": ys.tolist()},
                              "regime": regime.tolist(), "vbi_V": [[None if not math.isfinite(v) else v for v in row]
                                                                   for row in vbi], "engine": args.engine}) + "\n")
        return _errors.OK
    render_map(console, xs, ys, xcol, ycol, regime, vbi, m["mark"])
    bad = int((res["status"] != "ok").sum())
    note = f" · {bad} cells without answer ({res['status'][res['status'] != 'ok'][0]})" if bad else ""
    console.print(f"[dim]{nx}×{ny} designs by the {args.engine} engine{note}. {CAUTION}[/]")
    for path, what in ((args.csv, "CSV"), (args.png, "PNG")):
        if path:
            console.print(f"[dim]wrote {what} to {path}[/]")
    return _errors.OK


_LOG = ("core_radius_nm", "shell_thickness_nm", "core_doping_cm3", "shell_doping_cm3", "dit_cm2eV")


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


def _write_png(path, xs, ys, xcol, ycol, regime, vbi, engine):
    plt = _png.pyplot()
    from matplotlib.colors import ListedColormap
    from matplotlib.ticker import NullFormatter, ScalarFormatter
    codes = {r: i for i, r in enumerate(REGIME_STYLE)}
    rc = np.array([[codes.get(r, np.nan) for r in row] for row in regime], dtype=float)
    fig, axes = plt.subplots(1, 2, figsize=(11, 4.4), dpi=120)
    cmap = ListedColormap([REGIME_STYLE[r][0].split()[-1] for r in REGIME_STYLE])
    axes[0].pcolormesh(xs, ys, rc, cmap=cmap, vmin=-0.5, vmax=3.5, shading="nearest")
    axes[0].set_title("regime")
    handles = [plt.Rectangle((0, 0), 1, 1, color=REGIME_STYLE[r][0].split()[-1]) for r in REGIME_STYLE]
    axes[0].legend(handles, list(REGIME_STYLE), fontsize=7, loc="best")
    m = axes[1].pcolormesh(xs, ys, vbi, cmap=ListedColormap(SCALE), shading="nearest")
    fig.colorbar(m, ax=axes[1], label="V_bi [V]")
    axes[1].set_title(f"built-in potential ({engine}; design estimate)")
    for a in axes:
        a.set_xlabel(f"{xcol} [{UNITS.get(xcol, '')}]")
        a.set_ylabel(f"{ycol} [{UNITS.get(ycol, '')}]")
        for use, which in ((xcol in _LOG, a.xaxis), (ycol in _LOG, a.yaxis)):
            if use:
                (a.set_xscale if which is a.xaxis else a.set_yscale)("log")
                which.set_minor_formatter(NullFormatter())
                which.set_major_formatter(ScalarFormatter())
    _png.save(fig, path)
