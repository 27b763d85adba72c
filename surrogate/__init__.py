"""radialpn's light runtime: import with numpy alone.

Material table, carrier statistics, the design-table validation layer and the vectorised
depletion-approximation engine for radial (core-shell) p-n nanowires. Answers are design
estimates, not measurements: confirm a design with measurements before a growth campaign.
"""

from ._depletion import deplete
from ._design import (
    CORE_TYPES, INPUT_COLUMNS, OUTPUT_COLUMNS, REGIMES, DesignTable, check_design,
    NUMERIC as NUMERIC_COLUMNS,
    normalize_designs, parse_quantity,
)
from ._errors import DesignError, MaterialError, RadialpnError
from ._materials import (
    Material, get_material, load_material_file, material_from_dict, material_names,
    register_material,
)
from ._bundle import BundleError
from ._model import SurrogateModel, available, load, load_bundle, predict
from ._profiles import depletion_profile
from ._statistics import fermi_half, fermi_half_inverse, intrinsic_density, reduced_level

__version__ = "0.1.0"

__all__ = [
    "BundleError", "SurrogateModel", "available", "load", "load_bundle", "predict",
    "CORE_TYPES", "INPUT_COLUMNS", "NUMERIC_COLUMNS", "OUTPUT_COLUMNS", "REGIMES", "DesignError", "DesignTable",
    "Material", "MaterialError", "RadialpnError", "check_design", "deplete", "depletion_profile",
    "fermi_half", "fermi_half_inverse", "get_material", "intrinsic_density",
    "load_material_file", "material_from_dict", "material_names", "normalize_designs",
    "parse_quantity", "reduced_level", "register_material", "__version__",
]
