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


def predictor(engine: str, statistics: str = "fermi-dirac", **options):
    """A callable designs -> output columns for the search helpers of surrogate._search."""
    return lambda designs: run(engine, designs, statistics, **options)
