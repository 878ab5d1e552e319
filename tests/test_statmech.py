"""The rigid-rotor / harmonic-oscillator model used for the demo and for reference tables.

External check: CoolProp ideal-gas Cp (nitrogen: Span et al. 2000; carbon monoxide:
Lemmon & Span, J. Chem. Eng. Data 51, 785 (2006); carbon dioxide: Span & Wagner 1996). The
RRHO model neglects anharmonicity and rotation-vibration coupling, so it is expected to fall
below the reference by well under 1 % up to 1500 K (common practice). Wavenumbers: N2
2358.57, CO 2169.81 cm^-1 (Huber & Herzberg 1979, harmonic constants, from memory); CO2
1333, 667 (x2), 2349 cm^-1 (Shimanouchi, NSRDS-NBS 39, 1972, from memory).
"""

import numpy as np
import pytest
from thermoledger.core.constants import GAS_CONSTANT as R
from thermoledger.physics import statmech

CP = pytest.importorskip("CoolProp.CoolProp")


def test_einstein_function_limits():
    # classical limit E -> 1 (x -> 0); frozen mode E -> 0 (x -> infinity)
    assert statmech.einstein(1e-6) == pytest.approx(1.0, abs=1e-9)
    assert statmech.einstein(200.0) == pytest.approx(0.0, abs=1e-80)
    x = 1.7
    assert statmech.einstein(x) == pytest.approx(x * x * np.exp(x) / (np.exp(x) - 1) ** 2)


def test_two_level_electronic_maximum_is_the_schottky_peak():
    # two equal-degeneracy levels: Cp,el/R peaks at 0.4392 near x = 2.3994 (Schottky anomaly,
    # textbook result, from memory)
    eps = 100.0  # [1/cm]
    t = statmech.SECOND_RADIATION_CM_K * eps / np.linspace(1.5, 3.5, 2001)
    c = statmech.electronic_cp_over_r(t, [(1, 0.0), (1, eps)])
    assert c.max() == pytest.approx(0.4392, abs=2e-4)


@pytest.mark.parametrize("fluid, nu, g", [
    ("Nitrogen", [2358.57], [1]),
    ("CarbonMonoxide", [2169.81], [1]),
    ("CarbonDioxide", [1333.0, 667.0, 2349.0], [1, 2, 1]),
])
def test_rrho_against_reference_ideal_gas(fluid, nu, g):
    t = np.array([200.0, 298.15, 500.0, 1000.0, 1500.0])
    ref = np.array([CP.PropsSI("Cp0molar", "T", x, "Dmolar", 1e-6, fluid) for x in t])
    got = R * statmech.rrho_cp_over_r(t, "linear", nu, g)
    assert np.max(np.abs(got / ref - 1)) < 1e-2
