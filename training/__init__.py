"""radialpn's heavy side: the reference Poisson solver, sampling, datasets and fitting.
May use scipy, pandas, scikit-learn and joblib; never imported by ``surrogate``."""

from ._profile import solver_profile
from ._solver import NODES, SOLVER_VERSION, solve

__all__ = ["NODES", "SOLVER_VERSION", "solve", "solver_profile"]
