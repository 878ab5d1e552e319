"""The extrapolation models: the stacked Wilhoit solve equals one solve per B, the linear
models serve where they pass their hold-out test and the non-linear search runs where they
do not, and the noise estimate behind that test needs no model.

References: CoolProp's ideal-gas Cp (the ideal-gas parts of the reference equations of
state of propane, E. W. Lemmon et al., J. Chem. Eng. Data 54, 3141 (2009); nitrogen,
R. Span et al., J. Phys. Chem. Ref. Data 29, 1361 (2000)); rigid-rotor/harmonic-oscillator
Cp (the textbook partition-function result, physics/statmech.py) with the wavenumbers of
CO2 (1333, 667 × 2, 2349 cm⁻¹, NIST CCCBDB, from memory).
"""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from thermoledger.core.constants import GAS_CONSTANT as R
from thermoledger.fit import extrapolate
from thermoledger.physics import bounds, statmech
from thermoledger.testing import coverage

CO2_NU = [1333.0, 667.0, 667.0, 2349.0]


def one_b_at_a_time(t, cp, n, c0, cinf):
    """The per-B solve the stacked one replaces: numpy's least squares for every B of the
    grid in turn, the first B of the smallest sum of squares kept."""
    best = None
    for b in extrapolate.B_GRID:
        base, cols = extrapolate._wilhoit_terms(t, b, n, c0, cinf)
        a = np.linalg.lstsq(cols / cp[:, None], (cp - base) / cp, rcond=None)[0] if n \
            else np.zeros(0)
        err = float(np.sum(((base + (cols @ a if n else 0.0) - cp) / cp) ** 2))
        if best is None or err < best[0]:
            best = (err, b, a)
    return best[1], best[2]


@pytest.mark.parametrize("case", ["CO2 rrho", "Nitrogen", "Propane"])
def test_the_stacked_wilhoit_solve_equals_one_solve_per_b(case):
    if case == "CO2 rrho":
        t = np.geomspace(200.0, 1500.0, 60)
        cp, geometry, atoms = R * statmech.rrho_cp_over_r(t, "linear", CO2_NU), "linear", 3
    else:
        pytest.importorskip("CoolProp.CoolProp")
        formula, geometry = coverage.FLUIDS[case]
        atoms = {"Nitrogen": 2, "Propane": 11}[case]
        t = coverage.data_grid(1000.0)
        cp = coverage.cp0(case, t)
    c0, cinf = bounds.cp_zero(geometry), bounds.cp_infinity(geometry, atoms)
    grid = np.geomspace(t[0], 6000.0, 50)
    stacked = extrapolate.fit_wilhoit(t, cp, c0, cinf)
    for n, model in enumerate(stacked):
        b, a = one_b_at_a_time(t, cp, n, c0, cinf)
        base, cols = extrapolate._wilhoit_terms(grid, b, n, c0, cinf)
        expected = base + (cols @ a if n else 0.0)
        np.testing.assert_allclose(model(grid), expected, rtol=1e-9, atol=0)


def test_the_oscillator_spectrum_holds_the_mode_count_and_reproduces_a_harmonic_molecule():
    t = np.geomspace(200.0, 1500.0, 60)
    cp = R * statmech.rrho_cp_over_r(t, "linear", CO2_NU)
    c0, modes = bounds.cp_zero("linear"), bounds.vibrational_modes("linear", 3)
    model = extrapolate.fit_spectrum(t, cp, c0, modes)
    # the classical limit: every mode excited, Cp -> Cp(0) + R x modes
    assert model([1.0e7])[0] == pytest.approx(c0 + R * modes, rel=1e-3)
    far = np.geomspace(1500.0, 6000.0, 20)
    truth = R * statmech.rrho_cp_over_r(far, "linear", CO2_NU)
    assert np.max(np.abs(model(far) / truth - 1)) < 2e-3


def test_a_harmonic_polyatomic_takes_the_fast_models_and_covers_the_truth():
    t = np.geomspace(200.0, 1500.0, 60)
    nu = [3000.0, 2900.0, 1500.0, 1400.0, 1200.0, 1000.0, 900.0, 600.0, 400.0]
    cp = R * statmech.rrho_cp_over_r(t, "nonlinear", nu)
    ext = extrapolate.extend(t, cp, "nonlinear", 5, 6000.0)
    assert not ext.searched and "spectrum" in ext.model
    truth = R * statmech.rrho_cp_over_r(np.array(ext.t), "nonlinear", nu)
    err = np.abs(np.array(ext.cp) / truth - 1)
    assert np.all(err <= 2 * np.array(ext.u_rel))


def test_an_anharmonic_diatomic_goes_on_to_the_non_linear_search():
    pytest.importorskip("CoolProp.CoolProp")
    t = coverage.data_grid(1000.0)
    cp = coverage.cp0("Nitrogen", t)
    # nitrogen's anharmonic rise: the linear models miss the held-out data by more than
    # the smooth table's scatter allows (about its own curvature on the 25 K grid)
    assert extrapolate.pass_level(t, cp, "linear", 2) < 1e-3
    ext = extrapolate.extend(t, cp, "linear", 2, 2000.0)
    assert ext.searched and ("anharmonic" in ext.model or "electronic" in ext.model)
    truth = coverage.cp0("Nitrogen", np.array(ext.t))
    assert np.all(np.abs(np.array(ext.cp) / truth - 1) <= 2 * np.array(ext.u_rel))


def _noisy_harmonic_molecules(n, seed=3):
    """n rigid-rotor/harmonic-oscillator molecules of seeded random wavenumbers (300-3500
    cm⁻¹), their Cp on 200-2000 K with 0.1 % seeded noise, and the exact Cp (the truth)."""
    rng = np.random.default_rng(seed)
    t = np.unique(np.append(np.geomspace(200.0, 2000.0, 80), 298.15))
    for _ in range(n):
        atoms = int(rng.integers(3, 9))
        geometry = "linear" if rng.random() < 0.3 else "nonlinear"
        nu = rng.uniform(300.0, 3500.0, 3 * atoms - (5 if geometry == "linear" else 6))

        def truth(x, geometry=geometry, nu=nu):
            return R * statmech.rrho_cp_over_r(x, geometry, nu)

        yield t, truth(t) * (1 + 1e-3 * rng.standard_normal(t.size)), geometry, atoms, truth


def test_the_coarser_spectra_spare_the_non_linear_search_and_extrapolate_no_worse(monkeypatch):
    """The finest spectrum alone carries the noise of the data beyond it: on noisy harmonic
    molecules it misses the held-out data by more than the pass level more often than the
    ladder of spectra does. With the ladder fewer take the non-linear search, every extension
    covers the exact Cp within 2u, and the extensions are on average no farther from it."""
    def run():
        searched, errors = 0, []
        for t, cp, geometry, atoms, truth in _noisy_harmonic_molecules(40):
            ext = extrapolate.extend(t, cp, geometry, atoms, 6000.0)
            searched += ext.searched
            err = np.abs(np.array(ext.cp) / truth(np.array(ext.t)) - 1)
            assert np.all(err <= 2 * np.array(ext.u_rel))
            errors.append(err.max())
        return searched, float(np.mean(errors))

    ladder = run()
    monkeypatch.setattr(extrapolate, "SPECTRUM_SIZES", (extrapolate.SPECTRUM_SIZES[-1],))
    finest = run()
    assert ladder[0] < finest[0]
    assert ladder[1] <= finest[1]


def test_every_spectrum_of_the_ladder_holds_the_mode_count_and_finer_ones_fit_closer():
    """CO2's exact Cp: each spectrum reaches the classical limit; the coarse ones miss the
    data (8 temperatures over 50-20 000 K are 2.4 times apart: 1.4 % here), each finer one
    less, the finest within 0.01 %."""
    t = np.geomspace(200.0, 1500.0, 60)
    cp = R * statmech.rrho_cp_over_r(t, "linear", CO2_NU)
    c0, modes = bounds.cp_zero("linear"), bounds.vibrational_modes("linear", 3)
    misses = []
    for size in extrapolate.SPECTRUM_SIZES:
        model = extrapolate.fit_spectrum(t, cp, c0, modes, size)
        assert model([1.0e7])[0] == pytest.approx(c0 + R * modes, rel=1e-6)
        misses.append(np.max(np.abs(model(t) / cp - 1)))
    assert misses == sorted(misses, reverse=True) and misses[-1] < 1e-4


@pytest.mark.parametrize("sigma", [0.0, 1e-3, 3e-3])
def test_the_scatter_of_a_table_is_found_without_a_model(sigma):
    rng = np.random.default_rng(11)
    t = np.unique(np.append(np.geomspace(200.0, 3000.0, 99), 298.15))
    cp = R * statmech.rrho_cp_over_r(t, "linear", CO2_NU) * (1 + sigma * rng.standard_normal(
        t.size))
    got = extrapolate.scatter(t, cp)
    if sigma:
        assert 0.75 * sigma <= got <= 1.25 * sigma
    else:
        assert got < 1e-4          # a smooth table: second differences only


def test_a_wilhoit_model_with_more_terms_than_rows_is_left_out_not_the_others():
    """Two rows cannot fix three terms: that model is left out (no solve), the models of
    fewer terms are still made."""
    t, cp = np.array([500.0, 600.0]), np.array([40.0, 41.0])
    models = extrapolate.fit_wilhoit(t, cp, bounds.cp_zero("linear"),
                                     bounds.cp_infinity("linear", 3))
    assert models[0] is not None and models[-1] is None
    assert np.isfinite(models[0](np.array([1000.0]))).all()


def test_only_the_models_that_may_win_are_fitted_to_all_data(monkeypatch):
    """Each model is fitted to the data without the hold-out; the fit to all data, which
    the guards judge, is made in order of hold-out error until one passes: the best model
    whose extension fails the guards (here: not finite) gives way to the next, and a model
    that cannot win is never fitted to all data."""
    t = np.linspace(200.0, 3000.0, 40)
    cp = np.full(len(t), 40.0)            # flat: scatter 0, so the pass level is its floor
    fits = {"a": 0, "b": 0, "c": 0}

    def group(name, err, good):
        def fitter(x, y):
            if len(x) == len(t):          # the fit to all data
                fits[name] += 1
                return [lambda z: np.full(np.shape(z), 40.0 if good else np.nan)]
            return [lambda z: np.full(np.shape(z), 40.0 * (1 + err))]
        return (f"osc-{name}",), fitter

    monkeypatch.setattr(extrapolate, "fast_candidates", lambda g, a: [
        group("c", 3e-5, True), group("a", 1e-5, False), group("b", 2e-5, True)])
    ext = extrapolate.extend(t, cp, "nonlinear", 3, 6000.0)
    assert (ext.model, ext.searched) == ("osc-b", False)
    assert ext.holdout_error == pytest.approx(2e-5)
    assert fits == {"a": 1, "b": 1, "c": 0}


def _default_jacobian(monkeypatch):
    """Make extrapolate's least squares take scipy's own Jacobian (``jac='2-point'``, one
    model call per parameter) instead of the batched one it is given."""
    from scipy.optimize import least_squares

    def scipy_own(fun, p0, jac=None, **kw):
        return least_squares(fun, p0, **kw)

    monkeypatch.setattr(extrapolate, "least_squares", scipy_own)


@pytest.mark.parametrize("fitter", ["fit_oscillators", "fit_oscillators_anharmonic",
                                    "fit_oscillators_electronic"])
@pytest.mark.parametrize("k", [1, 2, 3])
def test_the_batched_jacobian_gives_the_fit_of_scipys_own(monkeypatch, fitter, k):
    """The non-linear models take the Jacobian in one batched model call: the same forward
    differences as scipy's default, so the same fitted model to the last bit, on a
    harmonic polyatomic given a rise beyond harmonic (a synthetic table)."""
    t = np.geomspace(200.0, 3000.0, 100)
    nu = [3000.0, 2900.0, 1500.0, 1400.0, 1200.0, 1000.0, 900.0, 600.0, 400.0]
    cp = R * statmech.rrho_cp_over_r(t, "nonlinear", nu) * (1.0 + 2e-5 * (t - 200.0) / 100.0)
    geometry, atoms = "nonlinear", 5
    c0, modes = bounds.cp_zero(geometry), bounds.vibrational_modes(geometry, atoms)
    far = np.geomspace(200.0, 6000.0, 40)
    batched = getattr(extrapolate, fitter)(t, cp, k, c0, modes)(far)
    _default_jacobian(monkeypatch)
    own = getattr(extrapolate, fitter)(t, cp, k, c0, modes)(far)
    assert np.array_equal(batched, own)


def test_a_searched_extension_is_that_of_scipys_own_jacobian(monkeypatch):
    """A whole extension that takes the non-linear search (nitrogen's ideal-gas Cp from
    CoolProp) is the same, field by field, with scipy's own Jacobian."""
    pytest.importorskip("CoolProp.CoolProp")
    t = coverage.data_grid(1000.0)
    cp = coverage.cp0("Nitrogen", t)
    batched = extrapolate.extend(t, cp, "linear", 2, 2000.0)
    _default_jacobian(monkeypatch)
    assert batched.searched and extrapolate.extend(t, cp, "linear", 2, 2000.0) == batched


@given(p=st.lists(st.floats(-1e5, 1e5), min_size=1, max_size=6),
       width=st.lists(st.floats(0.0, 1e5), min_size=2, max_size=2))
def test_the_forward_steps_are_scipys(p, width):
    """forward_steps takes scipy's steps at any point inside any bounds (scipy's own
    step rule, scipy.optimize._numdiff, read as the reference)."""
    from scipy.optimize import _numdiff

    p = np.array(p)
    lo, hi = p - width[0], p + width[1]
    rel = _numdiff._compute_absolute_step(None, p, p, "2-point")
    expected, _ = _numdiff._adjust_scheme_to_bounds(p, rel, 1, "1-sided", lo, hi)
    assert np.array_equal(extrapolate.forward_steps(p, lo, hi), expected)
    free = np.full(len(p), np.inf)
    assert np.array_equal(extrapolate.forward_steps(p, -free, free), rel)
