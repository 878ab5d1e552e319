"""Formation and reaction properties (library/formation.py, library/reaction.py,
release/formation.py) against published values.

External reference data:
- Ideal-gas Cp of H2, O2, CO, CO2, H2O and CH4 from CoolProp's reference equations of state
  (ideal-gas parts): Leachman et al., J. Phys. Chem. Ref. Data 38, 721 (2009) (normal H2);
  Schmidt & Wagner, Fluid Phase Equilib. 19, 175 (1985); Lemmon & Span, J. Chem. Eng. Data
  51, 785 (2006) (CO); Span & Wagner, J. Phys. Chem. Ref. Data 25, 1509 (1996); Wagner &
  Pruß (IAPWS-95), J. Phys. Chem. Ref. Data 31, 387 (2002); Setzmann & Wagner, J. Phys.
  Chem. Ref. Data 20, 1061 (1991).
- Graphite Cp, the anchors and the published ΔfH°, ΔfG°, log10 Kf: NIST-JANAF Thermochemical
  Tables (Chase, 1998) and CODATA Key Values (Cox, Wagman & Medvedev, 1989), from memory
  (thermoledger/testing/formation.py).

Tolerance: 0.3 kJ/mol on ΔfH° and ΔfG° (log10 Kf: the same in G, 0.3 kJ/mol / (R T ln 10)).
The published tables round to 1 J/mol, but their own stated uncertainties of ΔfH°(298.15 K)
are 0.04-0.34 kJ/mol, and the two heat-capacity sources (statistical sums for the tables,
reference equations of state here; graphite from memory) differ by up to about 0.1 % in Cp,
which moves H(1500 K) − H298 by up to about 0.1 kJ/mol.
"""

import json
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from thermoledger.cli import main as cli
from thermoledger.core.constants import GAS_CONSTANT as R
from thermoledger.core.errors import InputError, SpeciesNotFound
from thermoledger.library import document, reaction
from thermoledger.library.formation import Formation
from thermoledger.testing import condensed, table_entry, write_source
from thermoledger.testing.formation import (
    ANCHORS,
    GRAPHITE_CP,
    GRAPHITE_S298,
    PUBLISHED_DFH,
    PUBLISHED_FORMATION,
    WATER_GAS_SHIFT,
)

CP = pytest.importorskip("CoolProp.CoolProp")

GASES = {  # name: (CoolProp fluid, geometry)
    "H2": ("Hydrogen", "linear"), "O2": ("Oxygen", "linear"),
    "CO": ("CarbonMonoxide", "linear"), "CO2": ("CarbonDioxide", "linear"),
    "H2O": ("Water", "nonlinear"), "CH4": ("Methane", "nonlinear"),
}
TOL_G = 300.0     # [J/mol], see the module docstring


def _cp0(fluid, t):
    return CP.PropsSI("Cp0molar", "T", float(t), "Dmolar", 1e-6, fluid)


def _gas_tables():
    t = np.unique(np.append(np.arange(300.0, 2000.0 + 1e-9, 25.0), 298.15))
    out = []
    for name, (fluid, geometry) in GASES.items():
        h, uh, s, us = ANCHORS[name]
        out.append(dict(table_entry(f"{name.lower()}.csv", name, name, geometry,
                                    h=f"{h} kJ/mol", s=f"{s} J/(mol*K)",
                                    u_enthalpy_of_formation_298=f"{uh} kJ/mol",
                                    u_entropy_298=f"{us} J/(mol*K)"),
                        header=["T [K]", "Cp [J/(mol*K)]"],
                        rows=[[f"{x:.10g}", f"{_cp0(fluid, x):.10g}"] for x in t]))
    return out


def _graphite(**more):
    return dict({"file": "graphite.csv", "species": "C", "formula": "C", "phase": "cr",
                 "enthalpy_of_formation_298": "0 kJ/mol",
                 "entropy_298": f"{GRAPHITE_S298[0]} J/(mol*K)",
                 "u_entropy_298": f"{GRAPHITE_S298[1]} J/(mol*K)"}, **more,
                header=["T [K]", "Cp [J/(mol*K)]"], rows=[[f"{t:g}", f"{c}"] for t, c in GRAPHITE_CP])


@pytest.fixture(scope="module")
def lib(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("formation")
    write_source(tmp / "raw", "gases", _gas_tables(), method="compilation")
    write_source(tmp / "raw", "graphite", [_graphite(stated_formation=[])], method="compilation")
    assert cli.main(["build", "--raw", str(tmp / "raw"), "--out", str(tmp / "out"),
                     "--no-report", "--quiet"]) == 0
    return tmp / "out", document.load(tmp / "out")


@pytest.mark.parametrize("name,t", [(n, t) for n, v in PUBLISHED_FORMATION.items() for t in v])
def test_gibbs_energy_and_log_kf_of_formation_match_the_published_tables(lib, name, t):
    got = Formation(lib[1]).at(f"{name}(g)", [t])
    dfg, log_kf = PUBLISHED_FORMATION[name][t]           # NIST-JANAF, from memory
    assert got["dfG"][0] == pytest.approx(1000 * dfg, abs=TOL_G)
    assert got["log10Kf"][0] == pytest.approx(log_kf, abs=TOL_G / (R * t * math.log(10)))


@pytest.mark.parametrize("name", list(PUBLISHED_DFH))
def test_enthalpy_of_formation_at_1000_k_matches_the_published_table(lib, name):
    got = Formation(lib[1]).at(f"{name}(g)", [298.15, 1000.0])
    assert got["dfH"][0] == 1000 * ANCHORS[name][0]      # the anchor itself, exactly
    assert got["u_dfH"][0] == pytest.approx(1000 * ANCHORS[name][1], rel=1e-9)
    assert got["dfH"][1] == pytest.approx(1000 * PUBLISHED_DFH[name][1000.0], abs=TOL_G)


@pytest.mark.parametrize("t", list(WATER_GAS_SHIFT))
def test_the_water_gas_shift_constant_matches_the_published_one(lib, t):
    got = reaction.evaluate(lib[1], "CO + H2O = CO2 + H2", [t])
    assert got["log10K"][0] == pytest.approx(WATER_GAS_SHIFT[t],
                                             abs=TOL_G / (R * t * math.log(10)))
    # the anchors' stated uncertainties dominate at the reference temperature
    u = math.sqrt(sum((1000 * ANCHORS[n][1]) ** 2 for n in ("CO", "H2O", "CO2")))
    assert got["u_dH"][0] == pytest.approx(u, rel=0.05)


def test_the_reaction_command_prints_json_and_text_in_the_units_asked(lib, capsys):
    out = str(lib[0])
    assert cli.main(["reaction", out, "CO + H2O = CO2 + H2", "726.85", "--temperature-unit",
                     "degC", "--energy-unit", "kcal/mol", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    row = doc["rows"][0]
    assert row["T"] == pytest.approx(1000.0) and doc["units"]["dH"] == "kcal/mol"
    assert row["log10K"] == pytest.approx(WATER_GAS_SHIFT[1000.0], abs=0.02)
    direct = reaction.evaluate(lib[1], "CO + H2O = CO2 + H2", [1000.0])
    assert row["dG"] == pytest.approx(direct["dG"][0] / 4184.0, rel=1e-9)
    assert cli.main(["reaction", out, "2 CO + O2 = 2 CO2", "1000"]) == 0
    text = capsys.readouterr().out
    assert "log10 K" in text and "qualified person" in text


def test_an_unbalanced_equation_is_refused_with_the_elements_named(lib, capsys):
    assert cli.main(["reaction", str(lib[0]), "CO + O2 = CO2", "1000"]) == 2
    err = capsys.readouterr().err
    assert "not balanced: O 3 on the left, 2 on the right" in err and "Traceback" not in err
    assert cli.main(["reaction", str(lib[0]), "CO + O2 = XeF2", "1000"]) == 2
    assert "XeF2" in capsys.readouterr().err


def test_the_charge_must_balance_too():
    doc = {"species": [{"id": "Na(g)", "formula": "Na"}, {"id": "Na+(g)", "formula": "Na+"}]}
    with pytest.raises(InputError, match="charge"):
        reaction.check_balance(doc, reaction.parse("Na = Na+"))


def test_props_shows_formation_properties_and_why_there_are_none(lib, capsys):
    assert cli.main(["props", str(lib[0]), "CO2", "1000", "--json"]) == 0
    row = json.loads(capsys.readouterr().out)["rows"][0]
    assert row["dfG"] == pytest.approx(-395886.0, abs=TOL_G)  # NIST-JANAF, from memory
    assert cli.main(["props", str(lib[0]), "CH4", "500"]) == 0
    assert "formation from the elements" in capsys.readouterr().out


def test_evaluated_tables_carry_the_formation_columns(lib):
    import pyarrow.parquet as pq

    t = pq.read_table(lib[0] / "tables.parquet").to_pandas()
    co2 = t[(t["id"] == "CO2(g)") & (t["T"] == 1000.0)].iloc[0]
    assert co2["log10Kf"] == pytest.approx(20.679, abs=0.02)  # NIST-JANAF, from memory
    c = t[t["id"] == "C(cr)"]
    assert np.all(c["dfG"] == 0.0) and np.all(c["u_dfG"] == 0.0)


def test_a_missing_element_reference_gives_a_finding_naming_it(tmp_path):
    write_source(tmp_path / "raw", "gases", _gas_tables(), method="compilation")
    assert cli.main(["build", "--raw", str(tmp_path / "raw"), "--out", str(tmp_path / "out"),
                     "--no-report", "--quiet"]) == 0
    doc = document.load(tmp_path / "out")
    codes = {s["id"]: [f for f in s["findings"] if f["code"] == "FORM-NO-REFERENCE"]
             for s in doc["species"]}
    assert "C: no species C in the library" in codes["CO2(g)"][0]["message"]
    assert not codes["H2O(g)"]
    ref = {r["element"]: r for r in doc["reference_states"]}
    assert ref["C"]["ids"] == [] and ref["H"]["ids"] == ["H2(g)"]
    with pytest.raises(InputError, match="C: no species C"):
        __import__("thermoledger").load_library(tmp_path / "out")["CO2"].formation(1000.0)


def test_a_stated_value_with_a_slip_is_caught_and_a_right_one_is_not(tmp_path):
    gases = _gas_tables()
    gases[3]["stated_formation"] = [  # CO2; NIST-JANAF values from memory, one slipped
        {"temperature": "1000 K", "gibbs_energy": "-395.886 kJ/mol"},
        {"temperature": "1500 K", "log10_kf": 13.800},
        {"temperature": "1000 K", "enthalpy": "-349.623 kJ/mol"},
        {"temperature": "5000 K", "log10_kf": 1.0}]
    write_source(tmp_path / "raw", "gases", gases, method="compilation")
    write_source(tmp_path / "raw", "graphite", [_graphite()], method="compilation")
    assert cli.main(["build", "--raw", str(tmp_path / "raw"), "--out", str(tmp_path / "out"),
                     "--no-report", "--quiet"]) == 0
    found = json.loads((tmp_path / "out" / "findings.json").read_text())["findings"]
    form = [f for f in found if f["code"].startswith("FORM-")]
    assert [f["column"] for f in form if f["code"] == "FORM-DISAGREE"] == \
        ["tables/3/stated_formation/2"]
    assert [f["column"] for f in form if f["code"] == "FORM-STATED-UNCHECKED"] == \
        ["tables/3/stated_formation/3"]


def test_reference_states_are_overridden_by_sources_and_settings(tmp_path):
    raw = tmp_path / "raw"
    write_source(raw, "gases", _gas_tables()[:2], method="compilation",
                 extra={"reference_states": {"H": "H2(g)", "O": "O2"}})
    write_source(raw, "other", [dict(table_entry("o3.csv", "O3", "O3", "nonlinear",
                                                 h="142.67 kJ/mol", s="238.92 J/(mol*K)"),
                                     header=["T [K]", "Cp [J/(mol*K)]"],
                                     rows=[[f"{t:g}", f"{_cp0('Oxygen', t) * 1.3:.6g}"]
                                           for t in np.arange(300.0, 1501.0, 50.0)])],
                 extra={"reference_states": {"O": "O3", "Qq": "X"}})
    assert cli.main(["build", "--raw", str(raw), "--out", str(tmp_path / "a"), "--no-report",
                     "--quiet"]) == 0
    doc = document.load(tmp_path / "a")
    ref = {r["element"]: r for r in doc["reference_states"]}
    assert ref["H"]["origin"] == "source gases" and ref["H"]["ids"] == ["H2(g)"]
    assert ref["O"]["species"] == "O2"         # equal priority: the first by source id
    found = json.loads((tmp_path / "a" / "findings.json").read_text())["findings"]
    unclear = sorted(f["column"] for f in found if f["code"] == "FORM-REF-UNCLEAR")
    assert unclear == ["reference_states/O", "reference_states/Qq"]
    assert cli.main(["build", "--raw", str(raw), "--out", str(tmp_path / "b"), "--no-report",
                     "--quiet", "--reference-state", "O=O3"]) == 0
    ref = {r["element"]: r for r in document.load(tmp_path / "b")["reference_states"]}
    assert ref["O"]["origin"] == "settings" and ref["O"]["ids"] == []
    assert "ΔfH°(298.15 K) = 142.67 kJ/mol" in ref["O"]["problem"]
    assert cli.main(["build", "--raw", str(raw), "--out", str(tmp_path / "c"),
                     "--reference-state", "Qq=O2"]) == 2


def test_phases_linked_by_a_transition_are_correlated_not_independent(tmp_path):
    condensed.write_aluminium(tmp_path / "raw", gas=False)
    assert cli.main(["build", "--raw", str(tmp_path / "raw"), "--out", str(tmp_path / "out"),
                     "--no-report", "--quiet"]) == 0
    doc = document.load(tmp_path / "out")
    t_fus = condensed.MELTING["Al"][1]
    got = reaction.evaluate(doc, "Al(cr) = Al(l)", [t_fus])
    assert got["dG"][0] == pytest.approx(0.0, abs=1e-6)   # G is continuous at T_fus
    assert got["u_dG"][0] == pytest.approx(0.0, abs=1e-6)  # the shared anchor cancels
    assert got["u_dH"][0] == pytest.approx(200.0, rel=1e-9)  # only u(ΔH_fus) remains
    f = Formation(doc).at("Al(l)", [1500.0, 2000.0])
    assert np.all(f["dfG"] == 0.0) and np.all(f["u_dfG"] < 1e-9)


def test_an_old_library_without_reference_states_still_gives_formation(lib):
    doc = json.loads(json.dumps(lib[1]))
    doc.pop("reference_states")
    for sp in doc["species"]:
        sp.pop("anchor_uncertainty")
    got = Formation(doc).at("CO2(g)", [1000.0])
    assert got["dfG"][0] == pytest.approx(Formation(lib[1]).at("CO2(g)", [1000.0])["dfG"][0])
    assert got["u_dfH"][0] > Formation(lib[1]).at("CO2(g)", [1000.0])["u_dfH"][0]  # defaults


@settings(max_examples=200, deadline=None)
@given(st.text(alphabet="COH2 +=/.()-e1g", max_size=40))
def test_any_equation_text_is_refused_clearly_or_evaluated(text):
    doc = {"species": [{"id": "CO(g)", "formula": "CO"}, {"id": "O2(g)", "formula": "O2"},
                       {"id": "CO2(g)", "formula": "CO2"}], "transitions": []}
    try:
        reaction.check_balance(doc, reaction.parse(text))
    except (InputError, SpeciesNotFound) as exc:
        assert str(exc)


def test_missing_reference_states_are_found_once_per_formula_and_given_anew():
    """Formation.missing is found once per formula: species of one formula get the same
    reasons, each call a list of its own."""
    doc = {"species": [{"id": "X(g)", "formula": "XeF2", "ranges": []},
                       {"id": "X(l)", "formula": "XeF2", "ranges": []},
                       {"id": "Y(g)", "formula": "NO3-", "ranges": []}],
           "reference_states": [], "transitions": []}
    made = Formation(doc)
    first = made.missing("X(g)")
    assert first and made.missing("X(l)") == first
    first.append("changed by the caller")
    assert made.missing("X(g)") == made.missing("X(l)") != first
    assert "charged" in made.missing("Y(g)")[0]
