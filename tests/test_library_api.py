"""The Python API of a curated library: load, look up, evaluate (thermoledger.load_library).

Expected values come from outside the API: an evaluator of the published 7- and
9-coefficient polynomials written out here from McBride, Gordon & Reno, NASA TM-4513 (1993),
Eqs. 1-3, and McBride, Zehe & Gordon, NASA/TP-2002-211556 (2002), Eqs. 2-4; CoolProp's
ideal-gas Cp of methane (Setzmann & Wagner, J. Phys. Chem. Ref. Data 20, 1061, 1991); the
identities H(298.15 K) = ΔfH°, G = H − TS, dH/dT = Cp, dS/dT = Cp/T.
"""

import copy
import json
import pickle

import numpy as np
import pytest
import thermoledger
from thermoledger.core.constants import GAS_CONSTANT as R
from thermoledger.core.errors import FitError, FitRejected, InputError
from thermoledger.library import Library, SpeciesNotFound


@pytest.fixture(scope="module")
def lib(demo_release):
    return thermoledger.load_library(demo_release)


def published(coefficients, form, t):
    """Cp [J/(mol K)], H [J/mol], S [J/(mol K)] of one range, from the published equations."""
    a = coefficients
    if form == "nasa7":
        cp = a[0] + a[1] * t + a[2] * t**2 + a[3] * t**3 + a[4] * t**4
        h = a[0] + a[1] * t / 2 + a[2] * t**2 / 3 + a[3] * t**3 / 4 + a[4] * t**4 / 5 + a[5] / t
        s = (a[0] * np.log(t) + a[1] * t + a[2] * t**2 / 2 + a[3] * t**3 / 3 + a[4] * t**4 / 4
             + a[6])
    else:  # nasa9
        cp = (a[0] / t**2 + a[1] / t + a[2] + a[3] * t + a[4] * t**2 + a[5] * t**3
              + a[6] * t**4)
        h = (-a[0] / t**2 + a[1] * np.log(t) / t + a[2] + a[3] * t / 2 + a[4] * t**2 / 3
             + a[5] * t**3 / 4 + a[6] * t**4 / 5 + a[7] / t)
        s = (-a[0] / t**2 / 2 - a[1] / t + a[2] * np.log(t) + a[3] * t + a[4] * t**2 / 2
             + a[5] * t**3 / 3 + a[6] * t**4 / 4 + a[8])
    return R * cp, R * t * h, R * s


def test_load_a_folder_or_a_file(lib, demo_release):
    assert len(lib) == 17 and lib.ids == sorted(lib.ids) and "N2(g)" in lib.ids
    same = thermoledger.load_library(demo_release / "library.json")
    assert same.ids == lib.ids
    assert "Library of 17 species" in repr(lib)
    assert lib.notice.startswith("Curated property data")


def test_a_missing_library_is_a_clear_value_error(tmp_path):
    with pytest.raises(ValueError, match="no library at"):
        thermoledger.load_library(tmp_path / "nothing")


@pytest.mark.parametrize("name", ["N2(g)", "N2", "n2", "n2(G)"])
def test_lookup_by_id_or_name_in_any_case(lib, name):
    assert lib[name].id == "N2(g)"
    assert name in lib


def test_lookup_with_a_phase(lib):
    assert lib.get("CO2", phase="g").id == "CO2(g)"
    with pytest.raises(KeyError, match=r"'CO2\(l\)' is not in the library"):
        lib.get("CO2", phase="l")


def test_an_unknown_name_suggests_close_ids(lib):
    with pytest.raises(SpeciesNotFound) as err:
        lib["CO3"]
    assert isinstance(err.value, KeyError) and "CO2(g)" in err.value.candidates
    assert "did you mean" in str(err.value) and "CO3" in str(err.value)
    assert "Xe" not in lib


def test_a_name_with_several_phases_asks_for_one(demo_release):
    doc = json.loads((demo_release / "library.json").read_text())
    liquid = copy.deepcopy(next(s for s in doc["species"] if s["id"] == "CO2(g)"))
    liquid["id"], liquid["phase"] = "CO2(l)", "l"
    doc["species"].append(liquid)
    with pytest.raises(SpeciesNotFound, match=r"several phases; give one of: CO2\(g\), CO2\(l\)"):
        Library(doc)["co2"]
    assert Library(doc)["CO2(l)"].phase == "l"


def test_every_species_matches_the_published_polynomials(lib):
    for sid in lib:
        sp = lib[sid]
        for r in sp.entry["ranges"]:
            t = np.linspace(r["t_min"], r["t_max"], 9)
            cp, h, s = published(r["coefficients"], sp.form, t)
            np.testing.assert_allclose(sp.cp(t), cp, rtol=1e-11)
            np.testing.assert_allclose(sp.h(t), h, rtol=1e-9, atol=1e-6)
            np.testing.assert_allclose(sp.s(t), s, rtol=1e-11)


def test_the_form_travels_with_the_coefficients(lib):
    """CH4 is stored as a 9-coefficient set: evaluated as such it gives a physical Cp, within
    2 % of CoolProp's methane at 1000 K (the demo is rigid-rotor/harmonic-oscillator, which
    misses anharmonicity by about that much; common practice), never the 5e6 J/(mol K) of a
    7-coefficient reading."""
    from thermoledger.testing import trials

    ch4 = lib["CH4(g)"]
    assert ch4.form == "nasa9"
    assert ch4.cp(1000.0) == pytest.approx(trials.coolprop_cp("Methane", [1000.0])[0],
                                           rel=0.02)


def test_shapes_follow_the_input(lib):
    n2 = lib["N2(g)"]
    assert isinstance(n2.cp(1000.0), float)
    assert n2.cp([300.0, 1000.0]).shape == (2,)
    grid = np.array([[300.0, 400.0, 500.0], [600.0, 700.0, 800.0]])
    for prop in (n2.cp, n2.h, n2.h_minus_h298, n2.s, n2.g):
        out = prop(grid)
        assert out.shape == (2, 3)
        assert out[1, 2] == prop(800.0)
    u = n2.uncertainty(grid)
    assert set(u) == {"cp", "h", "s"} and all(v.shape == (2, 3) for v in u.values())
    assert all(np.all(v >= 0) for v in u.values())


def test_pint_quantities_are_converted_to_kelvin(lib):
    import pint

    q = pint.UnitRegistry().Quantity
    n2 = lib["N2(g)"]
    assert n2.cp(q(726.85, "degC")) == pytest.approx(n2.cp(1000.0), rel=1e-12)
    np.testing.assert_allclose(n2.s(q(np.array([300.0, 1000.0]), "K")), n2.s([300.0, 1000.0]))


def test_thermodynamic_identities(lib):
    for sid in lib:
        sp = lib[sid]
        anchor = sp.entry.get("anchor", {"basis": "own"})
        if anchor["basis"] == "own":
            assert abs(sp.h_minus_h298(298.15)) < 1e-6
            assert sp.h(298.15) == pytest.approx(sp.enthalpy_of_formation_298, abs=1e-6)
            assert sp.s(298.15) == pytest.approx(sp.entropy_298, abs=1e-9)
        else:      # a phase reached through a transition: exact at its anchor instead
            assert sp.enthalpy_of_formation_298 is None and sp.entropy_298 is None
            assert sp.h(anchor["temperature"]) == pytest.approx(anchor["enthalpy"], abs=1e-6)
            assert sp.s(anchor["temperature"]) == pytest.approx(anchor["entropy"], abs=1e-9)
        t = np.linspace(sp.t_min + 1, sp.t_max - 1, 7)
        np.testing.assert_allclose(sp.g(t), sp.h(t) - t * sp.s(t), rtol=1e-12, atol=1e-6)
        d = 1e-3
        np.testing.assert_allclose((sp.h(t + d) - sp.h(t - d)) / (2 * d), sp.cp(t), rtol=1e-6)
        np.testing.assert_allclose((sp.s(t + d) - sp.s(t - d)) / (2 * d), sp.cp(t) / t,
                                   rtol=1e-6)


def test_outside_the_range_of_use_is_a_value_error(lib):
    n2 = lib["N2(g)"]
    with pytest.raises(ValueError, match=r"T = 7000 K is outside the range of use of N2\(g\)"):
        n2.cp([1000.0, 7000.0])
    with pytest.raises(InputError, match="T = nan K"):
        n2.h(float("nan"))


def test_extrapolated_temperatures_are_flagged(lib):
    n2 = lib["N2(g)"]
    assert n2.extrapolated_intervals == ((3000.0, 6000.0),)
    assert n2.is_extrapolated(4000.0) is True and n2.is_extrapolated(1000.0) is False
    assert n2.is_extrapolated([1000.0, 4000.0]).tolist() == [False, True]


def test_evaluated_tables_as_pandas(lib):
    n2 = lib["N2(g)"]
    frame = n2.to_pandas([298.15, 1000.0, 4000.0])
    assert list(frame["T"]) == [298.15, 1000.0, 4000.0]
    assert frame["extrapolated"].tolist() == [False, False, True]
    assert frame.loc[1, "Cp"] == pytest.approx(n2.cp(1000.0), rel=1e-12)
    assert abs(frame.loc[0, "H_minus_H298"]) < 1e-6
    everything = lib.to_pandas()
    assert set(everything["id"]) == set(lib.ids) and len(everything) > 9 * 20


def test_errors_survive_pickling():
    """Errors cross process boundaries (report workers) with their fields intact."""
    err = InputError("bad cell", file="raw/x.csv", line=3, column="Cp", expected="a number")
    err.code = "CELL-NOT-NUMBER"
    back = pickle.loads(pickle.dumps(err))
    assert (back.file, back.line, back.column, back.code, str(back)) == \
        ("raw/x.csv", 3, "Cp", "CELL-NOT-NUMBER", str(err))
    for e in (FitError("N2(g)", "too few points"), FitRejected("N2(g)", "1.2 % > 1 %"),
              SpeciesNotFound("Xe", ("Ar(g)",))):
        back = pickle.loads(pickle.dumps(e))
        assert type(back) is type(e) and str(back) == str(e)
