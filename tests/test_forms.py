"""nasa7 evaluation: internal consistency (dH/dT = Cp, dS/dT = Cp/T, G = H - TS)."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from thermoledger.core.constants import GAS_CONSTANT as R
from thermoledger.physics import forms

A = [3.5, 1.0e-3, -2.0e-7, 3.0e-11, -1.0e-15, -1000.0, 4.0]


def test_derivatives_of_h_and_s():
    t = np.linspace(300.0, 3000.0, 7)
    dt = 1e-3
    ranges = [(200.0, 6000.0, A)]
    e0, e1, e2 = (forms.evaluate_ranges(ranges, t + d, "nasa7") for d in (-dt, 0.0, dt))
    np.testing.assert_allclose((e2["H"] - e0["H"]) / (2 * dt), e1["Cp"], rtol=1e-7)
    np.testing.assert_allclose((e2["S"] - e0["S"]) / (2 * dt), e1["Cp"] / t, rtol=1e-7)
    np.testing.assert_allclose(e1["G"], e1["H"] - t * e1["S"], rtol=1e-14)


def test_published_form_at_one_point():
    # NASA TM-4513 Eqs. 1-3 written out by hand at T = 1000 K
    t = 1000.0
    cp = A[0] + A[1] * t + A[2] * t**2 + A[3] * t**3 + A[4] * t**4
    h = A[0] + A[1] * t / 2 + A[2] * t**2 / 3 + A[3] * t**3 / 4 + A[4] * t**4 / 5 + A[5] / t
    s = A[0] * np.log(t) + A[1] * t + A[2] * t**2 / 2 + A[3] * t**3 / 3 + A[4] * t**4 / 4 + A[6]
    e = forms.evaluate_ranges([(200.0, 6000.0, A)], [t], "nasa7")
    assert e["Cp"][0] == pytest.approx(R * cp, rel=1e-14)
    assert e["H"][0] == pytest.approx(R * t * h, rel=1e-14)
    assert e["S"][0] == pytest.approx(R * s, rel=1e-14)


def test_range_selection_uses_the_lower_range_at_the_breakpoint():
    ranges = [(200.0, 1000.0, A), (1000.0, 6000.0, A)]
    np.testing.assert_array_equal(forms.range_index(ranges, [200, 999.9, 1000, 1000.1, 6000]),
                                  [0, 0, 0, 1, 1])


def test_scaled_to_kelvin():
    c = [3.0, 2.0, 1.0, 0.5, 0.25]
    a = forms.kelvin_from_scaled(c)
    t = np.array([250.0, 1234.5])
    np.testing.assert_allclose(forms.cp_over_r(a, t), np.polyval(c[::-1], t / 1000.0), rtol=1e-14)


@settings(max_examples=60, deadline=None)
@given(form=st.sampled_from(sorted(forms.FORMS)),
       t=st.lists(st.floats(150.0, 7000.0), min_size=1, max_size=30),
       scale=st.floats(-3.0, 3.0))
def test_cp_or_h_alone_is_that_of_the_full_evaluation_to_the_last_bit(form, t, scale):
    f = forms.FORMS[form]
    a = [(k + 1) * 10.0 ** (scale - 3 * k) for k in range(len(f.powers))]
    coeffs = f.pack(a, -1000.0, 4.0, 0.0)
    ranges = [(100.0, 1000.0, coeffs), (1000.0, 8000.0, [2 * x for x in coeffs])]
    full = forms.evaluate_ranges(ranges, t, form)
    np.testing.assert_array_equal(forms.cp_of_ranges(ranges, t, form), full["Cp"])
    np.testing.assert_array_equal(forms.h_of_ranges(ranges, t, form), full["H"])
