"""Band-to-band tunnelling risk of the junction: the peak field and a WKB transmission estimate.

Kane's WKB transmission of an electron through the gap of a direct-gap semiconductor in a
uniform field F (E. O. Kane, J. Phys. Chem. Solids 12, 181 (1960),
doi:10.1016/0022-3697(60)90035-4, from memory; the same form is quoted for tunnel junctions in
Sze & Ng, Physics of Semiconductor Devices, 3rd ed., 2007, ch. 2, from memory):

    T(F) = exp(-F_0 / F),   F_0 = pi sqrt(m_r) E_g^(3/2) / (2 sqrt(2) q hbar)

with m_r the reduced mass of electron and hole. The masses are the density-of-states masses of
the material table, m/m_0 = (N / (2 (2 pi m_0 k T / h^2)^(3/2)))^(2/3) (Sze & Ng, 3rd ed.,
eq. 1.19-1.20 inverted), an approximation (common practice for an estimate): for indirect or
many-valley bands (Si, Ge) the tunnelling mass is smaller and the estimate pessimistic about
tunnelling, i.e. optimistic about the wire. The field is taken as uniform at its peak value,
which overestimates T for a graded field.

Threshold: ``TUNNEL_RISK_LOG10``. T = 1e-10 is reached at about 1.5e6 V/cm in Si and 7e5 V/cm
in GaAs with these masses: the field range at which Zener tunnelling starts to take over junction
breakdown (junctions breaking down below about 4 E_g/q; Sze & Ng, 3rd ed., sec. 2.4, from
memory). Above it the equilibrium electrostatics is not the whole story and an intrinsic
interlayer (a p-i-n wire) lowers the field.
"""

from __future__ import annotations

import numpy as np

from ._constants import H_PLANCK, HBAR, K_B, M_E, Q

TUNNEL_RISK_LOG10 = -10.0  #: log10 of the WKB transmission above which a row is flagged `tunnelling risk`


def dos_mass(dos_cm3, temperature_K):
    """Density-of-states mass [m_0] of a band with effective density of states ``dos_cm3``
    [cm^-3] at ``temperature_K`` [K]: N = 2 (2 pi m k T / h^2)^(3/2) inverted."""
    t = np.asarray(temperature_K, dtype=float)
    n0 = 2.0 * (2.0 * np.pi * M_E * K_B * t / H_PLANCK ** 2) ** 1.5 * 1e-6  # [cm^-3] for m = m_0
    return (np.asarray(dos_cm3, dtype=float) / n0) ** (2.0 / 3.0)


def kane_field(band_gap_eV, reduced_mass_rel):
    """Kane's characteristic field F_0 [V/m] = pi sqrt(m_r m_0) (q E_g)^(3/2) / (2 sqrt 2 q hbar)
    for gap ``band_gap_eV`` [eV] and reduced mass ``reduced_mass_rel`` [m_0]."""
    eg = np.asarray(band_gap_eV, dtype=float) * Q
    return np.pi * np.sqrt(np.asarray(reduced_mass_rel) * M_E) * eg ** 1.5 / (2.0 * np.sqrt(2.0) * Q * HBAR)


def tunnel_log10(peak_field_V_per_m, band_gap_eV, nc_cm3, nv_cm3, temperature_K):
    """log10 of Kane's WKB transmission [1] at field ``peak_field_V_per_m`` [V/m] (see the module
    docstring); -inf at zero field."""
    me, mh = dos_mass(nc_cm3, temperature_K), dos_mass(nv_cm3, temperature_K)
    f0 = kane_field(band_gap_eV, me * mh / (me + mh))
    with np.errstate(divide="ignore"):
        return -f0 / np.asarray(peak_field_V_per_m, dtype=float) / np.log(10.0)
