"""radialpn's heavy side: the reference Poisson solver, sampling, datasets and fitting.
May use scipy, pandas, scikit-learn and joblib; never imported by ``surrogate``."""

__all__: list[str] = []
