"""The model card of a bundle (Markdown), rendered from its metadata and validation report."""

from __future__ import annotations

import datetime

from .._ionisation import AUTO_BELOW_K, DEEP_EV
from .._model import CONFIRM_HALF_WIDTH_V, CONFIRM_PROB

TARGETS = {  # issue 5's targets, measured on fresh solver runs
    "regime_accuracy": (">=", 0.995), "vbi_mean_mV": ("<=", 3.0), "vbi_p99_mV": ("<=", 20.0),
    "interval_coverage": ("in", (0.94, 0.96)), "regime_coverage": ("in", (0.93, 0.97)),
}  # coverage: issue 11's 95 +/- 1 % overall and 95 +/- 2 % in every regime and material


def _meets(key, value):
    op, t = TARGETS[key]
    if value is None:
        return "—"
    ok = value >= t if op == ">=" else value <= t if op == "<=" else t[0] <= value <= t[1]
    return "met" if ok else "**missed**"


def render_card(meta: dict) -> str:
    v = meta.get("validation")
    offsets = meta.get("offsets", {})
    dom = "\n".join(f"| {k} | {lo:g} | {hi:g} | {meta['transforms'].get(k, 'linear')}"
                    + (f" (offset {offsets[k]:g})" if k in offsets else "") + " |"
                    for k, (lo, hi) in meta["domain"].items())
    fixed = ", ".join(f"{k} = {x:g}" for k, x in meta.get("fixed", {}).items()) or "none"
    lines = [
        f"# Model card: {meta['name']}",
        "",
        f"Surrogate of radialpn's reference Poisson solver for **{meta['material']} {meta['core_type']}-core** "
        f"radial p-n nanowires ({meta['statistics']} statistics): the depletion regime with its probability and "
        "the built-in potential V_bi with a 95 % interval, plus neutral extents and surface bending.",
        "",
        "**Answers are design estimates, not measurements.** Confirm a design with measurements on grown wires "
        "before committing a growth campaign to it; designs flagged `confirm_with_solver` should first be "
        "re-run with `--engine solver` (or `ask --verify`).",
        "",
        "## Intended use",
        "Screening, maps, critical dimensions and growth-tolerance studies inside the domain below, at the "
        "reactor or inside other pipelines (`import radialpn`, numpy only). Not for: designs outside the "
        "domain (the model refuses them), other materials or statistics, device currents.",
        "",
        "## Domain",
        "| variable | min | max | sampled as |", "| --- | --- | --- | --- |", dom, "",
        f"Fixed: {fixed}. Outside this box a row gets `in_domain = false`, a status and no numbers.",
        "",
        "## Data",
        f"- Training set: {meta['data']['training_rows']:,} solver runs (scrambled Sobol points in the "
        "transformed domain, then refinement rounds between near neighbours of different regimes); "
        f"calibration: {meta['data']['calibration_rows']:,} uniform runs of their own seed.",
        f"- Reference solver version {meta['solver_version']}; spec SHA-256 `{meta['spec_sha256'][:16]}…`; "
        f"features version {meta['features_version']}.",
        "",
        "## Models",
        f"- Regime: gradient-boosted classifier ({meta['models']['regime']}), probabilities temperature-scaled "
        f"(T = {meta['temperature']:.3f}) on the calibration set.",
        f"- V_bi: gradient-boosted regressor of the residual to the depletion approximation "
        f"({meta['models']['vbi']}){_smoothing_text(meta['conformal'])}; 95 % "
        f"split-conformal intervals normalised by a difficulty model, {_quantile_text(meta['conformal'])}.",
        f"- Second opinion: Gaussian process `{meta['models']['gp']['kernel']}` on a "
        f"{meta['models']['gp']['mean_points']}-point Sobol prefix (std from {meta['models']['gp']['std_points']} "
        f"points, float64), rescaled by its own conformal quantiles (pooled q = {meta['conformal']['q_gp']:.3f}).",
        "",
        *_group_table(meta["conformal"]),
    ]
    if v:
        conf = v["confusion"]
        lines += [
            "## Validation",
            f"{v['rows']:,} fresh solver runs drawn uniformly in the domain (seed {v['seed']}, never used in "
            f"fitting or calibration), {v['answered']:,} answered by both.",
            "",
            "| metric | value | target |", "| --- | --- | --- |",
            f"| regime accuracy | {v['regime_accuracy']:.4f} | >= 0.995 ({_meets('regime_accuracy', v['regime_accuracy'])}) |",
            f"| regime accuracy near a boundary ({v['near_boundary_rows']} rows, majority margin within a factor e) | "
            f"{v['regime_accuracy_near_boundary']:.4f} | — |",
            f"| V_bi mean error | {v['vbi_mean_mV']:.2f} mV | <= 3 mV ({_meets('vbi_mean_mV', v['vbi_mean_mV'])}) |",
            f"| V_bi 99th percentile error | {v['vbi_p99_mV']:.2f} mV | <= 20 mV ({_meets('vbi_p99_mV', v['vbi_p99_mV'])}) |",
            f"| V_bi maximum error | {v['vbi_max_mV']:.2f} mV | — |",
            f"| 95 % interval coverage | {v['interval_coverage']:.4f} | 0.94-0.96 "
            f"({_meets('interval_coverage', v['interval_coverage'])}) |",
            f"| mean interval width | {v['interval_mean_width_mV']:.2f} mV | — |",
            f"| GP V_bi mean / p99 error | {v['gp_vbi_mean_mV']:.2f} / {v['gp_vbi_p99_mV']:.2f} mV | — |",
            f"| GP interval coverage | {v['gp_interval_coverage']:.4f} | — |",
            f"| flagged for the solver (regime probability < {CONFIRM_PROB:g}, interval wider than "
            f"+-{CONFIRM_HALF_WIDTH_V * 1e3:.0f} mV or GP disagreement) | {v['flagged_rate']:.2%} | — |",
            *_confirm_rows(v),
            "",
            "Confusion matrix (rows: solver, columns: surrogate):",
            "",
            "| | " + " | ".join(conf["labels"]) + " |", "| --- " * (len(conf["labels"]) + 1) + "|",
            *[f"| {a} | " + " | ".join(str(x) for x in row) + " |" for a, row in zip(conf["labels"], conf["rows_true_cols_pred"])],
            "",
            "Where each model kind is better (mean V_bi error by solver regime):",
            "",
            "| regime | rows | trees | Gaussian process |", "| --- | --- | --- | --- |",
            *[f"| {r} | {x['rows']} | {x['gbm_mean_mV']:.2f} mV | {x['gp_mean_mV']:.2f} mV |"
              for r, x in v["by_regime"].items() if x["rows"]],
            "",
            *_coverage_tables(v),
            f"The flag earns its place: flagged rows have mean V_bi error {v['flagged_gbm_mean_mV'] or 0:.2f} mV and "
            f"regime accuracy {v['flagged_regime_accuracy'] or 0:.4f}; unflagged rows {v['unflagged_gbm_mean_mV']:.2f} mV "
            f"and {v['unflagged_regime_accuracy']:.4f}.",
            "",
        ]
    lines += [
        "## Limits",
        "- Physics of the reference solver: "
        + ("full ionisation" if meta.get("ionisation", "full") == "full" else
           f"dopant ionisation as `--ionisation auto` resolves it (incomplete below {AUTO_BELOW_K:g} K or for a "
           f"dopant {DEEP_EV:g} eV deep or deeper, where the material table gives dopant levels; else full); a "
           "design asked with another model is answered by the solver")
        + ", surface states uniform in energy about one neutral "
        "level, no fixed charge, no interlayer (fixed to 0), equilibrium (no light, no bias).",
        "- The regime is the solver's: a region keeps a neutral part where its majority-carrier density reaches half "
        "its doping. Near that boundary the answer is genuinely uncertain; read `regime_prob`.",
        "- Intervals hold on average over the domain and within each predicted regime (group-conditional "
        "coverage), not for every single design.",
        "",
        "## Rebuild",
        f"`radialpn train models/specs/{meta['name']}.toml` (dataset, fit, validation and this card; resumable).",
        "",
        f"Card written {datetime.date.today().isoformat()} by radialpn.",
        "",
    ]
    return "\n".join(lines)


def _quantile_text(conf: dict) -> str:
    if "groups" not in conf:
        return f"one quantile over the whole calibration split (q = {conf['q_gbm']:.3f})"
    return (f"one quantile per predicted regime (Mondrian conformal prediction; pooled q = {conf['q_gbm']:.3f} "
            f"for groups under {conf['min_group_rows']} calibration rows)")


def _group_table(conf: dict) -> list:
    if "groups" not in conf:
        return []
    return ["Conformal quantiles by predicted regime (calibration split):", "",
            "| predicted regime | calibration rows | q trees | q GP | |", "| --- | --- | --- | --- | --- |",
            *[f"| {r} | {g['rows']:,} | {g['q_gbm']:.3f} | {g['q_gp']:.3f} | {'pooled' if g['pooled'] else 'own'} |"
              for r, g in conf["groups"].items()], ""]


def _pct(x) -> str:
    return "—" if x is None else f"{100 * x:.1f} %"


def _coverage_rows(table: dict, target: bool = True) -> list:
    out = []
    for label, x in table.items():
        if not x["rows"]:
            continue
        lo, hi = x["coverage_ci95"]
        ok = f" ({_meets('regime_coverage', x['coverage'])})" if target else ""
        out.append(f"| {label} | {x['rows']:,} | {_pct(x['coverage'])}{ok} | {_pct(lo)}-{_pct(hi)} | "
                   f"{x['mean_width_mV']:.2f} mV |")
    return out


def _coverage_tables(v: dict) -> list:
    if "coverage_by_regime" not in v:
        return []
    head = ["| {} | rows | coverage (target 93-97 %) | 95 % interval of the coverage | mean width |",
            "| --- | --- | --- | --- | --- |"]
    lines = ["95 % interval coverage of the trees by solver regime and by material, mean interval width beside "
             "(the interval of the coverage is Wilson's score interval: what the sample size can resolve):", "",
             head[0].format("solver regime"), head[1], *_coverage_rows(v["coverage_by_regime"]),
             *_coverage_rows(v["coverage_by_material"]), ""]
    t = v.get("targeted")
    if t:
        lines += [f"Targeted check of the rare regime{'s' if len(t['regimes']) > 1 else ''} "
                  f"({', '.join(t['regimes'])}): of {t['pool']:,} further uniform designs (seed {t['seed']}), "
                  f"those the bundle predicts there, solved ({t['answered']:,} rows):", "",
                  head[0].format("predicted regime"), head[1], *_coverage_rows(t["coverage_by_predicted_regime"]), ""]
    out = v.get("truth_outside_bounds_rate")
    if out is not None:
        lines += [f"Interval ends are clipped to 0 <= V_bi <= V_bi0; that cannot change coverage where the solver "
                  f"obeys the bound and can only lower it where it does not ({100 * out:.2f} % of rows, "
                  f"{v['truth_outside_bounds_uncovered']} of them left uncovered).", ""]
    return lines


def _smoothing_text(conf: dict) -> str:
    k = conf.get("smooth_points", 1)
    if k <= 1:
        return ""
    return (f", averaged over {k} designs within +-{conf['smooth_dex']:g} decades of radius, shell, dopings and "
            "D_it (smooths the trees' steps)")


def _confirm_rows(v: dict) -> list:
    """Card rows for the answers under ``--confirm`` (reports written before 0.3.1 lack them)."""
    if "confirm_rate" not in v:
        return []
    return [f"| with `--confirm`: designs re-answered by the solver | {v['confirm_rate']:.2%} | — |",
            f"| with `--confirm`: regime accuracy / V_bi mean / p99 error | {v['confirm_regime_accuracy']:.4f} / "
            f"{v['confirm_vbi_mean_mV']:.2f} / {v['confirm_vbi_p99_mV']:.2f} mV | — |"]
