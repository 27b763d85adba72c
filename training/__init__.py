"""radialpn's heavy side: the reference Poisson solver, sampling, datasets and fitting.
Importing it loads numpy alone; fitting needs the `train` extra (scipy, pandas, scikit-learn,
joblib), imported where used. The runtime (``radialpn``) imports it only to run the solver."""

from .._bundle import bundle_checksums, read_bundle, write_bundle
from .._gp import GaussianProcess
from .._trees import TreeEnsemble
from ._dataset import DatasetError, build_dataset, load_dataset, plan, read_rows, split_designs
from ._export import export_gp, export_hgb
from ._fit import MIN_GROUP_ROWS, conformal_quantile, fit_bundle, fit_temperature, mondrian_quantiles
from ._profile import solver_profile
from ._recalibrate import recalibrate_bundle
from ._sampling import boundary_distance
from ._solver import NODES, PARALLEL, SOLVER_VERSION, fork_safe, solve
from ._spec import DomainSpec, SpecError, load_spec, spec_from_dict
from ._train import VALIDATE_SEED, rare_regimes, recalibrate, train_bundle, validate_bundle
from ._validate import score as score_validation
from ._validate import fresh_designs, score_targeted, targeted_designs, wilson_interval
from ._validate import validate as validate_model

__all__ = ["fresh_designs", "NODES", "PARALLEL", "SOLVER_VERSION", "fork_safe", "DatasetError", "DomainSpec", "SpecError", "build_dataset",
           "load_dataset", "load_spec", "plan", "read_rows", "split_designs", "solve", "solver_profile", "spec_from_dict",
           "train_bundle", "validate_bundle", "validate_model", "fit_bundle", "conformal_quantile",
           "fit_temperature", "export_gp", "export_hgb", "boundary_distance", "GaussianProcess", "TreeEnsemble",
           "read_bundle", "write_bundle", "bundle_checksums", "MIN_GROUP_ROWS", "mondrian_quantiles",
           "recalibrate_bundle", "recalibrate", "rare_regimes", "VALIDATE_SEED", "score_validation", "score_targeted", "targeted_designs", "wilson_interval"]
