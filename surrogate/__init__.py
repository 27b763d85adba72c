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
    review               all of the above for one wire (the design-review sheet's content)

Answers are design estimates, not measurements: confirm a design with measurements on grown
wires before committing a growth campaign to it.
"""

from . import _depletion, _engines
from ._bundle import BundleError
from ._design import (
    CORE_TYPES, INPUT_COLUMNS, OUTPUT_COLUMNS, REGIMES, DesignTable, check_design,
    NUMERIC as NUMERIC_COLUMNS,
    normalize_designs, parse_quantity,
)
from ._engines import DEFAULT_ENGINE, ENGINES
from ._errors import DesignError, MaterialError, RadialpnError
from ._frames import like_input as _like_input
from ._materials import (
    Material, get_material, load_material_file, material_from_dict, material_names,
    register_material,
)
from ._model import SurrogateModel, available, load, load_bundle
from ._profiles import depletion_profile
from ._questions import critical_dimensions, profile, regime_map, search, spread, target_text
from ._review import DEFAULT_SPREADS, review
from ._search import main_effects
from ._statistics import STATISTICS, fermi_half, fermi_half_inverse, intrinsic_density, reduced_level

__version__ = "0.2.0"


def predict(designs, engine: str = DEFAULT_ENGINE, statistics: str = "fermi-dirac", second_opinion: bool = False,
            progress=None):
    """Regime and built-in potential of each design by ``engine``: ``"surrogate"`` (default; the
    installed bundle of each row's material and core type, with ``regime_prob``, a 95 %
    interval ``vbi_low_V``..``vbi_high_V`` [V] and ``in_domain``; rows outside a bundle's
    trained domain get a status and no numbers), ``"depletion"`` or ``"solver"``.
    ``second_opinion`` adds the surrogate's Gaussian-process columns ``vbi_gp_*`` [V].
    ``progress(done, total)`` is called on long runs."""
    return _like_input(designs, _engines.answer(designs, engine, statistics, second_opinion, progress=progress))


def solve(designs, statistics: str = "fermi-dirac", nodes: int | None = None, n_jobs: int = 1):
    """The reference solver (see ``radialpn._engines.solve``): the full nonlinear Poisson
    equation in the cylinder, Fermi-Dirac or Boltzmann statistics, surface states; numpy only.
    ``nodes``: grid nodes per design (default 400); ``n_jobs``: threads (-1: one per core)."""
    return _like_input(designs, _engines.solve(designs, statistics, nodes, n_jobs))


def deplete(designs, statistics: str = "fermi-dirac", threads: int | None = None):
    """The depletion approximation's four-regime answer (equations in docs/physics.md), plus
    the continuous boundary margins ``core_margin``, ``shell_margin`` [1], the surface barrier
    ``surface_barrier_V`` [V] and ``junction_edge_nm`` [nm]. ``threads``: worker threads for
    large batches."""
    return _like_input(designs, _depletion.deplete(designs, statistics, threads))


__all__ = [
    "predict", "solve", "deplete", "profile", "regime_map", "critical_dimensions", "search", "spread",
    "depletion_profile", "target_text", "main_effects", "review", "DEFAULT_SPREADS",
    "load", "load_bundle", "available", "SurrogateModel",
    "check_design", "normalize_designs", "parse_quantity", "DesignTable",
    "get_material", "material_names", "register_material", "load_material_file", "material_from_dict", "Material",
    "fermi_half", "fermi_half_inverse", "intrinsic_density", "reduced_level",
    "CORE_TYPES", "INPUT_COLUMNS", "OUTPUT_COLUMNS", "NUMERIC_COLUMNS", "REGIMES", "STATISTICS", "ENGINES",
    "DEFAULT_ENGINE",
    "RadialpnError", "DesignError", "MaterialError", "BundleError",
    "__version__",
]
