"""Published values for the formation and reaction checks (tests/test_formation.py) and the
graphite table the demo's furnace source starts from.

All values are recalled from memory of the NIST-JANAF Thermochemical Tables, 4th ed.
(M. W. Chase, J. Phys. Chem. Ref. Data Monograph 9, 1998), and of the CODATA Key Values
(J. D. Cox, D. D. Wagman & V. A. Medvedev, Hemisphere, 1989) — "from memory", as the
project's rules ask; the tolerances of the tests allow for that.
"""

#: Cp of graphite, C(cr), the reference state of carbon [K, J/(mol K)] (NIST-JANAF, from
#: memory)
GRAPHITE_CP = [(298.15, 8.517), (300.0, 8.581), (400.0, 11.817), (500.0, 14.623),
               (600.0, 16.844), (700.0, 18.537), (800.0, 19.827), (900.0, 20.824),
               (1000.0, 21.610), (1100.0, 22.244), (1200.0, 22.766), (1300.0, 23.204),
               (1400.0, 23.578), (1500.0, 23.904), (1600.0, 24.191), (1700.0, 24.448),
               (1800.0, 24.681), (1900.0, 24.895), (2000.0, 25.094)]
#: S°(298.15 K) of graphite [J/(mol K)] and its standard uncertainty (CODATA, from memory)
GRAPHITE_S298 = (5.74, 0.10)

#: anchors of the gases: ΔfH°(298.15 K) [kJ/mol], u, S°(298.15 K) [J/(mol K)], u (CODATA Key
#: Values; CH4 from NIST-JANAF; from memory)
ANCHORS = {
    "H2": (0.0, 0.0, 130.680, 0.003),
    "O2": (0.0, 0.0, 205.152, 0.005),
    "CO": (-110.53, 0.17, 197.660, 0.004),
    "CO2": (-393.51, 0.13, 213.785, 0.010),
    "H2O": (-241.826, 0.040, 188.835, 0.010),
    "CH4": (-74.87, 0.34, 186.25, 0.10),
}

#: ΔfG° [kJ/mol] and log10 Kf at T [K] (NIST-JANAF, from memory)
PUBLISHED_FORMATION = {
    "CO2": {500.0: (-394.939, 41.259), 1000.0: (-395.886, 20.679), 1500.0: (-396.288, 13.800)},
    "H2O": {500.0: (-219.051, 22.884), 1000.0: (-192.590, 10.060), 1500.0: (-164.376, 5.724)},
    "CH4": {500.0: (-32.741, 3.420), 1000.0: (19.492, -1.018)},
    "CO": {500.0: (-155.414, 16.236), 1000.0: (-200.275, 10.461)},
}

#: ΔfH° [kJ/mol] at T [K] (NIST-JANAF, from memory)
PUBLISHED_DFH = {"CO2": {1000.0: -394.623}, "H2O": {1000.0: -247.857},
                 "CH4": {1000.0: -89.849}}

#: log10 K of the water-gas shift CO + H2O = CO2 + H2 at T [K]: the difference of the
#: published log10 Kf above (NIST-JANAF, from memory); K(1000 K) ≈ 1.4 as textbooks quote
WATER_GAS_SHIFT = {500.0: 41.259 - 16.236 - 22.884, 1000.0: 20.679 - 10.461 - 10.060}
