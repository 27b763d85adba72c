"""`radialpn profile`: the band diagram of one design in the terminal (and as PNG)."""

from __future__ import annotations

import json

import numpy as np
from rich.markup import escape
from rich.panel import Panel
from rich.text import Text

import radialpn

from . import _errors, _png
from . import _format as F
from ._csvio import check_suffix
from ._designargs import add_design_flags, design_from_args, flag_hint, ionisation_flag
from ._plot import BrailleCanvas
from ._render import CAUTION, design_line, regime_text

STYLE = {"ec": "bold #4fa3e0", "ev": "bold #e07a4f", "ef": "#9a9a9a", "ec_da": "#2f6f9f", "ev_da": "#9f4f2f"}
REGION_GLYPH = {"core-neutral": ("█", "#5b8def"), "core-depleted": ("░", "#5b8def"), "interlayer": ("·", "#bbbbbb"),
                "shell-neutral": ("█", "#e8803a"), "shell-depleted": ("░", "#e8803a")}


def register(sub) -> None:
    prof = sub.add_parser("profile", help="band diagram of one design (E_c, E_v, E_F against radius)")
    add_design_flags(prof)
    prof.add_argument("--engine", choices=("solver", "depletion"), default="solver", help="which engine draws")
    prof.add_argument("--statistics", choices=radialpn.STATISTICS, default="fermi-dirac", help="carrier statistics")
    ionisation_flag(prof)
    prof.add_argument("--compare", action="store_true", help="overlay the depletion approximation's bands")
    prof.add_argument("--png", metavar="FILE", help="also write a PNG (needs the plot extra: matplotlib)")
    prof.add_argument("--json", action="store_true", help="print the profile arrays as JSON")
    prof.add_argument("--width", type=int, default=72, help="plot width in characters")
    prof.add_argument("--height", type=int, default=16, help="plot height in characters")
    prof.set_defaults(handler=cmd_profile)


def cmd_profile(args, console, out) -> int:
    check_suffix(args.png, "--png", (".png",))
    if not (10 <= args.width <= 400 and 4 <= args.height <= 200):
        raise _errors.UsageError(f"--width/--height: allowed ranges [10, 400] and [4, 200] characters "
                                 f"(got {args.width} and {args.height})")
    design = design_from_args(args)
    table = radialpn.normalize_designs({k: [v] for k, v in design.items()})
    if table.status[0] != "ok":
        raise _errors.UsageError(flag_hint(str(table.status[0])))
    try:
        main = radialpn.profile(design, args.engine, args.statistics, args.ionisation)
    except radialpn.DesignError:
        raise
    except radialpn.RadialpnError as exc:  # a valid design this engine gives no number: say why, as `ask` does
        console.print(f"[bold #d9534f]no answer:[/] {escape(str(exc))}")
        return _errors.NO_ANSWER
    other = None
    if args.compare:
        try:
            other = radialpn.profile(design, "depletion", args.statistics, args.ionisation)
        except radialpn.RadialpnError as exc:
            other = str(exc)
    if args.json:
        keep = {k: (v.tolist() if isinstance(v, np.ndarray) else v) for k, v in main.items()}
        out.write(json.dumps(keep) + "\n")
        return _errors.OK
    row = {"material": table.material[0], "core_type": "p" if table.p_core[0] else "n",
           **{k: float(v[0]) for k, v in table.values.items()}}
    if np.isnan(row["cnl_eV"]):
        row["cnl_eV"] = radialpn.get_material(row["material"]).cnl_eV
    console.print(Panel.fit(design_line(row), title=f"radialpn profile · {args.engine} · {args.statistics}",
                            border_style="#5b8def"))
    width = max(30, min(args.width, console.width - 12))
    curves = [(main["r_nm"], main["ec_eV"]), (main["r_nm"], main["ev_eV"])]
    if isinstance(other, dict):
        curves += [(other["r_nm"], other["ec_eV"]), (other["r_nm"], other["ev_eV"])]
    lo = min(float(np.min(c[1])) for c in curves + [(None, np.zeros(1))])
    hi = max(float(np.max(c[1])) for c in curves + [(None, np.zeros(1))])
    pad = 0.06 * (hi - lo)
    R = float(main["outer_radius_nm"])
    canvas = BrailleCanvas(width, args.height, (0.0, R), (lo - pad, hi + pad))
    canvas.line(np.array([0.0, R]), np.zeros(2), STYLE["ef"], dotted=True)
    if isinstance(other, dict):
        canvas.line(other["r_nm"], other["ec_eV"], STYLE["ec_da"], dotted=True)
        canvas.line(other["r_nm"], other["ev_eV"], STYLE["ev_da"], dotted=True)
    canvas.line(main["r_nm"], main["ec_eV"], STYLE["ec"])
    canvas.line(main["r_nm"], main["ev_eV"], STYLE["ev"])
    console.print(canvas.render(ylabel="energy [eV], E_F = 0", xlabel="r [nm], axis → surface"))
    strip = Text("  region ")
    for i in range(width):
        r = (i + 0.5) / width * R
        label = main["region"][min(np.searchsorted(main["r_nm"], r), len(main["region"]) - 1)]
        glyph, colour = REGION_GLYPH[str(label)]
        strip.append(glyph, style=colour)
    console.print(strip)
    legend = Text("  ")
    legend.append("━ E_c", style=STYLE["ec"]).append("   ").append("━ E_v", style=STYLE["ev"]).append("   ")
    legend.append("┄ E_F", style=STYLE["ef"]).append("   ")
    if isinstance(other, dict):
        legend.append("┄ depletion approx. E_c, E_v", style=STYLE["ec_da"]).append("   ")
    legend.append("█ neutral  ░ depleted  (core blue, shell orange)", style="dim")
    console.print(legend)
    summary = Text.assemble("  ", regime_text(main["regime"]), f"   V_bi {F.volts(main['vbi_V'])} ({args.engine})")
    if isinstance(other, dict):
        summary.append(f"   depletion approx.: {other['regime']}, V_bi {F.volts(other['vbi_V'])}, "
                       f"difference {F.millivolts(1e3 * (main['vbi_V'] - other['vbi_V']))}")
    elif isinstance(other, str):
        summary.append(f"   depletion approx.: no answer ({other})")
    console.print(summary)
    if args.png:
        _write_png(args.png, main, other if isinstance(other, dict) else None, args.engine)
        console.print(f"[dim]wrote {args.png}[/]")
    console.print(f"[dim]{CAUTION}[/]")
    return _errors.OK


def _write_png(path, main, other, engine):
    plt = _png.pyplot()
    fig, ax = plt.subplots(figsize=(7, 4.2), dpi=130)
    ax.plot(main["r_nm"], main["ec_eV"], color="#2f7fc1", lw=2, label=f"E_c ({engine})")
    ax.plot(main["r_nm"], main["ev_eV"], color="#c8602f", lw=2, label=f"E_v ({engine})")
    if other is not None:
        ax.plot(other["r_nm"], other["ec_eV"], color="#2f7fc1", lw=1, ls=":", label="E_c (depletion approx.)")
        ax.plot(other["r_nm"], other["ev_eV"], color="#c8602f", lw=1, ls=":", label="E_v (depletion approx.)")
    ax.axhline(0.0, color="0.5", lw=0.8, ls="--", label="E_F")
    a = main["core_radius_nm"]
    ax.axvspan(0, a, color="#5b8def", alpha=0.08, lw=0)
    ax.axvspan(main.get("interlayer_end_nm", a), main["outer_radius_nm"], color="#e8803a", alpha=0.08, lw=0)
    ax.axvline(a, color="0.3", lw=0.8)
    ax.set_xlabel("radius r [nm] (axis → surface)")
    ax.set_ylabel("energy [eV] (E_F = 0)")
    ax.set_title(f"{main['regime']}, V_bi = {main['vbi_V']:.3f} V (design estimate)", fontsize=10)
    ax.legend(fontsize=7, loc="best")
    _png.save(fig, path)
