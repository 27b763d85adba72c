"""radialpn: depletion regime and built-in potential of core-shell (radial p-n) nanowires.

``import radialpn`` and every call below need numpy alone. Designs are rows of the design
table (docs/design-table.md): a mapping of column -> array or scalar, a list of row dicts, or
a pandas DataFrame. Answers are mappings of column -> numpy array, one entry per input row, in
order (a DataFrame on the same index when a DataFrame came in); a row without an answer
carries the reason in ``status``.

    predict              the default engine (validated surrogate bundles, milliseconds)
    solve                the reference solver (nonlinear Poisson, Fermi-Dirac, surface states)
    deplete              the analytic depletion approximation (over a million designs/s)
    profile              band edges against radius for one design
    regime_map           regimes and V_bi over any two design variables
    critical_dimensions  smallest core / thinnest shell that keep V_bi above a target (and sweeps)
    search               constrained search over many candidates, winners re-checked by the solver
    spread               growth-spread yield and what it is most sensitive to
    calibrate            infer D_it, neutral level and dopings from measurements on a series
    review               all of the above for one wire (the design-review sheet's content)

Answers are design estimates, not measurements: confirm a design with measurements on grown
wires before committing a growth campaign to it.
"""

from . import _depletion, _engines
from ._bundle import BundleError
from ._calibrate import CAUTION as CALIBRATION_CAUTION, CONTINUOUS as OBSERVED_COLUMNS, FLAGS as _FLAGS
from ._calibrate import calibrate as _calibrate, calibrate_many as _calibrate_many
from ._emulator import CalibrationError
from ._ensemble import autocorr_time, sample as ensemble_sample, split_rhat
from ._design import (
    CORE_TYPES, INPUT_COLUMNS, OUTPUT_COLUMNS, REGIMES, DesignTable, check_columns, check_design,
    NUMERIC as NUMERIC_COLUMNS,
    normalize_designs, parse_quantity,
)
from ._engines import DEFAULT_ENGINE, ENGINES
from ._errors import DesignError, MaterialError, RadialpnError, SettingError
from ._frames import like_input as _like_input
from ._materials import (
    Material, get_material, load_material_file, material_from_dict, material_names, mott_density,
    register_material,
)
from ._model import SurrogateModel, available, load, load_bundle
from ._profiles import depletion_profile
from ._questions import critical_dimensions, profile, regime_map, search, spread, target_text
from ._review import DEFAULT_SPREADS, review
from ._search import main_effects
from ._trees import threads as worker_threads
from ._tunnel import TUNNEL_RISK_LOG10
from ._depletion import bulk_level
from ._ionisation import (
    AUTO_BELOW_K as IONISATION_AUTO_BELOW_K, DEEP_EV as IONISATION_DEEP_EV, IONISATION, ionised_fraction,
)
from ._statistics import STATISTICS, fermi_half, fermi_half_inverse, intrinsic_density, reduced_level

__version__ = "0.3.0"


def predict(designs, engine: str = DEFAULT_ENGINE, statistics: str = "fermi-dirac", second_opinion: bool = False,
            confirm: bool = False, progress=None, ionisation: str = "auto"):
    """Regime and built-in potential of each design by ``engine``: ``"auto"`` (default: the
    surrogate inside a validated bundle's domain, the reference solver for every other valid
    row; ``engine`` and ``engine_note`` say which answered and why), ``"surrogate"`` (the
    installed bundle of each row's material and core type, with ``regime_prob``, a 95 %
    interval ``vbi_low_V``..``vbi_high_V`` [V] and ``in_domain``; rows outside a bundle's
    trained domain get a status and no numbers), ``"depletion"`` or ``"solver"``.
    ``second_opinion`` adds the surrogate's Gaussian-process columns ``vbi_gp_*`` [V] (and flags
    disagreements); ``confirm`` (auto) re-answers flagged rows with the solver.
    ``progress(done, total)`` is called on long runs. ``ionisation``: ``"auto"`` (default:
    incomplete below ``IONISATION_AUTO_BELOW_K`` or with a deep dopant), ``"full"`` or
    ``"incomplete"`` (docs/physics.md section 4.1); the ``ionisation`` column says which was used."""
    return _like_input(designs, _engines.answer(designs, engine, statistics, second_opinion, progress=progress,
                                                confirm=confirm, ionisation=ionisation))


def solve(designs, statistics: str = "fermi-dirac", nodes: int | None = None, n_jobs: int = 1,
          ionisation: str = "auto"):
    """The reference solver (see ``radialpn._engines.solve``): the full nonlinear Poisson
    equation in the cylinder, Fermi-Dirac or Boltzmann statistics, surface states; numpy only.
    ``nodes``: grid nodes per design (default 400); ``n_jobs``: threads (-1: one per core);
    ``ionisation``: ``"auto"``, ``"full"`` or ``"incomplete"`` (as for ``predict``)."""
    return _like_input(designs, _engines.solve(designs, statistics, nodes, n_jobs, ionisation))


def deplete(designs, statistics: str = "fermi-dirac", threads: int | None = None, ionisation: str = "auto"):
    """The depletion approximation's four-regime answer (equations in docs/physics.md), plus
    the continuous boundary margins ``core_margin``, ``shell_margin`` [1], the surface barrier
    ``surface_barrier_V`` [V] and ``junction_edge_nm`` [nm]. ``threads``: worker threads for
    large batches; ``ionisation`` (as for ``predict``) sets the bulk levels, so V_bi0; the
    depletion regions stay fully ionised."""
    return _like_input(designs, _depletion.deplete(designs, statistics, threads, ionisation))


def calibrate(observations, unknowns, engine: str = "surrogate", statistics: str = "fermi-dirac",
              walkers: int | None = None, steps: int = 1500, burn: int = 500, seed: int = 0, recheck: bool = True,
              critical: bool = True, reference_row: int = 1, fraction_min: float = 0.9, progress=None) -> dict:
    """Infer unknown design columns of a measured series, with credible intervals (docs/calibrate.md).

    ``observations``: rows of the design table (the known design of each wire) plus observed
    columns ``vbi_V``, ``surface_bending_V`` [V], ``core_neutral_radius_nm``,
    ``shell_neutral_nm`` [nm] each with ``<name>_sigma`` (1 sigma, same unit), ``regime`` and
    yes/no ``shell_keeps_neutral``, ``core_keeps_neutral``; blank: not measured.
    ``unknowns``: names (``"dit"``, ``"cnl"``, ``"shell-doping"``, ``"core-doping"`` or their
    columns) or a mapping name -> prior spec (``{"prior": "log-uniform", "low": 1e11, "high":
    1e13}``, ``{"prior": "normal", "mean": 0.5, "sd": 0.1}``, ``{"prior": "log-normal", "median":
    2e18, "sd_dex": 0.15}``, None for the default; add ``"per_row": True`` for one per row).
    ``engine`` tabulates the model over the prior support; ``steps``/``burn``/``walkers``
    set the stretch-move sampler; ``recheck`` runs the reference solver at the posterior
    median and a few draws; ``critical`` adds the critical core radius and shell thickness
    [nm] of wire ``reference_row`` (1-based) for V_bi >= ``fraction_min`` V_bi0.

    Returns ``unknowns`` (per parameter: ``median``, ``ci68``, ``ci95`` [column unit],
    ``rhat``, ``autocorr_steps``, ``prior``), ``correlation`` (in log10 for D_it and dopings),
    ``samples`` [column units], ``diagnostics``, ``recheck``, ``critical``, ``caution``,
    ``seconds``. Inferred values are model-dependent estimates: confirm them by independent
    measurement."""
    return _calibrate(observations, unknowns, engine, statistics, walkers, steps, burn, seed, recheck, critical,
                      reference_row, fraction_min, progress)


def calibrate_many(observations, unknowns, by: str = "series", **options) -> list:
    """``calibrate`` for each series (rows sharing a value of column ``by``), in order of first
    appearance; series with identical known designs share one model table and one vectorised
    sampler run. ``options``: those of ``calibrate``. Returns a list of results, each with
    ``series``."""
    return _calibrate_many(observations, unknowns, by, **options)


OBSERVED_FLAGS = tuple(_FLAGS)

__all__ = [
    "calibrate", "calibrate_many", "ensemble_sample", "split_rhat", "autocorr_time", "CalibrationError", "CALIBRATION_CAUTION", "OBSERVED_COLUMNS", "OBSERVED_FLAGS",
    "predict", "solve", "deplete", "profile", "regime_map", "critical_dimensions", "search", "spread",
    "depletion_profile", "target_text", "main_effects", "review", "DEFAULT_SPREADS",
    "load", "load_bundle", "available", "SurrogateModel",
    "check_columns", "check_design", "normalize_designs", "parse_quantity", "DesignTable",
    "get_material", "material_names", "register_material", "load_material_file", "material_from_dict", "Material",
    "fermi_half", "fermi_half_inverse", "intrinsic_density", "reduced_level", "ionised_fraction", "bulk_level",
    "IONISATION", "IONISATION_AUTO_BELOW_K", "IONISATION_DEEP_EV", "mott_density",
    "CORE_TYPES", "INPUT_COLUMNS", "OUTPUT_COLUMNS", "NUMERIC_COLUMNS", "REGIMES", "STATISTICS", "ENGINES",
    "DEFAULT_ENGINE", "TUNNEL_RISK_LOG10", "worker_threads",
    "RadialpnError", "DesignError", "MaterialError", "SettingError", "BundleError",
    "__version__",
]
