"""`radialpn demo`: an invented scenario walked through with the real commands on the bundled
default engine (the GaAs surrogates), critical answers re-checked by the reference solver.

Kestrel Bay Photonics (invented) plans GaAs p-core/n-shell nanowires for a near-infrared
photodetector array on its reactor "Heron". Every number shown is computed, none is stored."""

from __future__ import annotations

import argparse
import shlex

from rich.panel import Panel
from rich.rule import Rule
from rich.text import Text

from . import _errors

PLAN = ("--material GaAs --core-type p --core-radius 45nm --shell-thickness 30nm "
        "--core-doping 5e17 --shell-doping 2e18 --dit 5e12")
REVISED = (PLAN.replace("--core-doping 5e17", "--core-doping 2e18").replace("--core-radius 45nm", "--core-radius 60nm")
           .replace("--shell-thickness 30nm", "--shell-thickness 45nm"))
STEPS = (
    ("1 · Does the planned wire keep its built-in potential?",
     f"ask {PLAN} --verify",
     "The plan's core is fully depleted by the heavily doped shell: V_bi keeps under a third of the bulk value. "
     "The reference solver agrees."),
    ("2 · Where is the good region?",
     f"map {PLAN} --x core-doping:1e17:1e19 --y core-radius:20nm:150nm --cells 36x12",
     "Both regions stay neutral (■) only with a core doped well above the plan's 5e17 or much wider."),
    ("3 · With a 2e18 core (60 nm) and a 45 nm shell, how small and how thin may the wire be?",
     f"size {REVISED}",
     "The critical dimensions for keeping 90 % of V_bi0, each confirmed by the solver 0.5 nm either side: "
     "compare them with the planned sizes before choosing growth times."),
    ("4 · Will a real growth run of the revised design land there?",
     f"spread {REVISED} --spread core-radius=5% --spread shell-thickness=2nm --spread core-doping=25% "
     "--spread shell-doping=25% --spread dit=100%,uniform --samples 100000",
     "Run-to-run spread of Heron's recipes (the team's own estimates): the yield and what drives it. "
     "Next: `radialpn console` for what-ifs, `radialpn profile --compare` for the band diagram."),
)


def register(sub) -> None:
    import radialpn

    demo = sub.add_parser("demo", help="a walk through radialpn on an invented growth plan")
    demo.add_argument("--statistics", choices=radialpn.STATISTICS, default="fermi-dirac", help=argparse.SUPPRESS)
    demo.set_defaults(handler=cmd_demo)


def cmd_demo(args, console, out) -> int:
    from . import build_parser  # the same parser as the command line

    console.print(Panel(
        "[bold]Kestrel Bay Photonics[/] (an invented lab) is planning a run of GaAs core-shell nanowires on its "
        "reactor [italic]Heron[/]: p-type core, n-type shell, for a near-infrared photodetector array. The wires "
        "are bare after growth (surface states about 5e12 cm⁻²eV⁻¹). Before booking reactor time the team asks "
        "radialpn four questions, with the commands below.",
        title="radialpn demo", border_style="#5b8def"))
    parser = build_parser()
    for title, command, note in STEPS:
        console.print(Rule(title, style="#5b8def"))
        console.print(Text(f"$ radialpn {command}", style="dim"))
        sub = parser.parse_args(shlex.split(command))
        code = sub.handler(sub, console, out)
        if code != _errors.OK:
            return code
        console.print(Text(note, style="italic"))
    return _errors.OK

