"""`radialpn demo`: an invented scenario walked through on the bundled default engine.

Kestrel Bay Photonics (invented) plans GaAs p-core/n-shell nanowires for a near-infrared
photodetector array on its reactor "Heron". Every number below is computed, none is stored."""

from __future__ import annotations

import numpy as np
from rich.panel import Panel
from rich.rule import Rule
from rich.table import Table
from rich.text import Text

import surrogate

from . import _errors
from ._render import CAUTION, answer_table, design_line, regime_text

PLAN = dict(material="GaAs", core_type="p", core_radius_nm=45.0, shell_thickness_nm=30.0,
            core_doping_cm3=5e17, shell_doping_cm3=2e18, dit_cm2eV=5e12, temperature_K=300.0)
PASSIVATED_DIT = 3e11


def _one(design, statistics):
    out = surrogate.deplete({k: [v] for k, v in design.items()}, statistics)
    row = dict(design, cnl_eV=surrogate.get_material(design["material"]).cnl_eV)
    row.update({k: (v[0].item() if hasattr(v[0], "item") else v[0]) for k, v in out.items()})
    return row


def cmd_demo(args, console, out) -> int:
    stat = args.statistics
    console.print(Panel(
        "[bold]Kestrel Bay Photonics[/] (an invented lab) is planning a run of GaAs core-shell nanowires on its "
        "reactor [italic]Heron[/]: p-type core, n-type shell, for a near-infrared photodetector array. The wires "
        "are bare after growth (surface states about 5e12 cm⁻²eV⁻¹); a sulfide passivation step would bring "
        "that to about 3e11. Before booking reactor time the team asks radialpn three questions.",
        title="radialpn demo", border_style="#5b8def"))

    console.print(Rule("1 · Does the planned wire keep its built-in potential?", style="#5b8def"))
    row = _one(PLAN, stat)
    console.print(Text(design_line(row), style="dim"))
    console.print(f"[dim]$ radialpn ask --material GaAs --core-type p --core-radius 45nm --shell-thickness 30nm "
                  f"--core-doping 5e17 --shell-doping 2e18 --dit 5e12[/]")
    console.print(answer_table(row))

    console.print(Rule("2 · How thin may the shell be, bare and passivated?", style="#5b8def"))
    shells = np.array([4, 6, 8, 10, 12, 15, 20, 25, 30, 40], dtype=float)
    table = Table(title_justify="left", title="shell thickness sweep (core 45 nm)")
    table.add_column("shell [nm]", justify="right")
    for label in ("bare: regime", "V_bi [V]", "passivated: regime", "V_bi [V]"):
        table.add_column(label, justify="right" if "V_bi" in label else "left")
    runs = {}
    for dit in (PLAN["dit_cm2eV"], PASSIVATED_DIT):
        runs[dit] = surrogate.deplete({**PLAN, "dit_cm2eV": dit, "shell_thickness_nm": shells}, stat)
    for i, t in enumerate(shells):
        b, p = runs[PLAN["dit_cm2eV"]], runs[PASSIVATED_DIT]
        table.add_row(f"{t:g}", regime_text(b["regime"][i]), f"{b['vbi_V'][i]:.3f}",
                      regime_text(p["regime"][i]), f"{p['vbi_V'][i]:.3f}")
    console.print(table)
    fine = np.round(np.arange(2.0, 60.0, 0.1), 1)
    crit = {}
    for dit in (PLAN["dit_cm2eV"], PASSIVATED_DIT):
        res = surrogate.deplete({**PLAN, "dit_cm2eV": dit, "shell_thickness_nm": fine}, stat)
        keeps = res["shell_neutral_nm"] > 0
        crit[dit] = fine[np.argmax(keeps)] if keeps.any() else float("nan")
    console.print(f"Thinnest shell that keeps a neutral region (0.1 nm steps): bare [bold]{crit[PLAN['dit_cm2eV']]:g} nm[/], "
                  f"passivated [bold]{crit[PASSIVATED_DIT]:g} nm[/].")

    console.print(Rule("3 · How small may the core be?", style="#5b8def"))
    cores = np.round(np.arange(5.0, 120.0, 0.5), 1)
    table = Table(title_justify="left", title="smallest core keeping a neutral region (shell 30 nm, bare)")
    table.add_column("core doping [cm⁻³]", justify="right")
    table.add_column("smallest core [nm]", justify="right")
    table.add_column("V_bi at 45 nm [V]", justify="right")
    for na in (2e17, 5e17, 1e18, 3e18):
        res = surrogate.deplete({**PLAN, "core_doping_cm3": na, "core_radius_nm": cores}, stat)
        keeps = res["core_neutral_radius_nm"] > 0
        at45 = _one({**PLAN, "core_doping_cm3": na}, stat)["vbi_V"]
        table.add_row(f"{na:.0e}", f"{cores[np.argmax(keeps)]:g}" if keeps.any() else "> 120", f"{at45:.3f}")
    console.print(table)
    console.print(f"[dim]Engine: depletion approximation ({stat} statistics). {CAUTION}[/]")
    return _errors.OK
