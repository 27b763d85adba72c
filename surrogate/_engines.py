"""The engines behind every design question, chosen by name: ``"auto"`` (the default: the
surrogate where a design lies inside a validated bundle's domain, the reference solver for every
other valid row), ``"surrogate"`` (bundles only; rows outside refused with a reason),
``"depletion"`` (the analytic approximation) and ``"solver"`` (the reference nonlinear Poisson
solver). Each maps design-table rows to output columns; every row's ``engine`` says which engine
answered it and ``engine_note`` why (auto and confirm). This module only picks the engine and,
for long runs, reports progress chunk by chunk."""

from __future__ import annotations

import numpy as np

from ._depletion import deplete
from ._design import DesignTable, normalize_designs
from ._errors import DesignError
from ._model import empty_result, predict_bundles
from ._single import one_design
from ._ionisation import check_ionisation, row_dopants
from ._statistics import check_statistics

ENGINES = ("auto", "surrogate", "depletion", "solver")
DEFAULT_ENGINE = "auto"
#: rows per second, roughly (benchmarks/): runs longer than about a second report progress
RATE = {"solver": 3000, "surrogate": 20_000, "auto": 20_000, "surrogate+gp": 10_000, "depletion": 1_000_000}


def solve(designs, statistics: str = "fermi-dirac", nodes: int | None = None, n_jobs: int = 1,
          ionisation: str = "auto") -> dict:
    """Regime and built-in potential of each design by the reference solver: the full nonlinear
    Poisson equation in the cylinder with Fermi-Dirac (or Boltzmann) statistics and surface
    states. Numpy only; a few thousand designs/s on 2 cores (benchmarks/bench_solver.py).

    ``designs``: as for ``deplete``. ``nodes``: grid nodes per design (default 400, V_bi
    within 0.1 mV of a 4x finer grid). ``n_jobs``: worker threads (-1: one per core). Returns
    the design-table output columns plus the solver's margins (``core_majority_ln``,
    ``shell_majority_ln``), ``charge_residual``, ``iterations``, ``solver_version`` and
    ``ionisation`` (the model each row used, ``"full"`` or ``"incomplete"``, resolved from the
    ``ionisation`` argument ``"auto"``, ``"full"`` or ``"incomplete"``; blank without an answer); see docs/physics.md for the equations and the regime criterion.
    """
    from .training._solver import NODES, solve as _solve  # the solver's code lives in training/

    return _solve(designs, statistics, nodes=NODES if nodes is None else nodes, n_jobs=n_jobs,
                  ionisation=ionisation)


def _surrogate(table, statistics, second_opinion=False, ionisation="auto", models=None):
    """Bundles' answers where the row's statistics and resolved ionisation model are those the
    bundles were trained on; a status saying why for the other valid rows."""
    if statistics != "fermi-dirac":
        res = empty_result(table.n, second_opinion, table.status)
        msg = (f"surrogate: bundles are trained with fermi-dirac statistics, not {statistics}; the solver engine "
               "(or auto) answers it")
        res["status"] = np.where(table.status == "ok", msg, table.status).astype(object)
        return res
    refused = row_dopants(table, ionisation)[1]
    if refused is not None:  # "incomplete" for a material without dopant levels
        table = DesignTable(table.n, table.material, table.p_core, table.values, refused)
    # each bundle answers only rows that ``ionisation`` resolves to the model it was trained on
    return predict_bundles(table, second_opinion=second_opinion, models=models, ionisation=ionisation)


def check_engine(engine: str) -> str:
    if engine not in ENGINES:
        raise DesignError("engine", f"one of {', '.join(ENGINES)}", engine)
    return engine


def _blank_like(v, n):
    a = np.asarray(v)
    if a.dtype.kind == "f":
        return np.full(n, np.nan)
    if a.dtype.kind == "b":
        return np.zeros(n, dtype=bool)
    if a.dtype.kind in "iu":
        return np.zeros(n, dtype=a.dtype)
    return np.full(n, "", dtype=object)


def _merge(n, parts) -> dict:
    """Columns of several engines' answers for disjoint row sets [(rows, answer), ...]: every
    column any of them returns, blank where an engine does not give it."""
    out = {}
    for rows, res in parts:
        for k, v in res.items():
            if k not in out:
                out[k] = _blank_like(v, n)
            out[k][rows] = v
    return out


def _auto(table, statistics, second_opinion, confirm, n_jobs, ionisation="auto", models=None):
    """Surrogate where it may answer; the solver for valid rows it refuses (and, with
    ``confirm``, for rows it flags as uncertain). ``engine_note`` says why the solver answered."""
    res = _surrogate(table, statistics, second_opinion, ionisation, None if confirm else models)
    note = np.full(table.n, "", dtype=object)
    valid = table.status == "ok"
    refused = valid & (res["status"] != "ok")
    note[refused] = ["solver: " + str(s).removeprefix("surrogate: ") for s in res["status"][refused]]
    if confirm:
        unsure = valid & ~refused & res["confirm_with_solver"]
        note[unsure] = "solver: re-answered, the surrogate flagged this design as uncertain"
        refused |= unsure
    rows = np.flatnonzero(refused)
    if not rows.size:
        return {**res, "engine_note": note}
    sub = table.take(rows)
    ref = solve(sub, statistics, n_jobs=n_jobs if n_jobs is not None else (-1 if rows.size > 2000 else 1),
                ionisation=ionisation)
    keep = np.flatnonzero(~refused)
    out = _merge(table.n, [(keep, {k: v[keep] for k, v in res.items()}), (rows, ref)])
    out["in_domain"][rows] = res["in_domain"][rows]
    out["engine_note"] = note
    return out


def answer(designs, engine: str = DEFAULT_ENGINE, statistics: str = "fermi-dirac", second_opinion: bool = False,
           progress=None, n_jobs: int | None = None, confirm: bool = False, ionisation: str = "auto",
           models=None) -> dict:
    """Output columns of ``engine`` for ``designs`` (any form ``normalize_designs`` takes).

    ``progress(done, total)``, if given, is called after each chunk on runs expected to take
    more than about a second. ``second_opinion`` adds the surrogate's Gaussian-process columns.
    ``n_jobs``: solver threads (default: one per core above 2,000 rows). ``confirm`` (auto
    engine): rows the surrogate flags as uncertain are re-answered by the solver. ``ionisation``:
    ``"auto"``, ``"full"`` or ``"incomplete"`` (``_ionisation``). ``models``: the surrogate's tree
    models a question needs (``SurrogateModel.predict``); other engines ignore it."""
    check_engine(engine)
    statistics = check_statistics(statistics)
    ionisation = check_ionisation(ionisation)
    table = designs if isinstance(designs, DesignTable) else (one_design(designs) or normalize_designs(designs))

    def run(part):
        res = _run(part)
        res["engine"][part.status != "ok"] = ""  # no engine saw a row whose input failed validation
        return res

    def _run(part):
        if engine == "auto":
            return _auto(part, statistics, second_opinion, confirm, n_jobs, ionisation, models)
        if engine == "surrogate":
            res = _surrogate(part, statistics, second_opinion, ionisation, models)
            refused = (part.status == "ok") & (res["status"] != "ok")
            res["status"][refused] = [f"{s}; engine 'auto' or 'solver' answers it" for s in res["status"][refused]]
            return res
        if engine == "depletion":
            return deplete(part, statistics, ionisation=ionisation)
        return solve(part, statistics, n_jobs=n_jobs if n_jobs is not None else (-1 if part.n > 2000 else 1),
                     ionisation=ionisation)

    rate = RATE["surrogate+gp" if engine == "surrogate" and second_opinion else engine]
    if progress is None or table.n <= rate:
        return run(table)
    chunk = max(1000, rate // 4)
    parts = []
    for start in range(0, table.n, chunk):
        rows = np.arange(start, min(start + chunk, table.n))
        parts.append((rows, run(table.take(rows))))
        progress(min(start + chunk, table.n), table.n)
    # every column any chunk returns (under auto only chunks with a solver row carry the solver's
    # columns), blank where a chunk has none
    return _merge(table.n, parts)
