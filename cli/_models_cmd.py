"""`radialpn models`, `radialpn validate`, `radialpn train`: the surrogate bundles."""

from __future__ import annotations

import json
from pathlib import Path

from rich.markup import escape
from rich.table import Table

import radialpn

from . import _errors
from ._csvio import atomic_text, check_target


def _bundle_path(name_or_path: str) -> Path:
    p = Path(name_or_path)
    if (p / "bundle.json").is_file():
        return p
    found = {name: path for name, _, _, path in radialpn.available()}
    if name_or_path in found:
        return found[name_or_path]
    raise _errors.UsageError(f"bundle: no bundle {name_or_path!r} (installed: {', '.join(found) or 'none'})")


def register(sub) -> None:
    mo = sub.add_parser("models", help="the installed surrogate bundles: domain and validated accuracy")
    mo.set_defaults(handler=cmd_models)
    val = sub.add_parser("validate", help="check a surrogate bundle against fresh reference-solver runs")
    val.add_argument("bundle", metavar="BUNDLE", help="bundle directory or name (see `radialpn models`)")
    val.add_argument("--rows", type=int, default=6000, help="fresh solver runs (default 6000; >= 5000 advised)")
    val.add_argument("--seed", type=int, default=None,
                     help="seed of the fresh designs (default: the seed of the bundle's own validation, so that "
                          "--rows as on its card reproduces the card's figures; any other seed draws an "
                          "independent set)")
    val.add_argument("-o", "--report", metavar="FILE.json",
                     help="also write the report as JSON (the shipped bundle and its card are never changed; "
                          "re-fit with `radialpn train`)")
    val.set_defaults(handler=cmd_validate)
    tr = sub.add_parser("train", help="build a surrogate bundle from a domain spec (dataset, fit, validation)")
    tr.add_argument("spec", metavar="SPEC.toml")
    tr.add_argument("--data", metavar="DIR", help="dataset directory (default: data/NAME; resumable)")
    tr.add_argument("-o", "--output", metavar="DIR", help="bundle directory (default: models/NAME)")
    tr.add_argument("--jobs", type=int, default=-1, help="worker processes for the solver")
    tr.add_argument("--recalibrate", action="store_true",
                    help="recompute only the interval quantiles of the existing bundle: solves the spec's calibration "
                         "split alone, keeps the fitted models, then validates again")
    tr.set_defaults(handler=cmd_train)


SHORT = {"core_radius_nm": "core [nm]", "shell_thickness_nm": "shell [nm]", "core_doping_cm3": "N core [cm⁻³]",
         "shell_doping_cm3": "N shell [cm⁻³]", "dit_cm2eV": "D_it [cm⁻²eV⁻¹]", "cnl_eV": "E_cnl [eV]",
         "temperature_K": "T [K]", "interlayer_nm": "interlayer [nm]"}


def cmd_models(args, console, out) -> int:
    rows = radialpn.available()
    if not rows:
        console.print("No surrogate bundles installed. Build one with `radialpn train models/specs/NAME.toml`.")
        return _errors.OK
    metas = {}
    for name, material, core_type, path in rows:
        try:
            metas[name] = (material, core_type, json.loads((path / "bundle.json").read_text(encoding="utf-8")))
        except (OSError, ValueError):
            metas[name] = (material, core_type, None)
    table = Table(title="Surrogate bundles: accuracy against fresh reference-solver runs", title_justify="left")
    for col in ("bundle", "wire", "statistics", "regime\naccuracy", "V_bi error [mV]\nmean / p99", "95 % interval\ncoverage"):
        table.add_column(escape(col), justify="left" if col in ("bundle", "wire", "statistics") else "right")
    for name, (material, core_type, meta) in metas.items():
        if meta is None:
            table.add_row(name, f"{material} {core_type}-core", "unreadable bundle.json", "", "", "")
            continue
        v = meta.get("validation") or {}
        table.add_row(name, f"{material} {core_type}-core", meta.get("statistics", ""),
                      f"{100 * v['regime_accuracy']:.2f} %" if v else "not validated",
                      f"{v['vbi_mean_mV']:.2f} / {v['vbi_p99_mV']:.2f}" if v else "",
                      f"{100 * v['interval_coverage']:.2f} %" if v else "")
    console.print(table)
    _coverage_table(metas, console)
    _domain_table([n for n, (_, _, m) in metas.items() if m is not None], metas, console)
    console.print("[dim]Validated rows per bundle and the method: CARD.md in each bundle directory. Answers are "
                  "design estimates, not measurements.[/]")
    return _errors.OK


def _domain_table(named, metas, console) -> None:
    """The trained domains: ranges every bundle shares on one line, then one row per bundle with
    the ranges that differ (a table with a column per bundle would not fit a terminal)."""
    cells = {k: [] for k in SHORT}
    for n in named:
        dom = metas[n][2].get("domain", {})
        for k in SHORT:
            d = dom.get(k)
            cells[k].append(f"{_q(k, d[0])}–{_q(k, d[1])}" if d else "—")
    shared = [k for k in SHORT if len(set(cells[k])) == 1 and cells[k] and cells[k][0] != "—"]
    varying = [k for k in SHORT if k not in shared and any(c != "—" for c in cells[k])]
    if shared:
        console.print("trained domain (designs outside get no answer), every bundle: "
                      + escape(", ".join(f"{SHORT[k]} {cells[k][0]}" for k in shared)))
    if varying:
        t = Table(title="trained domain, per bundle" if shared else "trained domain (designs outside get no answer)",
                  title_justify="left")
        t.add_column("bundle")
        for k in varying:
            t.add_column(escape(SHORT[k]), justify="right")
        for i, n in enumerate(named):
            t.add_row(n, *(cells[k][i] for k in varying))
        console.print(t)


REGIME_SHORT = {"both-neutral": "both\nneutral", "core-depleted": "core\ndepleted",
                "shell-depleted": "shell\ndepleted", "all-depleted": "all\ndepleted"}


def _coverage_table(metas, console) -> None:
    """95 % interval coverage per solver regime (and the bundle's material), mean width beside."""
    rows = [(n, m[2]["validation"]) for n, m in metas.items()
            if m[2] is not None and "coverage_by_regime" in (m[2].get("validation") or {})]
    if not rows:
        return
    t = Table(title=escape("95 % interval coverage by solver regime and material; mean width [mV]"),
              title_justify="left")
    t.add_column("bundle")
    for lab in (*REGIME_SHORT.values(), "material"):
        t.add_column(escape(lab), justify="right")

    def cell(x):
        return f"{100 * x['coverage']:.1f} %\n{x['mean_width_mV']:.1f}" if x and x["rows"] else "—"

    for name, v in rows:
        mat = next(iter(v["coverage_by_material"].items()))
        t.add_row(name, *(cell(v["coverage_by_regime"].get(r)) for r in REGIME_SHORT),
                  f"{mat[0]} {cell(mat[1])}")
    console.print(t)


def _q(col, x):
    from ._axes import fmt_value

    return fmt_value(col, x)


def cmd_validate(args, console, out) -> int:
    from radialpn.training import validate_bundle

    if args.rows < 100:
        raise _errors.UsageError(f"--rows: allowed range [100, 10000000] (got {args.rows})")
    if args.report:  # a path that cannot be written is refused before minutes of solver runs
        check_target(args.report, "-o/--report")
    path = _bundle_path(args.bundle)
    with console.status(f"solving {args.rows:,} fresh designs and comparing…"):
        v = validate_bundle(path, rows=args.rows, seed=args.seed, write=False)
    t = Table(title=f"{path.name}: {v['answered']:,} fresh solver runs (seed {v['seed']})", title_justify="left")
    t.add_column("metric")
    t.add_column("value", justify="right")
    for label, value in (
        ("regime accuracy", f"{v['regime_accuracy']:.4f}"),
        (f"  near a boundary ({v['near_boundary_rows']} rows)", f"{v['regime_accuracy_near_boundary']:.4f}"),
        ("V_bi mean error", f"{v['vbi_mean_mV']:.2f} mV"), ("V_bi 99th percentile", f"{v['vbi_p99_mV']:.2f} mV"),
        ("V_bi maximum", f"{v['vbi_max_mV']:.2f} mV"),
        (f"{v['interval_level']:.0%} interval coverage", f"{v['interval_coverage']:.4f}"),
        ("GP V_bi mean error / coverage", f"{v['gp_vbi_mean_mV']:.2f} mV / {v['gp_interval_coverage']:.4f}"),
        ("flagged for the solver", f"{v['flagged_rate']:.2%}"),
        *((("with --confirm: re-answered", f"{v['confirm_rate']:.2%}"),
           ("with --confirm: regime, V_bi mean/p99", f"{v['confirm_regime_accuracy']:.4f}, {v['confirm_vbi_mean_mV']:.2f}/"
                                                      f"{v['confirm_vbi_p99_mV']:.2f} mV"))
          if "confirm_rate" in v else ()),
    ):
        t.add_row(label, value)
    console.print(t)
    conf = Table(title="confusion (rows: solver, columns: surrogate)", title_justify="left")
    conf.add_column("")
    for lab in v["confusion"]["labels"]:
        conf.add_column(lab, justify="right")
    for lab, row in zip(v["confusion"]["labels"], v["confusion"]["rows_true_cols_pred"]):
        conf.add_row(lab, *map(str, row))
    console.print(conf)
    if args.report:
        with atomic_text(args.report, "-o/--report") as fh:
            fh.write(json.dumps(v, indent=1, sort_keys=True) + "\n")
        console.print(f"[dim]report written to {args.report}; the bundle itself is unchanged[/]")
    return _errors.OK


def cmd_train(args, console, out) -> int:
    from radialpn.training import load_spec, train_bundle

    spec = load_spec(args.spec)
    data = args.data or str(Path("data") / spec.name)
    dest = args.output or str(Path("models") / spec.name)
    if args.recalibrate:
        from radialpn.training import recalibrate

        if not (Path(dest) / "bundle.json").is_file():
            raise _errors.UsageError(f"--recalibrate: no bundle in {dest} (give it with -o DIR)")
        with console.status(f"solving the calibration split of {spec.name} and validating…"):
            report = recalibrate(args.spec, dest, n_jobs=args.jobs, log=lambda m: console.print(f"[dim]{escape(m)}[/]"))
        console.print(f"{dest}: coverage {report['interval_coverage']:.4f}, mean width "
                      f"{report['interval_mean_width_mV']:.2f} mV ({report['rows']:,} fresh solver runs); "
                      f"per regime: " + ", ".join(f"{r} {x['coverage']:.4f}" for r, x in
                                                  report["coverage_by_regime"].items() if x["rows"])
                      + f". Card: {dest}/CARD.md")
        return _errors.OK
    report = train_bundle(args.spec, data, dest, n_jobs=args.jobs, log=lambda m: console.print(f"[dim]{m}[/]"))
    console.print(f"{dest}: regime accuracy {report['regime_accuracy']:.4f}, V_bi mean {report['vbi_mean_mV']:.2f} mV, "
                  f"p99 {report['vbi_p99_mV']:.2f} mV, coverage {report['interval_coverage']:.4f} "
                  f"({report['rows']:,} fresh solver runs). Card: {dest}/CARD.md")
    return _errors.OK
