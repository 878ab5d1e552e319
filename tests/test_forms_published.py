"""The published forms written out by hand against forms.py, and exact scaled <-> published
conversion for every form.

Equations: nasa7 — McBride, Gordon & Reno, NASA TM-4513 (1993), Eqs. 1-3; nasa9 — McBride,
Zehe & Gordon, NASA/TP-2002-211556 (2002), Eqs. 2-4; Shomate — Shomate, J. Phys. Chem. 58,
368 (1954), with t = T/1000 and H − H298 = At + Bt²/2 + Ct³/3 + Dt⁴/4 − E/t + F − H.
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from thermoledger.core.constants import GAS_CONSTANT as R
from thermoledger.physics import forms


def test_nasa9_by_hand():
    a = [1.2e4, -150.0, 4.0, 1.0e-3, -2.0e-7, 3.0e-11, -1.0e-15, -5000.0, 3.0]
    t = 1234.5
    cp = a[0] / t**2 + a[1] / t + a[2] + a[3] * t + a[4] * t**2 + a[5] * t**3 + a[6] * t**4
    h = (-a[0] / t**2 + a[1] * np.log(t) / t + a[2] + a[3] * t / 2 + a[4] * t**2 / 3
         + a[5] * t**3 / 4 + a[6] * t**4 / 5 + a[7] / t)
    s = (-a[0] / t**2 / 2 - a[1] / t + a[2] * np.log(t) + a[3] * t + a[4] * t**2 / 2
         + a[5] * t**3 / 3 + a[6] * t**4 / 4 + a[8])
    e = forms.evaluate_ranges([(200.0, 6000.0, a)], [t], "nasa9")
    assert e["Cp"][0] == pytest.approx(R * cp, rel=1e-13)
    assert e["H"][0] == pytest.approx(R * t * h, rel=1e-13)
    assert e["S"][0] == pytest.approx(R * s, rel=1e-13)


def test_shomate_by_hand():
    A, B, C, D, E, F, G, H = 25.0, 55.2, -33.7, 7.9, -0.14, -403.6, 228.2, -393.5
    T = 800.0
    t = T / 1000.0
    cp = A + B * t + C * t**2 + D * t**3 + E / t**2
    dh = A * t + B * t**2 / 2 + C * t**3 / 3 + D * t**4 / 4 - E / t + F - H     # kJ/mol
    s = A * np.log(t) + B * t + C * t**2 / 2 + D * t**3 / 3 - E / (2 * t**2) + G
    e = forms.evaluate_ranges([(298.0, 1200.0, [A, B, C, D, E, F, G, H])], [T], "shomate")
    assert e["Cp"][0] == pytest.approx(cp, rel=1e-13)
    assert e["H"][0] - 1000 * H == pytest.approx(1000 * dh, rel=1e-12)
    assert e["S"][0] == pytest.approx(s, rel=1e-13)


@pytest.mark.parametrize("name", list(forms.FORMS))
def test_derivatives_consistent(name):
    f = forms.FORMS[name]
    c = [3.0, 1.2, -0.3, 0.04, -0.002, 0.01, 0.0002][:len(f.powers)]
    a = f.cp_coefficients(c)
    coeffs = f.pack(a, -1.0e5, 50.0, -1.0e5)
    t = np.linspace(300.0, 3000.0, 9)
    d = 1e-3
    r = [(200.0, 6000.0, coeffs)]
    lo, mid, hi = (forms.evaluate_ranges(r, t + x, f) for x in (-d, 0.0, d))
    np.testing.assert_allclose((hi["H"] - lo["H"]) / (2 * d), mid["Cp"], rtol=1e-7)
    np.testing.assert_allclose((hi["S"] - lo["S"]) / (2 * d), mid["Cp"] / t, rtol=1e-7)
    np.testing.assert_allclose(mid["G"], mid["H"] - t * mid["S"], rtol=1e-13)
    np.testing.assert_allclose(f.dcp(a, t), (f.cp(a, t + d) - f.cp(a, t - d)) / (2 * d), rtol=1e-6)


@settings(max_examples=50, deadline=None)
@given(st.sampled_from(list(forms.FORMS)),
       st.lists(st.floats(-10, 10, allow_nan=False), min_size=7, max_size=7),
       st.floats(250.0, 5000.0))
def test_scaled_published_round_trip(name, c, t):
    f = forms.FORMS[name]
    c = c[:len(f.powers)]
    a = f.cp_coefficients(c)
    back = f.scaled(a)
    np.testing.assert_allclose(back, c, rtol=1e-14, atol=1e-14)
    tau = t / forms.T_SCALE
    cp_scaled = R * sum(ck * tau**p for ck, p in zip(c, f.powers))
    assert f.cp(a, t) == pytest.approx(cp_scaled, rel=1e-12, abs=1e-9)


def test_unknown_form_is_a_clear_error():
    from thermoledger.core.errors import InputError

    with pytest.raises(InputError, match="form 'nasa11' is not known"):
        forms.get("nasa11")
