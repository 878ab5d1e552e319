"""Labelling mistakes that gave wrong numbers without a warning, caught by physics and named.

Reference data: CoolProp's ideal-gas Cp (``Cp0molar``) of real gases (reference equations of
state listed in thermoledger/testing/coverage.py) and their S°(298.15 K) from published
tables (thermoledger/testing/labelling.py names them; from memory). Rates are measured over
seeded trials (benchmarks/detection_rates.py prints them with more trials).
"""

import json

import numpy as np
import pytest
from thermoledger.core.constants import GAS_CONSTANT as R
from thermoledger.testing import labelling, table_entry, write_source

from .conftest import run_cli, tree_hashes

pytest.importorskip("CoolProp")


@pytest.fixture(scope="module")
def rates():
    return labelling.labelling_rates(trials=200, seed=7)


def test_cv_under_a_cp_label_is_caught_wherever_the_vibrations_are_frozen(rates):
    """Where Cv falls below Cp(0) at the low end, physics names it in >= 99 % of trials."""
    caught, n = rates[0]["Cv under a Cp label"]["frozen"]
    assert n >= 100 and caught / n >= 0.99
    # what escapes are large, floppy molecules whose vibrations already give more than R at
    # the low end: their Cv looks like the Cp of another molecule
    escaped = set(rates[0]["Cv under a Cp label"]["missed"])
    assert escaped <= {"C2H6", "C2H4", "C3H8", "C3H6", "C4H10", "C2H6O", "C3H6O", "C6H6", "OCS"}


def test_no_false_alarm_on_clean_tables_of_real_gases(rates):
    """Clean tables (half of them per mass) of the 20 gases of testing/coverage.py: nitrogen,
    oxygen, carbon monoxide, hydrogen, hydrogen chloride, carbon dioxide, nitrous oxide,
    carbonyl sulfide, sulfur dioxide, hydrogen sulfide, ammonia, methane, ethane, ethylene,
    propane, propylene, n-butane, dimethyl ether, acetone, benzene."""
    assert len(labelling.gases()) == 20
    false_errors, false_warnings, n = rates[1]
    assert n == 200 and false_errors <= 0.005 * n and false_warnings <= 0.02 * n


def test_a_lighter_wrong_formula_of_a_per_mass_table_is_caught_for_small_molecules(rates):
    got = rates[0]["per-mass table, lighter wrong formula"]
    small = {"N2", "O2", "CO", "HCl", "CO2", "N2O", "OCS", "H2S", "NH3", "CH4"}
    assert not small & set(got["missed"])


@pytest.mark.parametrize("mixup", list(labelling.SCALE_MIXUPS))
def test_temperature_scale_mixups_between_sources_are_named(mixup):
    named, n = labelling.scale_rates(trials=20, seed=11)[mixup]
    assert named >= n - 1


def test_an_honest_second_source_is_never_called_a_scale_mixup():
    named, n = labelling.scale_rates(trials=20, seed=12)["honest second source"]
    assert named == 0


# --- the four mistakes of the report, as real files through the CLI ------------------------

T = np.array([200.0, 250.0, 298.15, 350.0, 400.0, 500.0, 600.0, 700.0, 800.0, 900.0, 1000.0,
              1100.0, 1200.0, 1300.0, 1400.0, 1500.0])


def _csv(header, t, cp):
    return header + "\n" + "".join(f"{a:.6g},{b:.6g}\n" for a, b in zip(t, cp))


def _check(tmp_path, capsys, sources):
    raw = tmp_path / "raw"
    for source_id, priority, entries in sources:
        write_source(raw, source_id, entries, priority=priority)
    before = tree_hashes(raw)
    code, out, err = run_cli(capsys, "check", "--raw", raw, "--report", tmp_path / "f.json")
    assert tree_hashes(raw) == before
    found = json.loads((tmp_path / "f.json").read_text())["findings"]
    return code, out, found


def _entry(file, species, formula, geometry, s298, text):
    return dict(table_entry(file, species, formula, geometry, s=f"{s298} J/(mol*K)"),
                header=[], rows=[], text=text)


def test_cv_given_as_cp_for_nitrogen(tmp_path, capsys):
    cv = labelling.reference_cp("Nitrogen", T) - R      # Cv(300 K) = 20.81, not 29.13
    code, out, found = _check(tmp_path, capsys, [("lab", 1, [_entry(
        "n2.csv", "N2", "N2", "linear", 191.609, _csv("T [K],Cp [J/(mol*K)]", T, cv))])])
    hits = [f for f in found if f["code"] == "LABEL-CV-AS-CP"]
    assert code == 1 and hits and hits[0]["severity"] == "error"
    assert "Cv" in hits[0]["message"] and "add R" in hits[0]["fix"]


def test_degrees_celsius_under_a_kelvin_header_for_carbon_dioxide(tmp_path, capsys):
    t = T[T >= 298.15]
    cp = labelling.reference_cp("CarbonDioxide", t)
    code, out, found = _check(tmp_path, capsys, [("lab", 1, [_entry(
        "co2.csv", "CO2", "CO2", "linear", 213.785,
        _csv("T [K],Cp [J/(mol*K)]", t - 273.15, cp))])])          # "25-1226.85 K"
    hits = [f for f in found if f["code"] == "LABEL-CELSIUS-AS-KELVIN"]
    assert code == 1 and hits and "[degC]" in hits[0]["fix"]


def test_fahrenheit_under_a_celsius_header_is_named_by_the_second_source(tmp_path, capsys):
    t = T[T >= 298.15]
    cp = labelling.reference_cp("CarbonDioxide", T)
    fahrenheit = (t - 273.15) * 1.8 + 32.0
    code, out, found = _check(tmp_path, capsys, [
        ("main", 10, [_entry("co2.csv", "CO2", "CO2", "linear", 213.785,
                             _csv("T [K],Cp [J/(mol*K)]", T, cp))]),
        ("other", 1, [_entry("co2-f.csv", "CO2", "CO2", "linear", 213.785,
                             _csv("T [degC],Cp [J/(mol*K)]", fahrenheit, cp[T >= 298.15]))])])
    hits = [f for f in found if f["code"] == "SRC-T-SCALE"]
    assert code == 1 and len(hits) == 1 and hits[0]["file"] == "other/co2-f.csv"
    assert "Fahrenheit under a Celsius label" in hits[0]["message"]
    assert not [f for f in found if f["code"] == "SRC-DISAGREE"]


def test_a_per_gram_table_with_the_formula_of_another_gas(tmp_path, capsys):
    per_gram = labelling.reference_cp("CarbonDioxide", T) / 44.0095    # CO2 values, CO formula
    code, out, found = _check(tmp_path, capsys, [("lab", 1, [_entry(
        "co2.csv", "CO2", "CO", "linear", 213.785, _csv("T [K],Cp [J/(g*K)]", T, per_gram))])])
    hits = [f for f in found if f["code"] == "LABEL-MOLAR-MASS"]
    assert code == 1 and hits and "formula" in hits[0]["fix"]


def test_sources_whose_anchors_disagree_get_a_warning_with_both_values(tmp_path, capsys):
    cp = labelling.reference_cp("Nitrogen", T)
    text = _csv("T [K],Cp [J/(mol*K)]", T, cp)
    code, out, found = _check(tmp_path, capsys, [
        ("main", 10, [_entry("n2.csv", "N2", "N2", "linear", 191.609, text)]),
        ("other", 1, [_entry("n2.csv", "N2", "N2", "linear", 192.5, text)])])
    (hit,) = [f for f in found if f["code"] == "SRC-ANCHOR-DISAGREE"]
    assert hit["severity"] == "warning" and hit["file"] == "other/n2.csv"
    assert "192.5" in hit["message"] and "191.609" in hit["message"]


def test_the_frozen_vibrations_check_decides_as_without_its_bound(monkeypatch):
    """check_frozen_vibrations passes a table when the coarse problem's misfit
    (labels._misfit_bound) is below the threshold, without solving the whole one: the
    mistakes caught and missed and the false alarms over seeded trials of real gases are
    those of the check that always solves the whole problem."""
    from thermoledger.checks import labels

    with_bound = labelling.labelling_rates(trials=40, seed=19)
    monkeypatch.setattr(labels, "_misfit_bound", lambda t, y, modes: float("inf"))
    assert labelling.labelling_rates(trials=40, seed=19) == with_bound
