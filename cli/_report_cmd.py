"""`radialpn report`: the design-review sheet. One self-contained HTML page (inline SVG and
CSS, no script, no external asset) from ``radialpn.review``, and a PDF where matplotlib is
installed. The page only lays out what the API computed."""

from __future__ import annotations

import datetime
import math
from html import escape

import numpy as np
from rich.markup import escape as markup_escape

import radialpn

from . import _errors, _png
from . import _format as F
from . import _svg
from ._axes import SHORT_LABEL
from ._csvio import atomic_text, check_suffix
from ._designargs import add_design_flags, design_from_args, engine_flags, target_flags, target_from_args
from ._render import CAUTION, REGIME_STYLE

STYLE = """body{font-family:sans-serif;max-width:1100px;margin:24px auto;padding:0 16px;color:#222;line-height:1.4}
h1{font-size:22px;margin-bottom:4px}h2{font-size:17px;border-bottom:1px solid #ccc;padding-bottom:3px;margin-top:26px}
table{border-collapse:collapse;margin:6px 0}td,th{border:1px solid #ccc;padding:3px 8px;text-align:left}
td.num{text-align:right;font-variant-numeric:tabular-nums}.caution{background:#fff4d6;border:1px solid #e0a526;
padding:8px 12px}.note{color:#555;font-size:13px}.ok{color:#2d7f4f;font-weight:bold}.bad{color:#b8322e;
font-weight:bold}.flex{display:flex;gap:12px;flex-wrap:wrap}"""
SECTIONS = ("design", "answer", "bands", "map", "critical", "spread", "tunnelling", "caution")


def register(sub) -> None:
    rp = sub.add_parser("report", help="a design-review sheet for one wire (self-contained HTML, PDF)")
    add_design_flags(rp)
    engine_flags(rp)
    target_flags(rp)
    rp.add_argument("-o", "--output", metavar="FILE.html", help="where to write the HTML sheet")
    rp.add_argument("--pdf", metavar="FILE.pdf", help="also write a PDF (needs the plot extra: matplotlib)")
    rp.add_argument("--spread", action="append", default=[], metavar="NAME=SIZE[%][,uniform]",
                    help="run-to-run spreads of the yield section (default: illustrative ones, stated on the sheet)")
    rp.add_argument("--samples", type=int, default=20_000, help="growth runs of the yield section (default 20000)")
    rp.add_argument("--cells", default="24x12", metavar="WxH", help="regime-map cells (default 24x12)")
    rp.add_argument("--seed", type=int, default=0)
    rp.set_defaults(handler=cmd_report)


def cmd_report(args, console, out) -> int:
    from ._spread_cmd import _spreads

    if not args.output and not args.pdf:
        raise _errors.UsageError("report: name a file with -o wire.html (and/or --pdf wire.pdf)")
    check_suffix(args.output, "-o", (".html", ".htm"))
    check_suffix(args.pdf, "--pdf", (".pdf",))
    try:
        cells = tuple(int(v) for v in args.cells.lower().split("x"))
    except ValueError:
        raise _errors.UsageError(f"--cells: expected WIDTHxHEIGHT, e.g. 24x12 (got {args.cells!r})") from None
    spreads = _spreads(args.spread) if args.spread else None
    plt = _png.pyplot() if args.pdf else None  # fail before the work if matplotlib is missing
    design = design_from_args(args)
    try:
        with console.status("computing the review: answer, solver check, bands, map, critical dimensions, yield"):
            rv = radialpn.review(design, spreads, args.samples, cells, **target_from_args(args),
                                 engine=args.engine, statistics=args.statistics, seed=args.seed,
                                 ionisation=args.ionisation)
    except radialpn.DesignError:
        raise
    except radialpn.RadialpnError as exc:  # a valid design the reference solver gives no number: no sheet
        console.print(f"[bold #d9534f]no answer:[/] {markup_escape(str(exc))} (no review sheet written)")
        return _errors.NO_ANSWER
    if args.output:
        with atomic_text(args.output, "-o") as fh:
            fh.write(page(rv))
        console.print(f"wrote the review sheet to {args.output}", markup=False)
    if args.pdf:
        write_pdf(args.pdf, rv, plt)
        console.print(f"wrote the PDF to {args.pdf}", markup=False)
    console.print(f"[dim]{sum(rv['seconds'].values()):.1f} s of computation. {CAUTION}[/]")
    return _errors.OK



def _tunnel_section(rv) -> str:
    """The junction's peak field and band-to-band tunnelling estimate from the solver check."""
    tn = rv.get("tunnelling")
    if not tn:
        return ("<p class='note'>The reference solver gave no answer for this design, so there is no "
                "tunnelling estimate.</p>")
    risk = tn["at_risk"]
    verdict = ("<strong>At tunnelling risk</strong>: the estimate exceeds the threshold; an intrinsic interlayer "
               "(interlayer_nm) or lower dopings would lower the junction field." if risk else
               "Below the threshold: band-to-band tunnelling is not expected to short the junction.")
    return (f"<p>Peak junction field {tn['peak_field_V_per_cm']:.3g} V/cm; Kane WKB tunnelling estimate "
            f"10^{tn['tunnel_log10']:.1f} against the threshold 10^{tn['threshold_log10']:g} "
            f"(reference solver profile; docs/physics.md). {verdict}</p>")

def _table(rows, header=None, num=()) -> str:
    h = "<tr>" + "".join(f"<th>{escape(c)}</th>" for c in header) + "</tr>" if header else ""
    body = "".join("<tr>" + "".join(f'<td class="num">{c}</td>' if k in num else f"<td>{c}</td>"
                                    for k, c in enumerate(r)) + "</tr>" for r in rows)
    return f"<table>{h}{body}</table>"


def _design_rows(d):
    names = {"material": "material", "core_type": "core type"}
    rows = [[names.get(k, SHORT_LABEL.get(k, k)), escape(F.quantity(k, v) if isinstance(v, float) else str(v))]
            for k, v in d.items()]
    return rows


def _answer_section(rv):
    a, c = rv["answer"], rv["check"]
    if a["status"] != "ok":
        return f"<p class='bad'>no answer from the {escape(rv['engine'])} engine: {escape(a['status'])}</p>"
    rows = [["regime", f"{REGIME_STYLE[a['regime']][1]} {escape(a['regime'])} ({escape(REGIME_STYLE[a['regime']][2])})"]]
    if "regime_prob" in a:
        rows.append(["regime probability", F.probability(a["regime_prob"])])
    interval = (f" &nbsp; 95 % interval [{F.volts(a['vbi_low_V'], False)}, {F.volts(a['vbi_high_V'])}]"
                if "vbi_low_V" in a else "")
    rows += [["built-in potential V_bi", f"<b>{F.volts(a['vbi_V'])}</b>{interval}"],
             ["bulk V_bi0", F.volts(a["vbi0_V"])], ["kept of V_bi0", F.percent(a["vbi_V"] / a["vbi0_V"])]]
    if math.isfinite(a.get("vbi_gp_V", math.nan)):
        rows.append(["second opinion (Gaussian process)", F.volts(a["vbi_gp_V"])])
    rows += [["core neutral radius", f"{F.nm(a['core_neutral_radius_nm'])} of {F.nm(rv['design']['core_radius_nm'])}"],
             ["shell neutral thickness", f"{F.nm(a['shell_neutral_nm'])} of {F.nm(rv['design']['shell_thickness_nm'])}"],
             ["surface band bending", F.volts(a["surface_bending_V"])]]
    if c["status"] == "ok":
        verdict = ("<span class='ok'>same regime</span>" if c["same_regime"] else "<span class='bad'>REGIME DIFFERS</span>")
        inside = {True: ", inside the interval", False: ", <span class='bad'>outside the interval</span>",
                  None: ""}[c["inside_interval"]]
        rows.append(["the reference solver's check", f"{escape(c['regime'])}, V_bi {F.volts(c['vbi_V'])} in "
                     f"{F.milliseconds(c['seconds'])}: {verdict}, difference {F.millivolts(c['difference_mV'])}{inside}"])
    else:
        rows.append(["the reference solver's check", f"no answer: {escape(c['status'])}"])
    return _table(rows)


def _bands_section(rv):
    p, q = rv["profile"], rv["profile_depletion"]
    series = [(p["r_nm"], p["ec_eV"], "#2f7fc1", "", "E_c (solver)"), (p["r_nm"], p["ev_eV"], "#c8602f", "", "E_v (solver)")]
    if q is not None:
        series += [(q["r_nm"], q["ec_eV"], "#2f7fc1", "4 3", "E_c (depletion approx.)"),
                   (q["r_nm"], q["ev_eV"], "#c8602f", "4 3", "E_v (depletion approx.)")]
    R = float(p["outer_radius_nm"])
    series.append(([0.0, R], [0.0, 0.0], "#888888", "2 3", "E_F"))
    svg = _svg.line_plot(series, "radius r [nm], axis → surface", "energy [eV], E_F = 0", "band diagram",
                         xlim=(0.0, R), bands=((0.0, p["core_radius_nm"], "#5b8def"), (p["core_radius_nm"], R, "#e8803a")))
    extra = (f"; depletion approximation: {escape(q['regime'])}, V_bi {F.volts(q['vbi_V'])}" if q is not None
             else "; the depletion approximation has no bands for this design")
    return (svg + f"<p class='note'>Reference solver: {escape(p['regime'])}, V_bi {F.volts(p['vbi_V'])}{extra}. "
            "Core shaded blue, shell orange.</p>")


def _map_section(rv):
    m = rv["map"]
    ny, nx = m["regime"].shape
    counts = {r: int((m["regime"] == r).sum()) for r in REGIME_STYLE}
    share = ", ".join(f"{r} {F.percent(n / m['regime'].size)}" for r, n in counts.items() if n)
    return (f"<div class='flex'>{_svg.grid_map(m, 'regime', 'regime map')}{_svg.grid_map(m, 'vbi', 'V_bi map')}</div>"
            f"<p class='note'>{nx}×{ny} designs by the {escape(m['engine'])} engine over core radius "
            f"{F.nm(m['x_values'][0])}–{F.nm(m['x_values'][-1])} and shell thickness {F.nm(m['y_values'][0])}–"
            f"{F.nm(m['y_values'][-1])} (log axes), the rest of the design fixed; ◆ the design. Cells: {share}.</p>")


def _critical_section(rv):
    crit, rows, why = rv["critical"], [], []
    for col, label in (("core_radius_nm", "smallest core radius"), ("shell_thickness_nm", "thinnest shell")):
        r = crit[col]
        if not math.isfinite(r["value_nm"]):
            rows.append([label, "none", "", "", ""])
            why.append(f"<li>{label}: {escape(r['reason'])}</li>")
            continue
        check = {True: "<span class='ok'>✓ confirmed</span>", False: "<span class='bad'>✗ not confirmed</span>",
                 None: "not checked"}[r["confirmed"]]
        rng = F.nm_range(r["optimistic_nm"], r["conservative_nm"]) if math.isfinite(r["optimistic_nm"]) else "no interval"
        rows.append([label, f"<b>{F.nm(r['value_nm'])}</b>", rng, escape(r["regime"]), check])
        if r["reason"]:
            why.append(f"<li>{label}: {escape(r['reason'])}</li>")
    step = crit["confirm_step_nm"]
    return (f"<p>Target: {escape(rv['target'])}.</p>"
            + _table(rows, ["dimension", "critical", "interval range", "regime there", f"solver ±{step:g} nm"], num=(1,))
            + (f"<ul>{''.join(why)}</ul>" if why else "")
            + f"<p class='note'>✓: the reference solver meets the target {step:g} nm above the critical value and "
            f"misses it {step:g} nm below. Interval range: read from the two ends of the 95 % interval.</p>")


def _spread_section(rv):
    s = rv["spread"]
    if s["reason"]:
        return f"<p class='bad'>no yield: {escape(s['reason'])}</p>"
    kinds = []
    for col, (kind, size, rel) in s["spreads"].items():
        sz = f"{100 * size:g} %" if rel else f"{size:g} {col.rsplit('_', 1)[-1]}"
        kinds.append(f"{escape(SHORT_LABEL.get(col, col))}: {'±' if kind == 'uniform' else 'σ '}{sz}"
                     + (" (uniform)" if kind == "uniform" else ""))
    pct = s["vbi_percentiles_V"]
    rows = [[r, F.percent(p)] for r, p in s["regime_probability"].items()]
    sens = sorted(s["main_effects"].items(), key=lambda kv: -kv[1])
    srows = [[escape(SHORT_LABEL.get(c, c)), F.percent(e), f"{s['failing_mean_z'][c]:+.2f} σ"] for c, e in sens]
    goal_v = rv["target_vbi_V"]
    hist = _svg.histogram(s["vbi_V"], "V_bi over the growth runs", "V_bi [V]",
                          marker=(goal_v, f"target {F.volts(goal_v)} (nominal)") if math.isfinite(goal_v) else None)
    given = "given on the command line" if rv["spreads_given"] else ("illustrative defaults, not a measurement of "
                                                                     "your reactor: replace them with your own")
    return (f"<p><b>yield ({escape(s['target'])}): {F.percent(s['yield'])}</b> of {s['answered']:,} answered runs "
            f"out of {s['samples']:,} (seed {s['seed']}, {s['seconds']:.1f} s).</p>"
            f"<p class='note'>Spreads ({given}): {'; '.join(kinds)}. Relative spreads of radii, dopings and D_it act "
            "in log.</p>" + hist
            + f"<p>V_bi 5 / 25 / 50 / 75 / 95 %: {' / '.join(F.volts(v, False) for v in pct.values())} V</p>"
            + "<div class='flex'>" + _table(rows, ["regime", "probability"], num=(1,))
            + _table(srows, ["variable", "share of yield variance", "failing runs sit at"], num=(1, 2)) + "</div>"
            + "<p class='note'>Share: main-effect (first-order) share of the yield's variance (Saltelli et al., Global "
            "Sensitivity Analysis: The Primer, Wiley 2008, sec. 1.2.5). Failing runs: their mean deviation from "
            "nominal in spreads.</p>")


def page(rv) -> str:
    """The review sheet as one HTML document."""
    d = rv["design"]
    shell = "n" if d["core_type"] == "p" else "p"
    title = (f"{d['material']} {d['core_type']}-core/{shell}-shell wire: core {F.nm(d['core_radius_nm'])}, "
             f"shell {F.nm(d['shell_thickness_nm'])}")
    cnl = d.get("cnl_eV", radialpn.get_material(d["material"]).cnl_eV)
    parts = {
        "design": ("The design", _table(_design_rows({**d, "cnl_eV": cnl}))),
        "answer": ("Regime and built-in potential", _answer_section(rv)),
        "bands": ("Band diagram", _bands_section(rv)),
        "map": ("Regime map around the design", _map_section(rv)),
        "critical": ("Critical dimensions", _critical_section(rv)),
        "spread": ("Growth-spread yield and its sensitivity", _spread_section(rv)),
        "tunnelling": ("Tunnelling indicator", _tunnel_section(rv)),
        "caution": ("Before you grow", f"<p class='caution'>{escape(CAUTION)} These are design estimates from the "
                    f"{escape(rv['engine'])} engine ({escape(rv['statistics'])} statistics) and the reference solver; "
                    "confirm them by measurement (e.g. electron-beam-induced current or Kelvin-probe maps of "
                    "cross-sections) first.</p>"),
    }
    when = datetime.datetime.now().astimezone().strftime("%Y-%m-%d %H:%M %Z")
    body = "".join(f"<section id='{k}'><h2>{t}</h2>{html}</section>" for k, (t, html) in parts.items())
    return ("<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>"
            f"<title>radialpn review: {escape(title)}</title><style>{STYLE}</style></head><body>"
            f"<h1>Design review: {escape(title)}</h1><p class='note'>radialpn {radialpn.__version__} · "
            f"{escape(rv['engine'])} engine · {when} · {sum(rv['seconds'].values()):.1f} s of computation</p>"
            f"{body}</body></html>\n")


def write_pdf(path, rv, plt) -> None:
    """The sheet's figures and numbers as a PDF (matplotlib's PdfPages)."""
    from matplotlib.backends.backend_pdf import PdfPages

    from ._map_cmd import map_figure

    a, c, s, crit = rv["answer"], rv["check"], rv["spread"], rv["critical"]
    lines = [f"Design review (radialpn {radialpn.__version__}, {rv['engine']} engine)", ""]
    lines += [f"{k}: {v}" for k, v in rv["design"].items()]
    if a["status"] == "ok":
        lines += ["", f"regime {a['regime']}, V_bi {F.volts(a['vbi_V'])}"
                  + (f" [{F.volts(a['vbi_low_V'], False)}, {F.volts(a['vbi_high_V'])}]" if "vbi_low_V" in a else ""),
                  f"solver check: {c['regime']}, V_bi {F.volts(c['vbi_V'])}, difference {F.millivolts(c['difference_mV'])}"]
    for col in ("core_radius_nm", "shell_thickness_nm"):
        r = crit[col]
        lines.append(f"critical {col}: {F.nm(r['value_nm'])}" if math.isfinite(r["value_nm"]) else
                     f"critical {col}: none ({r['reason']})")
    lines += ["", f"yield ({s['target']}): {F.percent(s['yield'])} of {s['answered']:,} runs", "", CAUTION]
    try:
        with PdfPages(path) as pdf:
            fig = plt.figure(figsize=(8.27, 11.69))
            fig.text(0.06, 0.95, "\n".join(lines), va="top", family="monospace", fontsize=8, wrap=True)
            pdf.savefig(fig)
            plt.close(fig)
            fig, ax = plt.subplots(figsize=(8, 4.5))
            p = rv["profile"]
            ax.plot(p["r_nm"], p["ec_eV"], label="E_c")
            ax.plot(p["r_nm"], p["ev_eV"], label="E_v")
            ax.axhline(0, ls="--", color="0.5", label="E_F")
            ax.set_xlabel("radius r [nm]")
            ax.set_ylabel("energy [eV] (E_F = 0)")
            ax.legend()
            pdf.savefig(fig)
            plt.close(fig)
            fig = map_figure(plt, rv["map"], rv["engine"])
            pdf.savefig(fig)
            plt.close(fig)
            fig, ax = plt.subplots(figsize=(8, 3.5))
            ax.hist(np.asarray(s["vbi_V"]), bins=40, color="#1f9e8a")
            ax.set_xlabel("V_bi [V] over the growth runs")
            ax.set_ylabel("runs")
            pdf.savefig(fig)
            plt.close(fig)
    except OSError as exc:
        raise _errors.UsageError(f"--pdf {path}: cannot write ({exc.strerror})") from None
