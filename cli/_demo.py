"""`radialpn demo`: an invented scenario walked through on the bundled default engine (the
GaAs surrogate bundles), with the reference solver confirming the critical answer.

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


def _answer(designs):
    """The bundled default engine: the surrogate (second opinion on for single rows)."""
    n = max((np.size(v) for v in designs.values() if np.ndim(v)), default=1)
    return surrogate.predict(designs, second_opinion=n == 1)


def _one(design, statistics=None):
    out = _answer({k: [v] for k, v in design.items()})
    row = dict(design, cnl_eV=surrogate.get_material(design["material"]).cnl_eV)
    row.update({k: (v[0].item() if hasattr(v[0], "item") else v[0]) for k, v in out.items()})
    return row


def cmd_demo(args, console, out) -> int:
    import time

    from training import solve

    console.print(Panel(
        "[bold]Kestrel Bay Photonics[/] (an invented lab) is planning a run of GaAs core-shell nanowires on its "
        "reactor [italic]Heron[/]: p-type core, n-type shell, for a near-infrared photodetector array. The wires "
        "are bare after growth (surface states about 5e12 cm⁻²eV⁻¹); a sulfide passivation step would bring "
        "that to about 3e11. Before booking reactor time the team asks radialpn three questions.",
        title="radialpn demo", border_style="#5b8def"))

    console.print(Rule("1 · Does the planned wire keep its built-in potential?", style="#5b8def"))
    surrogate.load("GaAs", "p")  # load and verify the bundle before timing the answer
    t = time.perf_counter()
    row = _one(PLAN)
    row["seconds"] = time.perf_counter() - t
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
        runs[dit] = _answer({**PLAN, "dit_cm2eV": dit, "shell_thickness_nm": shells})
    for i, t in enumerate(shells):
        b, p = runs[PLAN["dit_cm2eV"]], runs[PASSIVATED_DIT]
        table.add_row(f"{t:g}", regime_text(b["regime"][i]), f"{b['vbi_V'][i]:.3f}",
                      regime_text(p["regime"][i]), f"{p['vbi_V'][i]:.3f}")
    console.print(table)
    fine = np.round(np.arange(2.0, 60.0, 0.1), 1)
    crit = {}
    for dit in (PLAN["dit_cm2eV"], PASSIVATED_DIT):
        res = _answer({**PLAN, "dit_cm2eV": dit, "shell_thickness_nm": fine})
        keeps = np.isin(res["regime"], ("both-neutral", "core-depleted"))  # the shell keeps a neutral part
        crit[dit] = fine[np.argmax(keeps)] if keeps.any() else float("nan")
    line = "Thinnest shell that keeps a neutral region (surrogate, 0.1 nm steps): " + ", ".join(
        f"{label} [bold]{crit[d]:g} nm[/]" for label, d in (("bare", PLAN["dit_cm2eV"]), ("passivated", PASSIVATED_DIT)))
    console.print(line)
    check = solve({**PLAN, "dit_cm2eV": [d for d in crit for _ in (0, 1)],
                   "shell_thickness_nm": [crit[d] + dx for d in crit for dx in (-0.5, 0.5)]})
    shell_kept = np.isin(check["regime"], ("both-neutral", "core-depleted"))
    console.print("Reference solver 0.5 nm either side: " + ", ".join(
        f"{t:g} nm → {'keeps' if k else 'loses'} it" for t, k in zip([crit[d] + dx for d in crit for dx in (-0.5, 0.5)],
                                                                      shell_kept)))

    console.print(Rule("3 · How small may the core be?", style="#5b8def"))
    cores = np.round(np.arange(10.0, 120.0, 0.5), 1)
    table = Table(title_justify="left", title="smallest core keeping a neutral region (shell 30 nm, bare)")
    table.add_column("core doping [cm⁻³]", justify="right")
    table.add_column("smallest core [nm]", justify="right")
    table.add_column("V_bi at 45 nm [V]", justify="right")
    for na in (2e17, 5e17, 1e18, 3e18):
        res = _answer({**PLAN, "core_doping_cm3": na, "core_radius_nm": cores})
        keeps = np.isin(res["regime"], ("both-neutral", "shell-depleted"))  # the core keeps a neutral part
        at45 = _one({**PLAN, "core_doping_cm3": na})["vbi_V"]
        table.add_row(f"{na:.0e}", f"{cores[np.argmax(keeps)]:g}" if keeps.any() else "> 120", f"{at45:.3f}")
    console.print(table)
    console.print(f"[dim]Engine: GaAs surrogate bundles (Fermi-Dirac statistics; `radialpn models` shows their "
                  f"validated accuracy), critical answers re-checked by the reference solver. {CAUTION}[/]")
    return _errors.OK
