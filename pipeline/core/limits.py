"""Limits on raw input and the physical range of values, checked right after reading.

Every limit has its own finding code (findings.py) and is stated in the README. They keep
one bad or hostile file from costing more than its own table: memory, time and recursion
stay bounded whatever the input.

The physical ranges are deliberately wide (a value outside them is a mistake in any real
table, never a property of a substance); the narrower, physics-based checks come later in
the validation stage. Their choice is common practice: the widest ranges that published
thermochemical tables span, with a margin of one or two orders of magnitude.
"""

#: largest CSV table read [bytes]; a larger file is refused before it is read (TAB-TOO-LARGE)
MAX_TABLE_BYTES = 8 * 1024 * 1024
#: most data rows in one table (TAB-TOO-LARGE)
MAX_ROWS = 50_000
#: most columns in one table (TAB-TOO-LARGE)
MAX_COLUMNS = 32
#: largest source.json [bytes] (SRC-TOO-LARGE)
MAX_SOURCE_BYTES = 1024 * 1024
#: deepest nesting of arrays and objects in a JSON input (SRC-TOO-DEEP)
MAX_JSON_DEPTH = 32
#: most tables listed in one source.json (SRC-TOO-LARGE)
MAX_TABLES_PER_SOURCE = 10_000
#: longest unit expression [characters] (UNIT-TOO-COMPLEX)
MAX_UNIT_LENGTH = 80
#: largest exponent magnitude in a unit expression (UNIT-TOO-COMPLEX)
MAX_UNIT_EXPONENT = 6
#: a file changed less than this long ago [s] may change again within one tick of the file
#: system's clock, unseen in its times: what is remembered of files by their times (the
#: digests of a rebuild's keys, a process's source.json files) is not trusted for it
RECENT_CHANGE = 2.0
#: largest library.json read by props and diff [bytes]: about 240 000 species (8.7 KB
#: each), some 5 GB of memory to read
MAX_LIBRARY_BYTES = 2 * 1024 * 1024 * 1024

#: physical range of each internal column after conversion to SI: (low, high), inclusive;
#: T [K], Cp, S, -(G-H298)/T [J/(mol K)], H-H298 [J/mol] and their standard uncertainties
#: (VALUE-RANGE)
PHYSICAL_RANGE = {
    "T": (0.01, 1.0e5),
    "Cp": (-1.0e6, 1.0e6),
    "dH": (-1.0e9, 1.0e9),
    "S": (-1.0e6, 1.0e6),
    "u_Cp": (1.0e-9, 1.0e6),
    "u_dH": (-1.0e9, 1.0e9),
    "u_S": (-1.0e6, 1.0e6),
    "gef": (-1.0e6, 1.0e6),
}
#: physical range of the anchors and the standard pressure in source.json (SRC-QUANTITY)
ANCHOR_RANGE = {
    "enthalpy_of_formation_298": (-1.0e8, 1.0e8),    # [J/mol]
    "entropy_298": (1.0e-3, 1.0e5),                   # [J/(mol K)], third-law entropies > 0
    "standard_pressure": (1.0, 1.0e8),                # [Pa]
    "transition_temperature": (0.01, 1.0e5),          # [K]
    "transition_enthalpy": (-1.0e7, 1.0e7),           # [J/mol], the sign is checked later
    "transition_u_enthalpy": (0.0, 1.0e7),            # [J/mol]
    "u_enthalpy_of_formation_298": (0.0, 1.0e7),      # [J/mol]
    "u_entropy_298": (0.0, 1.0e4),                    # [J/(mol K)]
    "stated_temperature": (0.01, 1.0e5),              # [K]
    "stated_enthalpy": (-1.0e8, 1.0e8),               # [J/mol], ΔfH°(T)
    "stated_gibbs_energy": (-1.0e8, 1.0e8),           # [J/mol], ΔfG°(T)
}
#: a range of use or breakpoint [K] lies inside this interval (FIT-SETTING)
TEMPERATURE_SETTING_RANGE = (10.0, 1.0e5)

#: standard uncertainties of anchors and enthalpies of transition a source does not state
#: (common practice): u(ΔfH°) [J/mol], u(S°) [J/(mol K)] and u(ΔH_trs) relative to ΔH_trs.
#: ΔfH° = 0 of an element's reference species is exact by definition.
DEFAULT_U_ANCHOR_H = 500.0
DEFAULT_U_ANCHOR_S = 0.25
DEFAULT_U_TRANSITION_REL = 0.02

#: ΔfH°(298.15 K) [J/mol] of an element's reference species within this of 0 counts as 0:
#: a published coefficient set states it only to the rounding of its constants (the
#: 7-coefficient N2 set of the GRI-Mech 3.0 file gives 1.4 J/mol; common practice)
REFERENCE_H_TOLERANCE = 5.0
