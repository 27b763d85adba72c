"""Physical constants [SI unless stated], CODATA 2018 exact or recommended values.

Source: E. Tiesinga et al., "CODATA recommended values of the fundamental physical
constants: 2018", Rev. Mod. Phys. 93, 025010 (2021), doi:10.1103/RevModPhys.93.025010.
"""

Q = 1.602176634e-19  #: elementary charge [C] (exact)
K_B_EV = 8.617333262e-5  #: Boltzmann constant [eV/K] (exact ratio k_B / e)
EPS0 = 8.8541878128e-12  #: vacuum permittivity [F/m]

CM3_TO_M3 = 1.0e6  #: multiply a density in cm^-3 by this to get m^-3
CM2_TO_M2 = 1.0e4  #: multiply a density in cm^-2 by this to get m^-2
NM = 1.0e-9  #: one nanometre [m]
HBAR = 1.054571817e-34  #: reduced Planck constant [J s]
H_PLANCK = 6.62607015e-34  #: Planck constant [J s] (exact)
M_E = 9.1093837015e-31  #: electron rest mass [kg]
K_B = 1.380649e-23  #: Boltzmann constant [J/K] (exact)
