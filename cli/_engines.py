"""Engine registry for the front end: name -> function(designs, statistics) -> output mapping.
The front end holds no physics; it only picks which library function answers."""

from __future__ import annotations

import surrogate

ENGINES = {
    "depletion": lambda designs, statistics: surrogate.deplete(designs, statistics),
}
DEFAULT_ENGINE = "depletion"


def run(engine: str, designs, statistics: str) -> dict:
    return ENGINES[engine](designs, statistics)
