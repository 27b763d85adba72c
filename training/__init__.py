"""radialpn's heavy side: the reference Poisson solver, sampling, datasets and fitting.
May use scipy, pandas, scikit-learn and joblib; never imported by ``surrogate``."""

from ._dataset import DatasetError, build_dataset, load_dataset, plan, read_rows
from ._profile import solver_profile
from ._solver import NODES, SOLVER_VERSION, solve
from ._spec import DomainSpec, SpecError, load_spec, spec_from_dict
from ._train import train_bundle, validate_bundle

__all__ = ["NODES", "SOLVER_VERSION", "DatasetError", "DomainSpec", "SpecError", "build_dataset",
           "load_dataset", "load_spec", "plan", "read_rows", "solve", "solver_profile", "spec_from_dict",
           "train_bundle", "validate_bundle"]
