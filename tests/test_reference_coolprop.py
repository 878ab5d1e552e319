"""External check: ideal-gas heat capacities from CoolProp's reference equations of state,
written as raw tables in the documented format and built through the CLI.

Reference equations (CoolProp 6.6+ implementations, ideal-gas part only):
  nitrogen        R. Span et al., J. Phys. Chem. Ref. Data 29, 1361 (2000)
  oxygen          R. Schmidt & W. Wagner, Fluid Phase Equilib. 19, 175 (1985)
  carbon dioxide  R. Span & W. Wagner, J. Phys. Chem. Ref. Data 25, 1509 (1996)
  argon           Ch. Tegeler, R. Span & W. Wagner, J. Phys. Chem. Ref. Data 28, 779 (1999)
Anchors: S°(298.15 K) and ΔfH°(298.15 K) are the CODATA Key Values (J. D. Cox,
D. D. Wagman & V. A. Medvedev, CODATA Key Values for Thermodynamics, Hemisphere, 1989)
— values from memory: N2 191.609, O2 205.152, CO2 213.785 J/(mol K) and −393.51 kJ/mol,
Ar 154.846 J/(mol K); elements in their reference state have ΔfH° = 0.
"""

import json

import numpy as np
import pytest
from scipy.integrate import quad
from thermoledger.cli import main as cli
from thermoledger.core.constants import ENTROPY_ATM_TO_BAR, GAS_CONSTANT
from thermoledger.physics import forms
from thermoledger.testing import table_entry, write_source

CP = pytest.importorskip("CoolProp.CoolProp")

FLUIDS = {  # name: (CoolProp fluid, formula, geometry, dfH298 [J/mol], S298 [J/(mol K)])
    "N2": ("Nitrogen", "N2", "linear", 0.0, 191.609),
    "O2": ("Oxygen", "O2", "linear", 0.0, 205.152),
    "CO2": ("CarbonDioxide", "CO2", "linear", -393510.0, 213.785),
    "Ar": ("Argon", "Ar", "monatomic", 0.0, 154.846),
}


def cp0(fluid, t):
    """CoolProp ideal-gas molar Cp [J/(mol K)] (density -> 0)."""
    return CP.PropsSI("Cp0molar", "T", float(t), "Dmolar", 1e-6, fluid)


def grid(fluid):
    lo = max(200.0, np.ceil(CP.PropsSI("Tmin", fluid) / 10.0) * 10.0)
    return np.unique(np.append(np.arange(lo, 2000.0 + 1e-9, 25.0), 298.15))


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("coolprop")
    raw, out = tmp / "raw", tmp / "curated"
    tables = []
    for name, (fluid, formula, geometry, h, s) in FLUIDS.items():
        t = grid(fluid)
        rows = [[f"{x:.10g}", f"{cp0(fluid, x):.10g}"] for x in t]
        tables.append(dict(table_entry(f"{name.lower()}.csv", name, formula, geometry,
                                       h=f"{h / 1000:.2f} kJ/mol", s=f"{s} J/(mol*K)"),
                           header=["T [K]", "Cp [J/(mol*K)]"], rows=rows))
    write_source(raw, "coolprop-ideal-gas", tables, method="compilation")
    # the same nitrogen table with its entropy quoted at 1 atm, in a second folder
    n2 = dict(tables[0])
    n2["entropy_298"] = f"{191.609 - ENTROPY_ATM_TO_BAR:.10f} J/(mol*K)"
    raw_atm = tmp / "raw-atm"
    write_source(raw_atm, "coolprop-atm", [n2], standard_pressure="1 atm")
    assert cli.main(["build", "--raw", str(raw), "--out", str(out), "--strict"]) == 0
    assert cli.main(["build", "--raw", str(raw_atm), "--out", str(tmp / "atm"), "--strict"]) == 0
    lib = json.loads((out / "library.json").read_text())
    atm = json.loads((tmp / "atm" / "library.json").read_text())
    return {s["id"]: s for s in lib["species"]}, {s["id"]: s for s in atm["species"]}, out


def ranges(sp):
    return [(r["t_min"], r["t_max"], r["coefficients"]) for r in sp["ranges"]]


@pytest.mark.parametrize("name", list(FLUIDS))
def test_cp_within_0p2_percent_at_every_point(built, name):
    fluid = FLUIDS[name][0]
    t = grid(fluid)
    ref = np.array([cp0(fluid, x) for x in t])
    got = forms.evaluate_ranges(ranges(built[0][f"{name}(g)"]), t, "nasa7")["Cp"]
    assert np.max(np.abs(got / ref - 1)) < 2e-3


@pytest.mark.parametrize("name", list(FLUIDS))
def test_h_and_s_against_independent_integration(built, name):
    fluid = FLUIDS[name][0]
    sp = built[0][f"{name}(g)"]
    t = grid(fluid)[::4]
    ev = forms.evaluate_ranges(ranges(sp), np.append(t, 298.15), "nasa7")
    h298, s298 = ev["H"][-1], ev["S"][-1]
    for i, x in enumerate(t):
        dh = quad(lambda y: cp0(fluid, y), 298.15, x, epsabs=1e-6, epsrel=1e-10)[0]
        ds = quad(lambda y: cp0(fluid, y) / y, 298.15, x, epsabs=1e-9, epsrel=1e-10)[0]
        assert abs((ev["H"][i] - h298) - dh) <= max(5.0, 5e-4 * abs(dh)), x
        assert abs((ev["S"][i] - s298) - ds) <= 0.01, x


def test_argon_is_five_halves_r(built):
    # monatomic ideal gas, equipartition: Cp = 5/2 R. CoolProp's argon equation uses
    # R = 8.31451 J/(mol K) (Tegeler et al. 1999), so its ideal-gas Cp is 5/2 of that value.
    sp = built[0]["Ar(g)"]
    t = np.linspace(sp["ranges"][0]["t_min"], sp["ranges"][-1]["t_max"], 50)
    got = forms.evaluate_ranges(ranges(sp), t, "nasa7")["Cp"]
    np.testing.assert_allclose(got, 2.5 * 8.31451, rtol=1e-9)
    np.testing.assert_allclose(got / GAS_CONSTANT, 2.5 * 8.31451 / GAS_CONSTANT, rtol=1e-9)


@pytest.mark.parametrize("name", list(FLUIDS))
def test_codata_anchors_recovered_exactly(built, name):
    _, _, _, h, s = FLUIDS[name]
    ev = forms.evaluate_ranges(ranges(built[0][f"{name}(g)"]), [298.15], "nasa7")
    assert ev["H"][0] == pytest.approx(h, abs=1e-6)
    assert ev["S"][0] == pytest.approx(s, rel=1e-12)


def test_one_atm_table_is_converted_to_one_bar(built):
    sp = built[1]["N2(g)"]
    assert sp["entropy_298"] == pytest.approx(191.609, rel=1e-12)
    assert any("1 bar" in c for c in sp["conversions"])
    ev = forms.evaluate_ranges(ranges(sp), [298.15], "nasa7")
    assert ev["S"][0] == pytest.approx(191.609, rel=1e-12)


def test_continuity_at_the_breakpoint_from_exported_coefficients(built):
    for sp in built[0].values():
        lo, hi = sp["ranges"]
        tb = lo["t_max"]
        a, b = lo["coefficients"], hi["coefficients"]
        cp_scale = forms.cp_over_r(a, tb)
        for f in (forms.cp_over_r, forms.dcp_over_r, forms.h_over_rt, forms.s_over_r):
            fa, fb = f(a, tb), f(b, tb)
            # the slope is compared on the scale Cp/T, where a zero slope (argon) is exact
            scale = cp_scale / tb if f is forms.dcp_over_r else max(abs(fa), abs(fb))
            assert abs(fa - fb) <= 1e-9 * scale, (sp["id"], f.__name__)


@pytest.mark.parametrize("name", list(FLUIDS))
def test_the_python_api_reproduces_coolprop(built, name):
    """Through thermoledger.load_library: Cp within 0.2 % of CoolProp's ideal-gas Cp (the
    reference equations of state named in testing/trials.py), H − H298 within 0.05 % of the
    integral of that Cp (scipy quad), and S at 298.15 K equal to the anchor."""
    import thermoledger

    fluid = FLUIDS[name][0]
    species = thermoledger.load_library(built[2])[name.lower()]
    t = grid(fluid)
    ref = np.array([cp0(fluid, x) for x in t])
    assert np.max(np.abs(species.cp(t) / ref - 1)) < 2e-3
    dh = quad(lambda x: cp0(fluid, x), 298.15, 1500.0, epsrel=1e-10)[0]
    assert species.h_minus_h298(1500.0) == pytest.approx(dh, rel=5e-4)
    assert species.s(298.15) == pytest.approx(FLUIDS[name][4], abs=1e-9)
