"""Physical constants and reference conditions, each with its source.

Exact constants are the defining constants of the SI (2019 redefinition,
BIPM SI Brochure, 9th edition, 2019); derived constants are computed from them
here and never retyped; conventions are the reference state used by
thermochemical tables.

References
----------
[1] BIPM, The International System of Units (SI), 9th edition (2019), Table 1.
[2] E. Tiesinga et al., CODATA recommended values of the fundamental physical
    constants: 2018, Rev. Mod. Phys. 93, 025010 (2021), doi:10.1103/RevModPhys.93.025010.
[3] IUPAC, Quantities, Units and Symbols in Physical Chemistry ("Green Book"),
    3rd edition (2007), sections 2.11 and 7.2 (standard pressure, thermochemical calorie).
"""

import math

# --- exact (SI 2019) [1] -------------------------------------------------------
PLANCK = 6.62607015e-34  # h [J s], exact
SPEED_OF_LIGHT = 299792458.0  # c [m/s], exact
BOLTZMANN = 1.380649e-23  # k [J/K], exact
AVOGADRO = 6.02214076e23  # N_A [1/mol], exact

# --- derived from the exact constants [1, 2] ----------------------------------
GAS_CONSTANT = BOLTZMANN * AVOGADRO  # R [J/(mol K)] = 8.314462618...
#: second radiation constant c2 = h c / k, in [cm K] so that theta = c2 * wavenumber[1/cm]
SECOND_RADIATION_CM_K = PLANCK * SPEED_OF_LIGHT / BOLTZMANN * 100.0

# --- conventions [3] -----------------------------------------------------------
REFERENCE_TEMPERATURE = 298.15  # [K], thermochemical reference temperature
STANDARD_PRESSURE = 100000.0  # [Pa], IUPAC standard-state pressure (1 bar), exact
ATMOSPHERE = 101325.0  # [Pa], standard atmosphere, exact by definition
THERMOCHEMICAL_CALORIE = 4.184  # [J], exact by definition; the meaning of a bare "cal"

#: S(1 bar) - S(1 atm) for an ideal gas [J/(mol K)] = R ln(101325/100000) (= +0.1094)
ENTROPY_ATM_TO_BAR = GAS_CONSTANT * math.log(ATMOSPHERE / STANDARD_PRESSURE)
