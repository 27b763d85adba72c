"""The material table: band gap with its temperature dependence, permittivity, effective
densities of states and a default surface neutral level, each value with its source.

Band gap: E_g(T) = E_g(300 K) - alpha [T^2/(T+beta) - 300^2/(300+beta)], the Varshni form
(Y. P. Varshni, Physica 34, 149 (1967), doi:10.1016/0031-8914(67)90062-6) anchored to the
handbook room-temperature gap so that 300 K reproduces the handbook value exactly.
Effective densities of states: N(T) = N(300 K) (T/300)^(3/2), parabolic bands with
temperature-independent masses (Sze & Ng, Physics of Semiconductor Devices, 3rd ed., 2007,
eq. 1.19-1.20).

Users add materials from a TOML or JSON file (see ``load_material_file``), or through the
``RADIALPN_MATERIALS`` environment variable (paths separated by the OS path separator).
"""

from __future__ import annotations

import os
import threading
from dataclasses import dataclass, field

import numpy as np

from ._errors import MaterialError

T_REF = 300.0  #: temperature at which the table values are given [K]

_SZE = "Sze & Ng, Physics of Semiconductor Devices, 3rd ed. (2007), Appendix G"
_VUR = "Vurgaftman, Meyer & Ram-Mohan, J. Appl. Phys. 89, 5815 (2001), doi:10.1063/1.1368156, Table"
_IOFFE = "Levinshtein, Rumyantsev & Shur (eds.), Handbook Series on Semiconductor Parameters, vol. 1-2 (1996-99)"
_MONCH = "Moench, Semiconductor Surfaces and Interfaces, 3rd ed. (2001), branch-point energies"


@dataclass(frozen=True)
class Material:
    """One semiconductor. Values at 300 K; methods give them at other temperatures."""

    name: str
    band_gap_300_eV: float  #: E_g at 300 K [eV]
    varshni_alpha_eV_K: float  #: Varshni alpha [eV/K]
    varshni_beta_K: float  #: Varshni beta [K]
    permittivity_rel: float  #: static relative permittivity [1]
    nc_300_cm3: float  #: conduction-band effective density of states at 300 K [cm^-3]
    nv_300_cm3: float  #: valence-band effective density of states at 300 K [cm^-3]
    cnl_eV: float  #: default surface neutral level above the valence-band edge [eV]
    sources: dict = field(default_factory=dict, compare=False)
    #: dilute-limit ionisation energy of the usual donor, E_c - E_D [eV] (NaN: not known)
    donor_ionisation_eV: float = float("nan")
    #: dilute-limit ionisation energy of the usual acceptor, E_A - E_v [eV] (NaN: not known)
    acceptor_ionisation_eV: float = float("nan")
    donor_degeneracy: float = 2.0  #: ground-state degeneracy g_D of the donor [1]
    acceptor_degeneracy: float = 4.0  #: ground-state degeneracy g_A of the acceptor [1]
    #: doping at which the donor's ionisation energy vanishes (Mott density) [cm^-3]; NaN: the
    #: hydrogenic Mott criterion from donor_ionisation_eV (``radialpn._ionisation.mott_density``)
    donor_mott_cm3: float = float("nan")
    #: likewise for the acceptor [cm^-3]
    acceptor_mott_cm3: float = float("nan")

    def band_gap(self, temperature_K):
        """Band gap [eV] at ``temperature_K`` [K] (array-like), Varshni form anchored at 300 K."""
        t = np.asarray(temperature_K, dtype=float)
        a, b = self.varshni_alpha_eV_K, self.varshni_beta_K
        return self.band_gap_300_eV - a * (t * t / (t + b) - T_REF * T_REF / (T_REF + b))

    def nc(self, temperature_K):
        """Conduction-band effective density of states [cm^-3] at ``temperature_K`` [K]."""
        return self.nc_300_cm3 * (np.asarray(temperature_K, dtype=float) / T_REF) ** 1.5

    def nv(self, temperature_K):
        """Valence-band effective density of states [cm^-3] at ``temperature_K`` [K]."""
        return self.nv_300_cm3 * (np.asarray(temperature_K, dtype=float) / T_REF) ** 1.5

    def dopant(self, kind: str):
        """(E_i0 [eV], g [1], N_M [cm^-3]) of the usual ``kind`` ("donor" or "acceptor"): the
        dilute-limit ionisation energy, the degeneracy factor and the Mott density at which the
        ionisation energy vanishes (the table's value, else ``mott_density``). E_i0 is NaN where
        the table has no level."""
        e0 = getattr(self, f"{kind}_ionisation_eV")
        nm = getattr(self, f"{kind}_mott_cm3")
        if np.isnan(nm) and np.isfinite(e0):
            nm = float(mott_density(e0, self.permittivity_rel))
        return e0, getattr(self, f"{kind}_degeneracy"), nm

    def at(self, temperature_K: float = T_REF) -> dict:
        """The row of ``radialpn materials --json`` at one temperature [K]."""
        return {
            "band_gap_eV": float(self.band_gap(temperature_K)),
            "permittivity_rel": self.permittivity_rel,
            "nc_cm3": float(self.nc(temperature_K)),
            "nv_cm3": float(self.nv(temperature_K)),
            "cnl_eV": self.cnl_eV,
            **{f"{kind}_{k}": (float(v) if np.isfinite(v) else None) for kind in ("donor", "acceptor")
               for k, v in zip(("ionisation_eV", "degeneracy", "mott_cm3"), self.dopant(kind))},
            "temperature_K": float(temperature_K),
            "sources": dict(self.sources),
        }


MOTT_CRITERION = 0.26  #: N_M^(1/3) a_B at the Mott transition [1] (Edwards & Sienko 1978)
_E2_4PI_EPS0_EV_NM = 1.439964547  #: q^2 / (4 pi eps0) [eV nm] (CODATA 2018)


def mott_density(ionisation_eV, permittivity_rel):
    """Mott density N_M [cm^-3] of a hydrogenic dopant of dilute-limit ionisation energy
    ``ionisation_eV`` [eV] in a host of relative permittivity ``permittivity_rel`` [1]:
    N_M^(1/3) a_B = 0.26 (Edwards & Sienko, Phys. Rev. B 17, 2575 (1978),
    doi:10.1103/PhysRevB.17.2575), with the effective Bohr radius of the hydrogenic level
    a_B = q^2 / (8 pi eps0 eps_r E_i0) (Sze & Ng, 3rd ed., sec. 1.4.1). For Si (E_i0 = 45 meV)
    it gives 7e18 cm^-3, against the 5e18 cm^-3 above which Pearson & Bardeen measured no
    activation energy for boron (Phys. Rev. 75, 865 (1949), doi:10.1103/PhysRev.75.865)."""
    eps_r = np.asarray(permittivity_rel, dtype=float)
    a_b_nm = _E2_4PI_EPS0_EV_NM / (2.0 * eps_r * np.asarray(ionisation_eV, dtype=float))
    return (MOTT_CRITERION / a_b_nm) ** 3 * 1e21


def _src(eg, varshni, eps, dos, cnl):
    return {"band_gap_eV": eg, "varshni": varshni, "permittivity_rel": eps,
            "nc_nv": dos, "cnl_eV": cnl}


_SZE_LEVELS = "Sze & Ng, 3rd ed. (2007), sec. 1.4.1, figure of measured impurity ionisation energies"
_KITTEL = "Kittel, Introduction to Solid State Physics, 8th ed. (2005), ch. 8, table of donor ionisation energies"
_G = "g_D = 2, g_A = 4 (Sze & Ng, 3rd ed., sec. 1.4.1; common practice)"
_MOTT = ("Mott density: hydrogenic criterion N_M^(1/3) a_B = 0.26 with a_B from the ionisation energy "
         "(Edwards & Sienko, Phys. Rev. B 17, 2575 (1978), doi:10.1103/PhysRevB.17.2575, from memory)")


def _dopants(donor_eV, donor_src, acceptor_eV, acceptor_src, acceptor_mott=float("nan"), mott_src=_MOTT):
    """Dopant fields of a built-in material and their sources."""
    return (dict(donor_ionisation_eV=donor_eV, acceptor_ionisation_eV=acceptor_eV, acceptor_mott_cm3=acceptor_mott),
            {"donor_ionisation_eV": donor_src, "acceptor_ionisation_eV": acceptor_src, "degeneracy": _G,
             "mott_cm3": mott_src})


def _with_dopants(m, fields_sources):
    from dataclasses import replace

    fields, src = fields_sources
    return replace(m, sources={**m.sources, **src}, **fields)


# Values recalled from the named handbooks are marked "from memory": check them against the
# printed tables before relying on the last meV.
_BUILTIN = (
    _with_dopants(
    Material("GaAs", 1.424, 5.405e-4, 204.0, 12.9, 4.7e17, 9.0e18, 0.50, _src(
        f"{_SZE} (from memory)", f"{_VUR} III (from memory)", f"{_SZE} (from memory)",
        f"{_SZE} (from memory)", f"{_MONCH} (from memory; about 0.5 eV, common practice)")),
        _dopants(0.0058, f"Si donor: {_SZE_LEVELS} (from memory)", 0.031, f"Zn acceptor: {_SZE_LEVELS} (from memory)")),
    _with_dopants(
    Material("InP", 1.344, 3.63e-4, 162.0, 12.5, 5.7e17, 1.1e19, 0.76, _src(
        f"{_IOFFE} (from memory)", f"{_VUR} III (from memory)", f"{_IOFFE} (from memory)",
        f"{_IOFFE} (from memory)", f"{_MONCH} (from memory)")),
        _dopants(0.0057, f"S/Si donors: {_IOFFE} (from memory)", 0.035, f"Zn acceptor: {_IOFFE} (from memory)")),
    _with_dopants(
    Material("InAs", 0.354, 2.76e-4, 93.0, 15.15, 8.7e16, 6.6e18, 0.50, _src(
        f"{_IOFFE} (from memory)", f"{_VUR} III (from memory)", f"{_IOFFE} (from memory)",
        f"{_IOFFE} (from memory)",
        f"{_MONCH} (from memory); lies above the conduction-band edge: InAs surfaces accumulate")),
        _dopants(0.0014, "hydrogenic estimate 13.6 eV (m*/m0) / eps_r^2 with m* = 0.023 m0 (Sze & Ng, 3rd "
                 "ed., sec. 1.4.1; mass from memory)", 0.010, f"Zn acceptor: {_IOFFE} (from memory)")),
    _with_dopants(
    Material("GaN", 3.39, 0.909e-3, 830.0, 8.9, 2.3e18, 4.6e19, 2.40, _src(
        f"{_IOFFE}, wurtzite (from memory)", f"{_VUR} VIII, wurtzite (from memory)",
        f"{_IOFFE}, wurtzite (from memory)", f"{_IOFFE}, wurtzite (from memory)",
        f"{_MONCH} (from memory)")),
        _dopants(0.015, f"Si donor: {_IOFFE}, 12-17 meV (from memory)", 0.17,
                 "Mg acceptor: Hall activation energy 170 +/- 5 meV of Mg-doped films (Korotkov, Gregie & "
                 "Wessels, Appl. Phys. Lett. 78, 222 (2001); value checked, citation details from memory)", 5.0e20,
                 f"donor: {_MOTT}; Mg (deep, not hydrogenic): E_A = E_A0 - alpha N^(1/3) with alpha ~ 2e-8 eV "
                 "cm from Hall data (Brochen et al., Appl. Phys. Lett. 103, 032102 (2013), from memory), "
                 "vanishing near 5e20 cm^-3")),
    _with_dopants(
    Material("Si", 1.12, 4.73e-4, 636.0, 11.9, 2.86e19, 2.66e19, 0.36, _src(
        f"{_SZE} (from memory)",
        "Thurmond, J. Electrochem. Soc. 122, 1133 (1975), doi:10.1149/1.2134410 (from memory)",
        f"{_SZE} (from memory)", f"{_SZE} (from memory)", f"{_MONCH} (from memory)")),
        _dopants(0.045, f"P donor: {_KITTEL} (value checked)", 0.045, f"B acceptor: {_SZE_LEVELS} (from memory)")),
    _with_dopants(
    Material("Ge", 0.66, 4.774e-4, 235.0, 16.0, 1.04e19, 6.0e18, 0.09, _src(
        f"{_SZE} (from memory)",
        "Thurmond, J. Electrochem. Soc. 122, 1133 (1975), doi:10.1149/1.2134410 (from memory)",
        f"{_SZE} (from memory)", f"{_SZE} (from memory)",
        "Dimoulas et al., Appl. Phys. Lett. 89, 252110 (2006), doi:10.1063/1.2410241: "
        "Fermi level pinned near the valence band (from memory)")),
        _dopants(0.012, f"P donor: {_KITTEL} (value checked)", 0.0104, f"B acceptor: {_SZE_LEVELS} (from memory)")),
)

_REQUIRED = {
    "band_gap_300_eV": (0.01, 10.0), "varshni_alpha_eV_K": (0.0, 1e-2),
    "varshni_beta_K": (0.0, 5000.0), "permittivity_rel": (1.0, 100.0),
    "nc_300_cm3": (1e14, 1e22), "nv_300_cm3": (1e14, 1e22), "cnl_eV": (-2.0, 12.0),
}

_OPTIONAL = {  # dopant fields (section 4.1 of docs/physics.md); absent: no level (ionisation stays full)
    "donor_ionisation_eV": (0.0, 2.0), "acceptor_ionisation_eV": (0.0, 2.0), "donor_degeneracy": (0.1, 16.0),
    "acceptor_degeneracy": (0.1, 16.0), "donor_mott_cm3": (1e12, 1e23), "acceptor_mott_cm3": (1e12, 1e23),
}

_registry: dict[str, Material] = {m.name.lower(): m for m in _BUILTIN}
_BUILTIN_NAMES = frozenset(_registry)
T_RANGE_K = (20.0, 1000.0)  #: the design table's temperature range, over which E_g must stay positive
_NAME = __import__("re").compile(r"[A-Za-z][A-Za-z0-9_.()+-]{0,39}")
_env_loaded = False
_env_loading = False
_ENV_LOCK = threading.RLock()


def _load_env_files() -> None:
    global _env_loaded, _env_loading
    if _env_loaded:
        return
    with _ENV_LOCK:  # another thread waits here until the files are read
        if _env_loaded or _env_loading:  # loading looks names up: the loading thread re-enters
            return
        _env_loading = True
        try:
            for p in filter(None, os.environ.get("RADIALPN_MATERIALS", "").split(os.pathsep)):
                for m in load_material_file(p):
                    register_material(m)
        finally:
            _env_loading = False
            _env_loaded = True  # a bad file is reported once, as before, not on every lookup


def get_material(name: str) -> Material:
    """Look up a material by name, case-insensitive. Raises ``MaterialError`` if unknown."""
    _load_env_files()
    try:
        return _registry[str(name).strip().lower()]
    except KeyError:
        known = ", ".join(sorted(m.name for m in _registry.values()))
        raise MaterialError(f"material: unknown material {name!r}; known: {known}") from None


def material_names() -> list[str]:
    """Names of every known material, in table order."""
    _load_env_files()
    return [m.name for m in _registry.values()]


def register_material(material: Material) -> None:
    """Add a material to this process's table (or replace a user material of the same name).
    A built-in material cannot be redefined: the shipped surrogates are trained on it."""
    if not isinstance(material, Material):
        raise MaterialError(f"material: expected a Material (got {type(material).__name__})")
    if material.name.lower() in _BUILTIN_NAMES:
        raise MaterialError(f"material {material.name}: a built-in material cannot be redefined; give yours its own "
                            f"name (e.g. {material.name}-mine)")
    _registry[material.name.lower()] = material


def is_builtin(name: str) -> bool:
    """True for a material of the built-in table (its definition cannot change at run time)."""
    return str(name).lower() in _BUILTIN_NAMES


def material_parameters(material: Material) -> dict:
    """The numeric fields of a material, JSON-ready (NaN as None): what a bundle records of the
    material it was trained for, and checks again when it is loaded."""
    out = {}
    for key in (*_REQUIRED, *_OPTIONAL):
        v = float(getattr(material, key))
        out[key] = None if v != v else v
    return out


def material_default(key: str):
    """The default of an optional ``Material`` field as ``material_parameters`` writes it (NaN as
    None); "missing" for a required field, which has none."""
    import dataclasses

    for f in dataclasses.fields(Material):
        if f.name == key and f.default is not dataclasses.MISSING:
            v = float(f.default)
            return None if v != v else v
    return "missing"


def material_from_dict(name: str, values: dict) -> Material:
    """Build a ``Material`` from a mapping of the field names of ``Material``, checking each
    against its allowed range. ``sources`` (a mapping) is optional but recommended."""
    if not isinstance(name, str) or not _NAME.fullmatch(name):
        raise MaterialError(f"material: a name of 1-40 letters, digits and _.()+- starting with a letter (got {name!r})")
    if not isinstance(values, dict):
        raise MaterialError(f"material {name}: expected a table of fields")
    fields = {}
    for key, (lo, hi) in {**_REQUIRED, **_OPTIONAL}.items():
        if key not in values:
            if key in _OPTIONAL:
                continue
            raise MaterialError(f"material {name}: missing field {key!r}")
        v = values[key]
        try:
            finite = not isinstance(v, bool) and isinstance(v, (int, float)) and np.isfinite(float(v))
        except OverflowError:
            finite = False
        if not finite:
            raise MaterialError(f"material {name}: {key} must be a finite number in [{lo:g}, {hi:g}] (got {v!r})")
        if not lo <= v <= hi:
            raise MaterialError(f"material {name}: {key} must lie in [{lo:g}, {hi:g}] (got {v:g})")
        fields[key] = float(v)
    unknown = set(values) - set(_REQUIRED) - set(_OPTIONAL) - {"sources"}
    if unknown:
        raise MaterialError(f"material {name}: unknown field(s) {', '.join(sorted(unknown))}")
    sources = values.get("sources", {"all": "user file (no source given)"})
    if not isinstance(sources, dict):
        raise MaterialError(f"material {name}: sources must be a table of field -> text")
    if not all(isinstance(k, str) and isinstance(t, str) for k, t in sources.items()):
        raise MaterialError(f"material {name}: sources must be a table of field -> text")
    m = Material(name=name, sources=dict(sources), **fields)
    gaps = m.band_gap(np.linspace(*T_RANGE_K, 200))
    if not (gaps > 0.01).all():
        raise MaterialError(f"material {name}: the band gap falls to {gaps.min():.3g} eV within {T_RANGE_K[0]:g}-"
                            f"{T_RANGE_K[1]:g} K; it must stay above 0.01 eV (check varshni_alpha_eV_K, varshni_beta_K)")
    return m


def load_material_file(path) -> list[Material]:
    """Read materials from a TOML or JSON file: one table per material, keyed by its name, with
    the fields of ``Material`` (see ``examples/AlGaAs.toml``). Returns them unregistered."""
    from ._textfile import read_table_file

    data = read_table_file(path, MaterialError, "material file")
    if not isinstance(data, dict) or not data:
        raise MaterialError(f"material file {path}: expected one table per material")
    data = data.get("materials", data)
    if not isinstance(data, dict) or not data:
        raise MaterialError(f"material file {path}: expected one table per material")
    out = []
    for name, values in data.items():
        if not isinstance(values, dict):
            raise MaterialError(f"material file {path}: entry {name!r} is not a table")
        out.append(material_from_dict(name, values))
    return out
