"""The constrained nasa7 fit: recovery of known curves, exact constraints, weighting."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from thermoledger.core.constants import GAS_CONSTANT as R
from thermoledger.core.errors import FitError
from thermoledger.core.settings import FitSettings
from thermoledger.physics import forms
from thermoledger.testing import fit_arrays

# a smooth Cp/R of the right shape for a small polyatomic gas (kelvin coefficients, invented
# for the recovery test only: it is what the fit must give back, not a check value)
TRUE = [3.0, 4.0e-3, -1.5e-6, 2.5e-10, -1.5e-14]


def cp_true(t):
    return R * forms.cp_over_r(TRUE, t)


def grid(lo=200.0, hi=3000.0, n=60):
    return np.geomspace(lo, hi, n)


def jumps(result):
    """Relative jumps of Cp, dCp/dT, H and S at every breakpoint, from kelvin coefficients."""
    out = []
    for lo, hi in zip(result.ranges[:-1], result.ranges[1:]):
        tb = lo.t_max
        a, b = lo.coefficients, hi.coefficients
        # the slope is compared as T dCp/dT, on the scale of Cp
        out.append(abs(forms.dcp_over_r(a, tb) - forms.dcp_over_r(b, tb)) * tb
                   / forms.cp_over_r(a, tb))
        for fa, fb in ((forms.cp_over_r(a, tb), forms.cp_over_r(b, tb)),
                       (forms.h_over_rt(a, tb), forms.h_over_rt(b, tb)),
                       (forms.s_over_r(a, tb), forms.s_over_r(b, tb))):
            out.append(abs(fa - fb) / max(abs(fa), abs(fb)))
    return out


def test_recovers_a_single_polynomial_exactly():
    t = grid()
    r = fit_arrays("X", t, cp_true(t), None, -1.0e5, 250.0)
    assert r.cp_max_rel_dev < 1e-10
    for rng in r.ranges:
        np.testing.assert_allclose(rng.coefficients[:5], TRUE, rtol=1e-6, atol=1e-20)


def test_recovery_with_noise_stays_within_the_noise():
    rng = np.random.default_rng(7)
    t = grid(n=120)
    noisy = cp_true(t) * (1 + 1e-3 * rng.standard_normal(t.size))
    r = fit_arrays("X", t, noisy, None, 0.0, 250.0)
    fitted = forms.evaluate_ranges([(x.t_min, x.t_max, x.coefficients) for x in r.ranges], t, "nasa7")["Cp"]
    # 8 free parameters on 120 points with noise sigma = 0.1 %: the fitted curve is off the
    # truth by about sigma*sqrt(8/120) = 0.026 % rms, more at the ends (higher leverage)
    err = fitted / cp_true(t) - 1
    assert np.sqrt(np.mean(err**2)) < 4e-4
    assert np.max(np.abs(err)) < 1e-3


def test_anchors_are_exact():
    t = grid()
    h298, s298 = -393510.0, 213.785
    r = fit_arrays("X", t, cp_true(t), None, h298, s298)
    ev = forms.evaluate_ranges([(x.t_min, x.t_max, x.coefficients) for x in r.ranges], [298.15], "nasa7")
    assert ev["H"][0] == pytest.approx(h298, rel=1e-12)
    assert ev["S"][0] == pytest.approx(s298, rel=1e-12)


def test_conventional_breakpoint_when_straddled_else_optimised_inside():
    conv = FitSettings(breakpoint_mode="conventional")
    t = grid()
    r = fit_arrays("X", t, cp_true(t), None, 0.0, 200.0, conv)
    assert r.breakpoints == (1000.0,) and not r.notes
    t = grid(200, 900, 20)
    r = fit_arrays("X", t, cp_true(t), None, 0.0, 200.0, conv)
    assert 200 < r.breakpoints[0] < 900 and r.notes[0][0] == "COV-RANGE-POINTS"


@settings(max_examples=60, deadline=None)
@given(st.floats(min_value=300.0, max_value=2000.0), st.integers(min_value=0, max_value=10**6))
def test_continuity_at_random_breakpoints(tb, seed):
    # every range at least 1.5 times wider at the top: 200-300 K to 2000-3000 K
    rng = np.random.default_rng(seed)
    t = grid(200, 3000, 80)
    cp = cp_true(t) * (1 + 2e-3 * rng.standard_normal(t.size))
    r = fit_arrays("X", t, cp, None, 1000.0, 200.0,
                        FitSettings(breakpoint_mode="fixed", fixed_breakpoints=(tb,)))
    assert r.ranges[0].t_max == pytest.approx(tb)
    assert max(jumps(r)) < 1e-9


def test_uncertainty_weights_discount_a_bad_point():
    t = grid()
    cp = cp_true(t)
    bad = cp.copy()
    bad[20] *= 1.10
    u = 1e-3 * cp
    u[20] = 1e3
    r = fit_arrays("X", t, bad, u, 0.0, 200.0)
    assert r.weighting == "u(Cp)"
    fitted = forms.evaluate_ranges([(x.t_min, x.t_max, x.coefficients) for x in r.ranges], t, "nasa7")["Cp"]
    assert np.max(np.abs(np.delete(fitted / cp - 1, 20))) < 1e-6


def test_constant_cp_gives_constant_fit():
    # monatomic ideal gas: Cp = 5/2 R (equipartition)
    t = grid()
    r = fit_arrays("Ar", t, np.full(t.size, 2.5 * R), None, 0.0, 154.846)
    for rng in r.ranges:
        assert rng.coefficients[0] == pytest.approx(2.5, rel=1e-12)
        # the other scaled coefficients vanish to rounding (relative to a1 = 2.5)
        assert max(abs(c) * 1000.0 ** k for k, c in enumerate(rng.coefficients[1:5], 1)) < 1e-10


def test_too_few_points_is_a_fit_error():
    with pytest.raises(FitError, match="3 points, at least 10"):
        fit_arrays("Y(g)", [300, 400, 500], [30, 31, 32], None, 0.0, 200.0)


def test_lowest_range_reaches_298_when_data_start_above():
    t = grid(320, 3000)
    r = fit_arrays("X", t, cp_true(t), None, 0.0, 200.0)
    assert r.ranges[0].t_min == 298.15 and r.data_t_min == pytest.approx(320)


def test_equal_settings_written_alike_share_one_record_and_others_keep_their_own():
    """Every fitted species records its settings; those written alike share one dict (a
    large build keeps every species until its release is written), while settings that are
    equal but written otherwise (6000 and 6000.0, -0.0 and 0.0) keep their own, so that a
    species records what its settings say whatever was fitted before it."""
    a, b = FitSettings(use_t_max=6000.0), FitSettings(use_t_max=6000.0)
    assert a.recorded() is b.recorded() and a.recorded() == a.to_dict()
    whole = FitSettings(use_t_max=6000)
    assert whole == a and repr(whole.recorded()["use_t_max"]) == "6000"
    assert repr(a.recorded()["use_t_max"]) == "6000.0"
    assert repr(FitSettings(extension_tolerance=-0.0).recorded()["extension_tolerance"]) == "-0.0"
    fit = fit_arrays("N2", np.linspace(300.0, 1000.0, 30), np.full(30, 30.0), None, 0.0,
                     191.6, FitSettings(ranges=1))
    assert fit.settings is FitSettings(ranges=1).recorded()
