"""Engine registry for the front end: name -> function(designs, statistics, **options) ->
output mapping. The front end holds no physics; it only picks which library function answers."""

from __future__ import annotations

import surrogate


def _solver(designs, statistics, **_):
    from training import solve  # heavy side, imported only when asked for

    n = designs.n if hasattr(designs, "n") else None
    return solve(designs, statistics, n_jobs=-1 if n and n > 2000 else 1)


def _surrogate(designs, statistics, second_opinion=False, **_):
    import numpy as np

    from surrogate._model import empty_result

    table = designs if isinstance(designs, surrogate.DesignTable) else surrogate.normalize_designs(designs)
    if statistics == "fermi-dirac":
        return surrogate.predict(table, second_opinion=second_opinion)
    res = empty_result(table.n, second_opinion, table.status)
    msg = f"surrogate: bundles are trained with fermi-dirac statistics, not {statistics}; use the solver engine"
    res["status"] = np.where(table.status == "ok", msg, table.status).astype(object)
    return res


ENGINES = {
    "surrogate": _surrogate,
    "depletion": lambda designs, statistics, **_: surrogate.deplete(designs, statistics),
    "solver": _solver,
}
DEFAULT_ENGINE = "surrogate"


def run(engine: str, designs, statistics: str, **options) -> dict:
    return ENGINES[engine](designs, statistics, **options)


#: rows per second, roughly (benchmarks/): above one second's worth a run shows progress
RATE = {"solver": 3000, "surrogate": 100_000, "surrogate+gp": 15_000, "depletion": 1_000_000}


def run_with_progress(engine, designs, statistics, console, **options):
    """Run an engine; where it may take more than about a second, go chunk by chunk under a
    progress bar with rate and time left."""
    import time

    import numpy as np

    table = designs if isinstance(designs, surrogate.DesignTable) else surrogate.normalize_designs(designs)
    rate = RATE["surrogate+gp" if engine == "surrogate" and options.get("second_opinion") else engine]
    chunk = max(1000, rate // 4)
    if table.n <= rate or console is None:
        return run(engine, table, statistics, **options)
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

    parts = []
    with Progress(TextColumn("[#5b8def]{task.description}"), BarColumn(), MofNCompleteColumn(),
                  TextColumn("{task.fields[rate]}"), TimeRemainingColumn(), console=console, transient=True) as bar:
        task = bar.add_task(f"{engine} engine", total=table.n, rate="")
        t0 = time.perf_counter()
        for start in range(0, table.n, chunk):
            parts.append(run(engine, table.take(slice(start, start + chunk)), statistics, **options))
            done = min(start + chunk, table.n)
            bar.update(task, completed=done, rate=f"{done / (time.perf_counter() - t0):,.0f} rows/s")
    return {k: np.concatenate([p[k] for p in parts]) for k in parts[0]}


def predictor(engine: str, statistics: str = "fermi-dirac", console=None, **options):
    """A callable designs -> output columns for the search helpers of surrogate._search
    (with a progress bar on slow engines when a console is given)."""
    return lambda designs: run_with_progress(engine, designs, statistics, console, **options)
