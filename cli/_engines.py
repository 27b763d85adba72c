"""Engine registry for the front end: name -> function(designs, statistics) -> output mapping.
The front end holds no physics; it only picks which library function answers."""

from __future__ import annotations

import surrogate

def _solver(designs, statistics):
    from training import solve  # heavy side, imported only when asked for

    n = designs.n if hasattr(designs, "n") else None
    return solve(designs, statistics, n_jobs=-1 if n and n > 2000 else 1)


ENGINES = {
    "depletion": lambda designs, statistics: surrogate.deplete(designs, statistics),
    "solver": _solver,
}
DEFAULT_ENGINE = "depletion"


def run(engine: str, designs, statistics: str) -> dict:
    return ENGINES[engine](designs, statistics)
