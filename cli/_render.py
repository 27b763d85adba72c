"""Rich rendering of design answers. Everything draws onto a console passed in, so tests can
render to a string."""

from __future__ import annotations

import math

from rich.table import Table
from rich.text import Text

from . import _format as F

#: regime -> (style, glyph, plain-words meaning)
REGIME_STYLE = {
    "both-neutral": ("bold #3aa876", "■", "core and shell both keep a neutral region"),
    "core-depleted": ("bold #e0a526", "◧", "the core is fully depleted, the shell keeps a neutral region"),
    "shell-depleted": ("bold #b46fd1", "◨", "the shell is fully depleted, the core keeps a neutral region"),
    "all-depleted": ("bold #d9534f", "□", "core and shell are both fully depleted"),
}
CAUTION = ("Design estimate, not a measurement: confirm the design with measurements on grown "
           "wires before committing a growth campaign.")


def answered_by_text(counts: dict, unit: str = "rows") -> str:
    """Which engine gave the numbers: "answered by the solver (28 cells), the surrogate (4 cells)"
    from the API's ``answered_by`` counts; "" when nothing was answered."""
    if not counts:
        return ""
    return "answered by " + ", ".join(f"the {name} engine ({n:,} {unit})" for name, n in counts.items())


def regime_text(regime: str) -> Text:
    style, glyph, _ = REGIME_STYLE.get(regime, ("bold", "?", ""))
    return Text(f"{glyph} {regime}", style=style)


def cross_section(row: dict, width: int = 48) -> Text:
    """A strip from the axis (left) to the surface (right): solid where neutral, light where
    depleted; core and shell in their own colours; '|' at the junction."""
    a = float(row["core_radius_nm"])
    R = a + float(row["shell_thickness_nm"])
    rp = float(row["core_neutral_radius_nm"])
    sn = float(row["shell_neutral_nm"])
    # the shell's neutral slab lies between the junction and surface depletions; place it from
    # the bending share (the front end does not know r_n, r_s separately; it shows thickness)
    junction_edge = row.get("junction_edge_nm")
    start = float(junction_edge) if junction_edge is not None else a + 0.5 * (R - a - sn)
    text = Text()
    for i in range(width):
        r = (i + 0.5) / width * R
        if r < a:
            text.append("█" if r < rp else "░", style="#5b8def")
        else:
            if abs(r - a) < 0.5 * R / width:
                text.append("|", style="bold white")
                continue
            text.append("█" if start <= r < start + sn else "░", style="#e8803a")
    return text


def answer_table(row: dict, verified: bool = False) -> Table:
    """The what-you-get table for one answered design. ``verified``: the reference solver has
    checked this answer (its line follows), so the uncertainty flag is not repeated."""
    t = Table(show_header=False, box=None, pad_edge=False)
    t.add_column(style="dim", no_wrap=True)
    t.add_column()
    regime = row["regime"]
    prob = f"  (probability {F.probability(row['regime_prob'])})" if "regime_prob" in row else ""
    t.add_row("regime", Text.assemble(regime_text(regime), prob, "  ", Text(REGIME_STYLE[regime][2], style="italic")))
    kept = row["vbi_V"] / row["vbi0_V"] if row["vbi0_V"] else float("nan")
    interval = (f"  95 % interval [{F.volts(row['vbi_low_V'], False)}, {F.volts(row['vbi_high_V'])}]"
                if "vbi_low_V" in row else "")
    t.add_row("built-in potential V_bi", Text.assemble((F.volts(row["vbi_V"]), "bold"), interval,
                                                       f"   ({F.percent(kept)} of the bulk V_bi0)"))
    if "vbi_gp_V" in row and row["vbi_gp_V"] == row["vbi_gp_V"]:
        t.add_row("second opinion (GP)", f"{F.volts(row['vbi_gp_V'])}  [{F.volts(row['vbi_gp_low_V'], False)}, "
                  f"{F.volts(row['vbi_gp_high_V'])}]")
    t.add_row("bulk V_bi0", F.volts(row["vbi0_V"]))
    if row.get("ionisation"):  # the dopant model the row was answered with (docs/physics.md 4.1)
        t.add_row("dopant ionisation", "incomplete (the bulk levels, so V_bi0, count ionised dopants only)"
                  if row["ionisation"] == "incomplete" else "full")
    t.add_row("core neutral radius", f"{F.nm(row['core_neutral_radius_nm'])} of {F.nm(row['core_radius_nm'])}")
    t.add_row("shell neutral thickness", f"{F.nm(row['shell_neutral_nm'])} of {F.nm(row['shell_thickness_nm'])}")
    t.add_row("surface band bending", F.volts(row["surface_bending_V"]))
    if row.get("tunnel_log10") is not None and math.isfinite(row["tunnel_log10"]):  # solver or depletion engine
        import radialpn

        risk = row["tunnel_log10"] > radialpn.TUNNEL_RISK_LOG10
        t.add_row("junction field", Text.assemble(f"{row['peak_field_V_per_cm']:.3g} V/cm peak, tunnelling "
                                                  f"estimate 10^{row['tunnel_log10']:.0f}",
                                                  ("  ⚑ tunnelling risk: consider an intrinsic interlayer" if risk
                                                   else "  (below the 1e-10 risk level)",
                                                   "bold #e0a526" if risk else "dim")))
    for core, shell, what in (("core_margin", "shell_margin", "neutral fraction"),
                              ("core_majority_ln", "shell_majority_ln", "ln(majority / half doping)")):
        if core in row:
            t.add_row("boundary margins", f"core {row[core]:+.3f}, shell {row[shell]:+.3f}  ({what}: >0 keeps a "
                      "neutral region, 0 is the regime boundary)")
    where = "axis → surface" if row.get("junction_edge_nm") is not None else "axis → surface (extents to scale, slab placed schematically)"
    t.add_row("cross-section", Text.assemble(cross_section(row), Text(f"  {where}", style="dim")))
    if "in_domain" in row:
        outside = "outside: answered by the reference solver" if row.get("engine") == "solver" else "OUTSIDE (no answer)"
        t.add_row("trained domain", "inside" if row["in_domain"] else outside)
    if row.get("confirm_with_solver"):
        t.add_row("", Text("⚑ uncertain here: the solver's check follows" if verified
                           else "⚑ uncertain here: confirm with --verify or --engine solver", style="bold #e0a526"))
    if "seconds" in row:
        warm = "" if row["engine"] == "solver" else " (warm)"
        t.add_row("answered in", f"{F.milliseconds(row['seconds'])}{warm} by the {row['engine']} engine")
    return t


def verify_line(row: dict, check: dict) -> Text:
    """One line comparing an answer with the reference solver's."""
    same = row["regime"] == check["regime"]
    text = Text("verify  ", style="bold")
    text.append(f"solver: {check['regime']}, V_bi {F.volts(check['vbi_V'])} in {F.milliseconds(check['seconds'])} · ")
    text.append("same regime" if same else "REGIME DIFFERS", style="#3aa876" if same else "bold #d9534f")
    text.append(f" · V_bi difference {F.millivolts(1e3 * (row['vbi_V'] - check['vbi_V']))}")
    if "vbi_low_V" in row:
        inside = row["vbi_low_V"] <= check["vbi_V"] <= row["vbi_high_V"]
        text.append(" (inside the interval)" if inside else " (outside the interval)")
    return text


def design_line(row: dict) -> str:
    shell = "n" if row["core_type"] == "p" else "p"
    return (f"{row['material']} {row['core_type']}-core/{shell}-shell · core {F.nm(row['core_radius_nm'])} "
            f"({F.density(row['core_doping_cm3'])} cm⁻³) · shell {F.nm(row['shell_thickness_nm'])} "
            f"({F.density(row['shell_doping_cm3'])} cm⁻³) · D_it {F.density(row['dit_cm2eV'])} cm⁻²eV⁻¹ · "
            f"E_cnl {F.volts(row['cnl_eV'], False)} eV · {row['temperature_K']:g} K")
