"""radialpn's terminal front end. ``main(argv, console, out)`` runs one command and returns
its exit code; ``console`` (rich) receives human-readable output and ``out`` machine-readable
output (JSON, CSV), so tests can render both to strings."""

from __future__ import annotations

import argparse
import os
import sys

from . import _errors

__all__ = ["main", "build_parser"]


class _Parser(argparse.ArgumentParser):
    """argparse with one-line errors (no usage dump) that name the command's --help."""

    def error(self, message):
        raise _errors.UsageError(f"{message} (see `{self.prog} --help`)")


def build_parser() -> argparse.ArgumentParser:
    from surrogate._statistics import STATISTICS

    from ._designargs import add_design_flags
    from ._engines import DEFAULT_ENGINE, ENGINES

    p = _Parser(prog="radialpn", description="Depletion regime and built-in potential of core-shell "
                "(radial p-n) nanowires. Answers are design estimates, not measurements.")
    p.add_argument("--materials", metavar="FILE", action="append", default=[],
                   help="add materials from a TOML or JSON file (repeatable)")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    def engine_flags(sp):
        sp.add_argument("--engine", choices=sorted(ENGINES), default=DEFAULT_ENGINE, help="which engine answers")
        sp.add_argument("--statistics", choices=STATISTICS, default="fermi-dirac",
                        help="carrier statistics for the bulk Fermi levels (default fermi-dirac)")

    ask = sub.add_parser("ask", help="regime and built-in potential of one design")
    add_design_flags(ask)
    engine_flags(ask)
    ask.add_argument("--json", action="store_true", help="print one JSON row (design-table columns)")
    ask.add_argument("--verify", action="store_true", help="also run the reference solver and compare")

    batch = sub.add_parser("batch", help="answer every row of a CSV design table")
    batch.add_argument("input", metavar="IN.csv", help="CSV with design-table columns (extra columns kept)")
    batch.add_argument("-o", "--output", metavar="OUT.csv", help="where to write (default: standard output)")
    engine_flags(batch)
    batch.add_argument("--second-opinion", action="store_true",
                       help="surrogate engine: add the Gaussian-process columns and flag disagreements (slower)")

    mats = sub.add_parser("materials", help="the material table with sources")
    mats.add_argument("--json", action="store_true", help="print JSON keyed by material name")
    mats.add_argument("--temperature", default="300", metavar="K", help="temperature (default 300 K)")

    prof = sub.add_parser("profile", help="band diagram of one design (E_c, E_v, E_F against radius)")
    add_design_flags(prof)
    prof.add_argument("--engine", choices=("solver", "depletion"), default="solver", help="which engine draws")
    prof.add_argument("--statistics", choices=STATISTICS, default="fermi-dirac", help="carrier statistics")
    prof.add_argument("--compare", action="store_true", help="overlay the depletion approximation's bands")
    prof.add_argument("--png", metavar="FILE", help="also write a PNG (needs the plot extra: matplotlib)")
    prof.add_argument("--json", action="store_true", help="print the profile arrays as JSON")
    prof.add_argument("--width", type=int, default=72, help="plot width in characters")
    prof.add_argument("--height", type=int, default=16, help="plot height in characters")

    ds = sub.add_parser("dataset", help="build a training set from a domain spec with the reference solver")
    ds.add_argument("spec", metavar="SPEC.toml", help="domain spec (see models/specs/)")
    ds.add_argument("-o", "--output", metavar="DIR", required=True, help="dataset directory (resumable)")
    ds.add_argument("--jobs", type=int, default=-1, help="worker processes (default: all cores)")
    ds.add_argument("--scheduler", metavar="ADDRESS", help="run on a Dask cluster, e.g. tcp://10.0.0.5:8786")

    mp = sub.add_parser("map", help="regimes and V_bi over two design variables, the rest fixed")
    add_design_flags(mp)
    engine_flags(mp)
    mp.add_argument("--x", required=True, metavar="NAME:LOW:HIGH", help="horizontal axis, e.g. shell-thickness:2nm:60nm")
    mp.add_argument("--y", required=True, metavar="NAME:LOW:HIGH", help="vertical axis, e.g. core-radius:10nm:150nm")
    mp.add_argument("--cells", default="32x16", metavar="WxH", help="grid size (default 32x16)")
    mp.add_argument("--csv", metavar="FILE", help="also write every grid point as CSV")
    mp.add_argument("--png", metavar="FILE", help="also write a PNG (plot extra)")
    mp.add_argument("--json", action="store_true", help="print the grid as JSON instead")

    def target_flags(sp):
        sp.add_argument("--fraction", type=float, default=0.9, help="target V_bi >= FRACTION * V_bi0 (default 0.9)")
        sp.add_argument("--vbi-min", metavar="V", help="target V_bi >= V instead, e.g. 0.8V")

    sz = sub.add_parser("size", help="smallest core and thinnest shell that keep V_bi above a target")
    add_design_flags(sz)
    engine_flags(sz)
    target_flags(sz)
    sz.add_argument("--sweep", metavar="NAME:LOW:HIGH", help="critical dimensions against a variable, e.g. dit:1e11:1e13")
    sz.add_argument("--points", type=int, default=9, help="points of the sweep (default 9)")
    sz.add_argument("--png", metavar="FILE", help="sweep plot as PNG (plot extra)")
    sz.add_argument("--no-confirm", action="store_true", help="skip the reference-solver checks")

    se = sub.add_parser("search", help="best design among many random candidates under a V_bi target")
    add_design_flags(se)
    engine_flags(se)
    target_flags(se)
    se.add_argument("--vary", action="append", default=[], metavar="NAME:LOW:HIGH", help="a free variable (repeatable)")
    se.add_argument("--minimize", choices=("total-radius", "core-radius", "shell-thickness"), default="total-radius")
    se.add_argument("--regime", action="append", choices=("both-neutral", "core-depleted", "shell-depleted",
                                                          "all-depleted"), help="also require this regime (repeatable)")
    se.add_argument("--candidates", type=int, default=1_000_000, help="random candidates (default 1e6)")
    se.add_argument("--top", type=int, default=5, help="winners to show and re-check with the solver")
    se.add_argument("--seed", type=int, default=0)

    sp = sub.add_parser("spread", help="growth tolerance: regimes, V_bi percentiles and yield under run-to-run spread")
    add_design_flags(sp)
    engine_flags(sp)
    target_flags(sp)
    sp.add_argument("--spread", action="append", default=[], metavar="NAME=SIZE[%][,uniform]",
                    help="a spread, e.g. shell-thickness=2nm (σ) or dit=50%%,uniform (repeatable)")
    sp.add_argument("--samples", type=int, default=100_000, help="Monte Carlo samples (default 100000)")
    sp.add_argument("--regime", action="append", choices=("both-neutral", "core-depleted", "shell-depleted",
                                                          "all-depleted"), help="yield also requires this regime")
    sp.add_argument("--seed", type=int, default=0)
    sp.add_argument("--json", action="store_true", help="print the summary as JSON")

    co = sub.add_parser("console", help="interactive what-if session (or --jsonl for programs)")
    add_design_flags(co)
    engine_flags(co)
    co.add_argument("--jsonl", action="store_true", help="read JSON commands per line, answer JSON per line")

    sub.add_parser("models", help="the installed surrogate bundles: domain and validated accuracy")
    val = sub.add_parser("validate", help="check a surrogate bundle against fresh reference-solver runs")
    val.add_argument("bundle", metavar="BUNDLE", help="bundle directory or name (see `radialpn models`)")
    val.add_argument("--rows", type=int, default=6000, help="fresh solver runs (default 6000; >= 5000 advised)")
    val.add_argument("--seed", type=int, default=777, help="seed of the fresh designs")
    val.add_argument("--no-write", action="store_true", help="do not store the report in the bundle and card")
    tr = sub.add_parser("train", help="build a surrogate bundle from a domain spec (dataset, fit, validation)")
    tr.add_argument("spec", metavar="SPEC.toml")
    tr.add_argument("--data", metavar="DIR", help="dataset directory (default: data/NAME; resumable)")
    tr.add_argument("-o", "--output", metavar="DIR", help="bundle directory (default: models/NAME)")
    tr.add_argument("--jobs", type=int, default=-1, help="worker processes for the solver")

    demo = sub.add_parser("demo", help="a walk through radialpn on an invented growth plan")
    demo.add_argument("--statistics", choices=STATISTICS, default="fermi-dirac", help=argparse.SUPPRESS)
    return p


def main(argv=None, console=None, out=None) -> int:
    """Run ``radialpn`` with ``argv`` (default: sys.argv[1:]); return the exit code."""
    from rich.console import Console

    import surrogate

    out = out if out is not None else sys.stdout
    err_console = Console(stderr=True, highlight=False) if console is None else console
    try:
        args = build_parser().parse_args(argv)
        for path in args.materials:
            for m in surrogate.load_material_file(path):
                surrogate.register_material(m)
        if args.command is None:
            build_parser().print_help(out)
            return _errors.OK
        if console is None:
            to_stdout_machine = args.command == "batch" and args.output in (None, "-")
            console = err_console if to_stdout_machine else Console(highlight=False)
        from . import (_commands, _console, _dataset_cmd, _demo, _map_cmd, _models_cmd, _profile_cmd, _size_cmd,
                       _spread_cmd)

        handler = {"ask": _commands.cmd_ask, "batch": _commands.cmd_batch, "materials": _commands.cmd_materials,
                   "profile": _profile_cmd.cmd_profile, "dataset": _dataset_cmd.cmd_dataset,
                   "models": _models_cmd.cmd_models, "validate": _models_cmd.cmd_validate,
                   "train": _models_cmd.cmd_train, "map": _map_cmd.cmd_map, "size": _size_cmd.cmd_size,
                   "search": _size_cmd.cmd_search, "spread": _spread_cmd.cmd_spread, "console": _console.cmd_console,
                   "demo": _demo.cmd_demo}[args.command]
        return handler(args, console, out)
    except _errors.UsageError as exc:
        err_console.print(f"radialpn: error: {exc}", markup=False, highlight=False, soft_wrap=True)
        return _errors.BAD_INPUT
    except surrogate.RadialpnError as exc:
        err_console.print(f"radialpn: error: {exc}", markup=False, highlight=False, soft_wrap=True)
        return _errors.BAD_INPUT
    except KeyboardInterrupt:
        err_console.print("radialpn: interrupted", markup=False)
        return _errors.INTERRUPTED
    except Exception as exc:  # a bug: one line, traceback only on request
        if os.environ.get("RADIALPN_DEBUG"):
            raise
        err_console.print(f"radialpn: internal error: {type(exc).__name__}: {exc} (set RADIALPN_DEBUG=1 for "
                          "the traceback, and please report it)", markup=False, highlight=False, soft_wrap=True)
        return _errors.INTERNAL
