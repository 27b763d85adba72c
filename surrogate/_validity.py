"""Where the models stop describing the wire: the limits every engine enforces in ``status``.

Parabolic bands (the F_1/2 statistics with N ~ T^(3/2) of ``_statistics``) describe a band only
near its edge. In Kane's two-band model the dispersion is E (1 + alpha E) = hbar^2 k^2 / 2m*
with alpha ~ 1/E_g (E. O. Kane, J. Phys. Chem. Solids 1, 249 (1957),
doi:10.1016/0022-3697(57)90013-6, from memory). A degenerate Fermi level that the parabolic
model puts E above the band edge lies at E' = (sqrt(1 + 4 alpha E) - 1) / (2 alpha) in the
two-band model (same carrier density, since the density fixes k_F). At E = 0.25 E_g the
parabolic level is 0.043 E_g (17 % of the penetration) too deep and the density of states at
the Fermi level is 1.7 times the parabolic one: beyond that the model's Fermi levels, V_bi0
and screening lengths are not design estimates any more. ``DEGENERACY_GAP_FRACTION`` is that
limit. It applies to the neutral core and shell and to the Fermi level at the surface (a
surface pinned inside a band; the surface-state model also needs the surface Fermi level near
the gap, docs/physics.md section 5).
"""

from __future__ import annotations

import numpy as np

DEGENERACY_GAP_FRACTION = 0.25  #: largest Fermi-level penetration into a band, as a fraction of E_g [1]
#: the depletion engine's bulk levels count majority carriers only (p = N_A), so its V_bi0 is low
#: by about kT (n_i/N)^2 per region (``_bulk``): 0.4 mV at n_i = 0.1 N and 500 K, 40 mV at
#: n_i = N. Beyond this share of the lighter doping it refuses the design (the solver, which
#: solves the full neutrality, answers it) [1]
INTRINSIC_SHARE_LIMIT = 0.1


def intrinsic_text(ni_cm3: float, doping_cm3: float) -> str:
    """One-line status of a design whose intrinsic density ``ni_cm3`` [cm^-3] reaches
    ``INTRINSIC_SHARE_LIMIT`` of its lighter doping ``doping_cm3`` [cm^-3]."""
    return (f"outside the model: intrinsic carriers (n_i {ni_cm3:.2g} cm^-3) reach {100 * ni_cm3 / doping_cm3:.0f} % "
            f"of the lighter doping ({doping_cm3:.2g} cm^-3); the depletion engine counts majority carriers only "
            "(V_bi0 low by about kT (n_i/N)^2); the solver engine answers it")


def band_penetration(fermi_minus_ev_eV, band_gap_eV):
    """How far [eV] the Fermi level lies inside a band: E_v - E_F below the valence band, E_F - E_c
    above the conduction band, 0 inside the gap, for E_F - E_v = ``fermi_minus_ev_eV`` [eV]."""
    y = np.asarray(fermi_minus_ev_eV, dtype=float)
    return np.maximum(np.maximum(-y, y - band_gap_eV), 0.0)


def beyond_parabolic(fermi_minus_ev_eV, band_gap_eV):
    """True [bool] where the Fermi level lies deeper inside a band than ``DEGENERACY_GAP_FRACTION``
    of the gap ``band_gap_eV`` [eV] (see the module docstring)."""
    return band_penetration(fermi_minus_ev_eV, band_gap_eV) > DEGENERACY_GAP_FRACTION * np.asarray(band_gap_eV)


def penetration_text(where: str, fermi_minus_ev_eV: float, band_gap_eV: float, n_type_frame: bool) -> str:
    """One-line status for a Fermi level beyond the parabolic-band limit. ``n_type_frame``: the
    design's polarity is mirrored (an n-core design), so valence and conduction swap names."""
    below = fermi_minus_ev_eV < 0
    band = ("conduction" if n_type_frame else "valence") if below else ("valence" if n_type_frame else "conduction")
    depth = -fermi_minus_ev_eV if below else fermi_minus_ev_eV - band_gap_eV
    return (f"outside the model: the {where} Fermi level lies {depth:.3g} eV inside the {band} band, beyond "
            f"{DEGENERACY_GAP_FRACTION:g} E_g = {DEGENERACY_GAP_FRACTION * band_gap_eV:.3g} eV where parabolic bands hold")
