"""Unit conversion against exact definitions.

Sources: thermochemical calorie = 4.184 J exactly and kelvin offsets (IUPAC Green Book,
3rd ed. 2007, sec. 7.2 and 2.11); degree Fahrenheit and Rankine, T/K = (T/°F + 459.67)·5/9
(NIST SP 811, 2008 edition, Appendix B.9); standard atmosphere 101 325 Pa exactly (same).
IUPAC standard atomic weights (CIAAW 2021, abridged): H 1.0080, C 12.011, N 14.007,
O 15.999 — values from memory.
"""

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from thermoledger.core import chemistry, constants, units
from thermoledger.core.errors import UnitError


def test_thermochemical_calorie_is_exact():
    assert units.to_si([1.0], "cal/(mol*K)", "heat_capacity")[0] == pytest.approx(4.184, rel=1e-15)
    assert units.to_si([1.0], "kcal/mol", "enthalpy")[0] == pytest.approx(4184.0, rel=1e-15)


def test_international_calorie_only_when_named():
    assert units.to_si([1.0], "cal_it/(mol*K)", "heat_capacity")[0] == pytest.approx(4.1868, rel=1e-15)


def test_kelvin_offsets_are_affine():
    got = units.to_si([-273.15, 0.0, 25.0, 100.0], "degC", "temperature")
    np.testing.assert_allclose(got, [0.0, 273.15, 298.15, 373.15], atol=1e-12)
    got = units.to_si([32.0, 212.0, -459.67], "degF", "temperature")
    np.testing.assert_allclose(got, [273.15, 373.15, 0.0], atol=1e-9)
    assert units.to_si([536.67], "degR", "temperature")[0] == pytest.approx(298.15, abs=1e-9)


def test_heat_capacity_per_degree_is_per_kelvin_or_five_ninths():
    # a heat capacity per degC is per kelvin; per degF is per (5/9) K
    assert units.to_si([1.0], "J/(mol*degC)", "heat_capacity")[0] == pytest.approx(1.0)
    assert units.to_si([1.0], "J/(mol*degF)", "heat_capacity")[0] == pytest.approx(1.8)


def test_kj_per_kmol_equals_j_per_mol():
    assert units.to_si([29.1], "kJ/(kmol*K)", "heat_capacity")[0] == pytest.approx(29.1, rel=1e-15)


@pytest.mark.parametrize("formula, expected", [
    ("N2", 2 * 14.007), ("CO2", 12.011 + 2 * 15.999), ("CH4", 12.011 + 4 * 1.0080),
])
def test_mass_based_cp_times_iupac_molar_mass(formula, expected):
    m = chemistry.composition(formula).molar_mass
    # abridged weights carry 5 significant digits: agree to 1e-4 relative
    assert m == pytest.approx(expected, rel=1e-4)
    assert units.to_si([1.0], "J/(g*K)", "heat_capacity", m)[0] == pytest.approx(m, rel=1e-14)
    assert units.to_si([1.0], "kJ/(kg*K)", "heat_capacity", m)[0] == pytest.approx(m, rel=1e-14)


def test_atm_to_bar_entropy_shift():
    # S(1 bar) - S(1 atm) = R ln(1.01325) = 0.1094 J/(mol K) (IUPAC 1982 change of standard state)
    assert constants.ENTROPY_ATM_TO_BAR == pytest.approx(8.314462618 * math.log(1.01325), rel=1e-9)
    assert round(constants.ENTROPY_ATM_TO_BAR, 4) == 0.1094


def test_gas_constant_is_k_times_na():
    # CODATA 2018: R = 8.314 462 618... J/(mol K), exact since the SI redefinition
    assert constants.GAS_CONSTANT == pytest.approx(8.314462618, rel=1e-10)


@pytest.mark.parametrize("text", ["-393.51", "kJ/mol", "", "abc kJ/mol", "1 kJ", "nan kJ/mol",
                                  "5 K"])
def test_bad_quantities_are_errors(text):
    with pytest.raises(UnitError):
        units.parse_quantity(text, "enthalpy")


@pytest.mark.parametrize("unit, kind", [("J/(mol*Kelvinz)", "heat_capacity"), ("K", "heat_capacity"),
                                        ("J/mol", "temperature"), ("J/(mol", "enthalpy")])
def test_bad_units_are_errors(unit, kind):
    with pytest.raises(UnitError):
        units.check_unit(unit, kind)


@given(st.floats(min_value=-200, max_value=5000, allow_nan=False))
def test_celsius_fahrenheit_round_trip(t_c):
    t_f = t_c * 1.8 + 32.0
    k1 = units.to_si([t_c], "degC", "temperature")[0]
    k2 = units.to_si([t_f], "degF", "temperature")[0]
    assert k1 == pytest.approx(k2, abs=1e-9)


@given(st.text(max_size=20))
def test_check_unit_never_raises_anything_but_unit_error(text):
    try:
        units.check_unit(text, "heat_capacity")
    except UnitError:
        pass


def test_converted_temperatures_keep_the_values_the_data_give():
    # 6740.33 degF is 4000 K exactly; the float conversion alone gives 3999.999999999915
    got = units.to_si([-99.67, 6740.33, 3726.85], "degF", "temperature")
    assert got.tolist()[:2] == [200.0, 4000.0]
    assert units.to_si([3726.85], "degC", "temperature")[0] == 4000.0
    assert units.to_si([360.0], "degR", "temperature")[0] == 200.0
    # a value given with more digits than the trimming keeps is left as converted
    assert units.to_si([751.068359375], "degC", "temperature")[0] == 751.068359375 + 273.15


@pytest.mark.parametrize("formula, expected, nonstandard", [
    # CIAAW abridged standard atomic weights 2021 (Prohaska et al., Pure Appl. Chem. 94, 573
    # (2022)), from memory: H 1.0080, C 12.011, N 14.007, O 15.999, S 32.06
    ("N2", 28.014, ()), ("CO2", 44.009, ()), ("SO2", 64.058, ()), ("CH4", 16.043, ()),
    ("H2O", 18.015, ()),
    # an isotope takes its own mass (2H: 2.014101778 u, AME, from memory)
    ("D2O", 2 * 2.014101778 + 15.999, ("2H",)),
])
def test_molar_masses_use_standard_atomic_weights(formula, expected, nonstandard):
    c = chemistry.composition(formula)
    assert c.molar_mass == pytest.approx(expected, abs=2e-6)
    assert c.nonstandard == nonstandard


def test_a_registry_from_kept_definitions_converts_as_one_read_afresh(tmp_path):
    """units.keep_definitions (pint's own cache of its parsed definitions, which a build
    keeps in its store of partitions): a registry made from the kept definitions converts
    every unit of the tests to the same bits as one made afresh; a damaged cache is read
    afresh. Run in fresh processes: the registry is made once per process."""
    import subprocess
    import sys

    script = """
import sys
from thermoledger.core import units
if sys.argv[1] != "-":
    units.keep_definitions(sys.argv[1])
for unit, kind in [("K", "temperature"), ("degC", "temperature"), ("degF", "temperature"),
                   ("J/(mol*K)", "heat_capacity"), ("cal/(mol*K)", "heat_capacity"),
                   ("kJ/kmol/K", "heat_capacity"), ("J/(g*K)", "heat_capacity"),
                   ("kcal/mol", "enthalpy"), ("atm", "pressure")]:
    print(units._affine(unit, kind))
"""

    def run(folder):
        done = subprocess.run([sys.executable, "-c", script, str(folder)], capture_output=True,
                              text=True, check=True)
        return done.stdout

    afresh = run("-")
    kept = tmp_path / "pint"
    assert run(kept) == afresh and any(kept.iterdir())       # made, then read
    assert run(kept) == afresh
    for path in kept.iterdir():
        path.write_bytes(b"damaged")
    assert run(kept) == afresh


def test_a_rebuild_keeps_pint_definitions_in_its_store_of_partitions(tmp_path):
    """The second build into a release home (its store of partitions there) keeps pint's
    parsed definitions in the store, in a folder named by pint's version, and the third
    reads them: the same release each time."""
    import hashlib
    import importlib.metadata as md
    import shutil
    import subprocess
    import sys
    from pathlib import Path

    raw, out = tmp_path / "raw", tmp_path / "out"
    shutil.copytree(Path(__file__).resolve().parent.parent / "raw", raw)

    def build():
        subprocess.run([sys.executable, "-m", "thermoledger", "build", "--raw", str(raw),
                        "--out", str(out), "--quiet", "--no-report"], check=True,
                       capture_output=True)
        lib = (out / "current" / "library.json").read_bytes()
        return hashlib.sha256(lib).hexdigest()

    first = build()
    kept = out / ".parts" / f"pint-{md.version('pint')}"
    assert not kept.exists()
    assert build() == first and any(kept.iterdir())
    assert build() == first


def test_the_settled_units_convert_as_pint_converts_them():
    """Each unit of units.SETTLED, converted without pint's registry, has the basis, scale
    and offset pint gives it, and pint reads it as a unit of its kind."""
    for (text, kind), got in units.SETTLED.items():
        assert got == units.pint_affine(text, kind), (text, kind)
        assert units._dimension_of(units._parse_unit(text), kind, text) == got[0]
        assert units.is_unit(text) and units._parse_unit(text) is not None


def test_reading_and_checking_a_catalogue_of_settled_units_builds_no_pint_registry(tmp_path):
    """A process that reads, checks and fits tables whose files and source.json state only
    units of units.SETTLED (as a computed catalogue's do) never imports pint: a worker's
    first partition is some 0.2 s shorter."""
    import subprocess
    import sys

    from thermoledger.testing.catalogue import write_catalogue

    write_catalogue(tmp_path / "raw", 20)
    code = ("import sys\nfrom pathlib import Path\nfrom thermoledger import build, partitions\n"
            "from thermoledger.core.settings import OutputSettings, Settings\n"
            "ctx = Settings(outputs=OutputSettings(report=False))\n"
            f"r = build._build_part(Path({str(tmp_path / 'raw')!r}), ctx, {{}}, build._quiet, "
            "partitions.Part(0, 1))\n"
            "assert len(r.entries) == 20, len(r.entries)\n"
            "print('pint' in sys.modules)\n")
    got = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert got.stdout.strip() == "False"
