"""Detection rates over seeded randomised trials (200 per defect, 0.1 % noise).

Targets: single-point slips of 2 % or more caught in >= 99 % of trials; calorie/joule,
R, molar-mass and kJ/J factor mistakes in 100 %; no false error on clean tables.
The same harness prints the rates: benchmarks/detection_rates.py.
"""

import pytest
from thermoledger.testing import trials

pytest.importorskip("CoolProp")


@pytest.fixture(scope="module")
def measured():
    return trials.detection_rates(trials=200, seed=2026)


def test_slips_caught_in_at_least_99_percent(measured):
    caught, n = measured[0]["slip >= 2 %"]
    assert n == 200 and caught / n >= 0.99


@pytest.mark.parametrize("label", ["cal taken as J (x 1/4.184)", "Cp/R taken as Cp (x 1/R)",
                                   "per gram taken as per mole (x 1/M)", "J taken as kJ (x 1000)"])
def test_factor_mistakes_always_caught(measured, label):
    caught, n = measured[0][label]
    assert caught == n == 200


def test_no_false_errors_on_clean_tables(measured):
    false_errors, false_warnings, n = measured[1]
    assert false_errors == 0
    assert false_warnings <= 0.02 * n  # end-point warnings on steep low-T tables are rare
