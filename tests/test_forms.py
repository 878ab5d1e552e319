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


def _range_by_range(ranges, t, f):
    """The reference: each range's Form methods on the temperatures that fall in it (a
    temperature at a breakpoint in the lower range, outside all in the nearest end range)."""
    t = np.asarray(t, dtype=float)
    idx = forms.range_of(t, [r[1] for r in ranges[:-1]])
    out = {k: np.empty(len(t)) for k in ("Cp", "H", "S")}
    for j, (_, _, coeffs) in enumerate(ranges):
        m = idx == j
        a, h0, s0 = f.unpack(coeffs)
        out["Cp"][m] = f.cp(a, t[m])
        out["H"][m] = f.h_integral(a, t[m]) + h0
        out["S"][m] = f.s_integral(a, t[m]) + s0
    out["G"] = out["H"] - t * out["S"]
    return out


@settings(max_examples=60, deadline=None)
@given(form=st.sampled_from(sorted(forms.FORMS)),
       species=st.lists(st.tuples(st.integers(1, 3), st.floats(-3.0, 3.0),
                                  st.lists(st.floats(150.0, 7000.0), min_size=1, max_size=25)),
                        min_size=1, max_size=6))
def test_many_species_in_one_pass_give_each_one_s_numbers_to_the_last_bit(form, species):
    """evaluate_many (the batched evaluation of a partition's tables) gives every species
    the numbers of its ranges' own Form methods, range by range, alone."""
    f = forms.FORMS[form]
    items = []
    for n_ranges, scale, t in species:
        edges = np.geomspace(200.0, 6000.0, n_ranges + 1)
        ranges = [(edges[j], edges[j + 1],
                   f.pack([(k + j + 1) * 10.0 ** (scale - 3 * k) for k in range(len(f.powers))],
                          -1000.0 * (j + 1), 4.0 + j, 0.0)) for j in range(n_ranges)]
        items.append((ranges, t))
    together = forms.evaluate_many(items, form)
    for (ranges, t), got in zip(items, together):
        want = _range_by_range(ranges, t, f)
        for k in ("Cp", "H", "S", "G"):
            np.testing.assert_array_equal(got[k], want[k])
            np.testing.assert_array_equal(forms.evaluate_ranges(ranges, t, form)[k], want[k])
