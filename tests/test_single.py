"""The single-design fast path (scalar validation, depletion features and tree walk) and the
question-specific model subsets give the answers of the general, vectorised path.

Tolerance 1e-12 (relative and absolute) on every number: both paths evaluate the same
equations in float64 in the same order; only the transcendental functions differ (Python's
``math`` against numpy's own ``exp``/``log``), by at most a few ulp, i.e. ~1e-15 relative on
V_bi of order 1 V and extents of order 100 nm. Text and flag columns must be equal."""

from __future__ import annotations

import numpy as np
import pytest

import radialpn

MODEL = radialpn.load("GaAs", "p")


def _random_rows(n, seed):
    """Designs around and beyond the GaAs p-core bundle's domain, some of them refused."""
    rng = np.random.default_rng(seed)
    lo = {k: v[0] for k, v in MODEL.domain.items()}
    hi = {k: v[1] for k, v in MODEL.domain.items()}
    rows = []
    for i in range(n):
        row = {"material": "GaAs", "core_type": "p"}
        for col in ("core_radius_nm", "shell_thickness_nm", "core_doping_cm3", "shell_doping_cm3", "dit_cm2eV"):
            a, b = lo.get(col, 1.0), hi.get(col, 1e3)
            a = max(a, 1e9) if col == "dit_cm2eV" else a
            # log-uniform over the domain widened by a factor 1.5 each side: some rows fall outside
            row[col] = float(10 ** rng.uniform(np.log10(a / 1.5), np.log10(b * 1.5)))
        if "cnl_eV" in lo and rng.random() < 0.5:
            row["cnl_eV"] = float(rng.uniform(lo["cnl_eV"] - 0.05, hi["cnl_eV"] + 0.05))
        if "temperature_K" in lo and lo["temperature_K"] < hi["temperature_K"]:
            row["temperature_K"] = float(rng.uniform(lo["temperature_K"], hi["temperature_K"]))
        rows.append(row)
    # edge rows: domain corners, no surface states, units as text, one-element lists
    corner = {k: lo[k] for k in lo} | {"material": "GaAs", "core_type": "p"}
    rows += [dict(corner), {**corner, **{k: hi[k] for k in hi}}, {**rows[0], "dit_cm2eV": 0.0},
             {**rows[1], "core_radius_nm": f"{rows[1]['core_radius_nm']}nm", "core_doping_cm3": "1e18cm-3"},
             {k: [v] for k, v in rows[2].items()}, {**rows[3], "core_type": "p-core", "material": "gaas"},
             {k: (np.float64(v) if isinstance(v, float) else v) for k, v in rows[4].items()},
             {**rows[5], "temperature_K": np.int64(300), "shell_thickness_nm": 40}]
    # refused rows: out of range, unknown material, wrong core type, interlayer, bad text, wrong type
    rows += [{**rows[0], "core_radius_nm": -3.0}, {**rows[0], "material": "Unobtainium"},
             {**rows[0], "core_type": "x"}, {**rows[0], "interlayer_nm": 1.0}, {**rows[0], "dit_cm2eV": "lots"},
             {**rows[0], "temperature_K": True}, {**rows[0], "shell_doping_cm3": float("nan")},
             {**rows[0], "core_type": "n"}, {k: v for k, v in rows[0].items() if k != "core_radius_nm"}]
    return rows


def _assert_same(one, batch, i, context):
    for k, v in batch.items():
        a, b = np.asarray(one[k])[0], np.asarray(v)[i]
        if isinstance(b, (float, np.floating)):
            if np.isnan(b):
                assert np.isnan(a), (context, k, a, b)
            else:
                # the GP columns: a kernel sum over the GP's training points by BLAS, whose
                # blocking (and so rounding) depends on the row count: 1e-12 measured, 1e-9 allowed
                tol = 1e-9 if k.startswith("vbi_gp") else 1e-12
                assert a == pytest.approx(b, rel=tol, abs=tol), (context, k)
        else:
            assert a == b, (context, k, a, b)
    assert set(one) == set(batch), context


def _twice(row):
    """The general path's input for the same design: the row validated by the general
    validation, then doubled (two rows take the vectorised features and the batch tree walk)."""
    return radialpn.normalize_designs(row).take(np.array([0, 0]))


def test_single_queries_equal_the_batch_path():
    rows = _random_rows(300, 1)
    ok = 0
    for row in rows:
        one = MODEL.predict(row)
        _assert_same(one, MODEL.predict(_twice(row)), 0, row)
        _assert_same(MODEL.predict(row, second_opinion=True, class_probs=True),
                     MODEL.predict(_twice(row), second_opinion=True, class_probs=True), 0, row)
        ok += one["status"][0] == "ok"
    assert 100 < ok < len(rows) - 9  # both kinds are exercised: answered, and outside the domain or refused


def test_single_queries_through_the_api_equal_the_batch_path():
    rows = _random_rows(60, 2)
    for row in rows:
        _assert_same(radialpn.predict(row, engine="surrogate"), radialpn.predict(_twice(row), engine="surrogate"), 0, row)
    for row in rows[:5] + rows[-9:]:  # auto: refused rows go to the solver, the same either way
        _assert_same(radialpn.predict(row), radialpn.predict(_twice(row)), 0, row)


@pytest.mark.parametrize("models", [("vbi", "difficulty"), ("regime", "vbi"), ("shell_neutral_nm",)])
def test_model_subsets_give_the_full_answer_for_what_they_evaluate(models):
    rows = [r for r in _random_rows(200, 3) if not any(isinstance(v, list) for v in r.values())]  # one table
    full = MODEL.predict(rows)
    part = MODEL.predict(rows, models=models)
    # the interval's conformal quantile is the predicted regime's, so "difficulty" brings the regime
    kept = {"vbi": ["vbi_V"], "difficulty": ["regime", "regime_prob", "confirm_with_solver"], "regime": ["regime", "regime_prob", "confirm_with_solver"],
            "shell_neutral_nm": ["shell_neutral_nm", "regime", "regime_prob", "confirm_with_solver"]}
    cols = {"vbi0_V", "status", "in_domain", "engine", "ionisation"} | {c for m in models for c in kept[m]}
    if {"vbi", "difficulty"} <= set(models):
        cols |= {"vbi_low_V", "vbi_high_V"}
    for k in cols:
        if k == "confirm_with_solver":
            continue  # the flag also reads the extent models; a subset flags on what it evaluated
        a, b = part[k], full[k]
        if a.dtype.kind == "f":
            # the same leaves; only the grouping of the leaf sums differs (a subset stacks fewer
            # trees): float64 rounding of sums of <= 100 terms of order 1, 1e-12 allowed
            np.testing.assert_allclose(a, b, rtol=0, atol=1e-12, equal_nan=True, err_msg=k)
        else:
            assert (a == b).all(), k
    for k in set(full) - cols - {"confirm_with_solver"}:  # what was not evaluated is blank, never a stale number
        a = part[k]
        assert (np.isnan(a).all() if a.dtype.kind == "f" else (a == "").all()), k
