"""What the checks make once per grid of temperatures, and their shortcuts of numpy's general
functions, give numpy's own numbers (to the last bit, or to rounding where said), and the same
numbers whatever was checked before: a table's findings do not depend on which tables were
checked before it."""

import warnings

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from thermoledger.checks import jumps, labels, smooth_model
from thermoledger.core import gridcache

FINITE = st.floats(-1e9, 1e9, allow_nan=False, allow_subnormal=False)


@settings(max_examples=300, deadline=None)
@given(st.lists(FINITE | st.sampled_from([0.0, -0.0, 1.0, 2.5]), min_size=1, max_size=60))
def test_the_median_is_numpy_s_to_the_last_bit(values):
    v = np.array(values)
    assert smooth_model.median(v) == float(np.median(v))
    assert np.isnan(smooth_model.median(np.append(v, np.nan)))


def _polyfit_at_end(x, y, j, k=5):
    """The reference: np.polyfit through the k inner rows next to end row j, at x[j]. Rows
    of nearly the same temperature make numpy warn that the fit may be poorly conditioned
    (RankWarning, or overflow in its coefficients; an intermittent "1 warning" of the test
    run): the numbers compared are the same, the warning is the reference's."""
    idx = np.arange(1, k + 1) if j == 0 else np.arange(len(x) - 1 - k, len(x) - 1)
    idx = idx[(idx >= 0) & (idx < len(x))]
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore", np.exceptions.RankWarning)
        return float(np.polyval(np.polyfit(x[idx] - x[j], y[idx], min(2, len(idx) - 1)),
                                0.0))


@settings(max_examples=200, deadline=None)
@given(st.lists(st.floats(50.0, 6000.0), min_size=3, max_size=40, unique=True),
       st.integers(0, 2 ** 32 - 1))
def test_the_end_extrapolation_is_numpy_s_polyfit_to_rounding(temperatures, seed):
    """The weights made once per grid give np.polyfit's value to 1e-9 in ln Cp (1e-7 % of
    Cp; the check's thresholds are 2 % and more at the ends) wherever the rows are at least
    0.1 % apart in T: closer rows make any quadratic through them ill-conditioned, and the
    two computations then round differently."""
    x = np.log(np.sort(temperatures))
    assume(np.all(np.diff(x) > 1e-3))
    y = np.log(np.random.default_rng(seed).uniform(20.0, 200.0, len(x)))
    for j in (0, len(x) - 1):
        got, ref = smooth_model._quadratic_extrapolation(x, y, j), _polyfit_at_end(x, y, j)
        assert abs(got - ref) <= 1e-9 * max(1.0, abs(ref))


def test_a_grid_s_arrays_are_made_once_read_only_and_remembered_for_a_few_grids():
    calls = []

    @gridcache.by_grid
    def made(t, k):
        calls.append((len(t), k))
        return t * k, np.ones(len(t))

    t = np.geomspace(200.0, 3000.0, 11)
    a, ones = made(t, 2.0)
    assert made(t.copy(), 2.0)[0] is a and len(calls) == 1       # the same grid: shared
    made(t, 3.0)
    assert len(calls) == 2                                       # other arguments: made
    with pytest.raises(ValueError):
        a[0] = 0.0                                               # nobody changes it
    for n in range(gridcache.GRIDS):
        made(np.arange(1.0, n + 3.0), 1.0)
    made(t, 2.0)
    assert len(calls) == 3 + gridcache.GRIDS                     # forgotten, made again


@pytest.mark.parametrize("fresh", [True, False])
def test_the_checks_give_the_same_numbers_with_the_grid_s_arrays_shared_or_not(fresh):
    """The smooth model, the side fits of the jump check and the misfit of the low end of one
    table, after other tables of the same grid or none."""
    rng = np.random.default_rng(5)
    t = np.unique(np.append(np.geomspace(200.0, 3000.0, 60), 298.15))
    cp = 30.0 + 20.0 * t / (t + 800.0)
    first = cp * (1 + 1e-3 * rng.standard_normal(t.size))
    other = cp * (1 + 1e-3 * rng.standard_normal(t.size))
    for f in (smooth_model.basis, smooth_model._end_weights, jumps._window_design,
              labels._misfit_design):
        f.cache_clear()
    if not fresh:
        smooth_model.find_outliers(t, other)
        jumps.steps(t, other)
        labels._misfit(t[:20], other[:20] / 8.314, 4)
    got = (smooth_model.loo_residuals(t, first), jumps.steps(t, first),
           labels._misfit(t[:20], first[:20] / 8.314, 4))
    for f in (smooth_model.basis, smooth_model._end_weights, jumps._window_design,
              labels._misfit_design):
        f.cache_clear()
    again = (smooth_model.loo_residuals(t, first), jumps.steps(t, first),
             labels._misfit(t[:20], first[:20] / 8.314, 4))
    for a, b in zip(got[0] + got[1], again[0] + again[1]):
        assert np.array_equal(a, b)
    assert got[2] == again[2]


def test_the_shared_geometric_grid_is_numpy_s_and_read_only():
    grid = gridcache.geomspace(200.0, 3000.0, 400)
    assert np.array_equal(grid, np.geomspace(200.0, 3000.0, 400))
    assert gridcache.geomspace(200.0, 3000.0, 400) is grid
    with pytest.raises(ValueError):
        grid[0] = 1.0


def test_the_evaluated_uncertainties_are_the_same_with_the_grid_s_rows_shared_or_made_anew(
        monkeypatch):
    """Every species of the demo library evaluated on its tables' grid twice, and once more
    with the rows of the uncertainty budget made anew for each: the same bits."""
    import json
    from pathlib import Path

    from thermoledger.library import budget
    from thermoledger.library.document import evaluate_entry

    doc = json.loads((Path(__file__).resolve().parents[1] / "curated" / "library.json")
                     .read_text())
    grids = {sp["id"]: np.arange(sp["ranges"][0]["t_min"], sp["ranges"][-1]["t_max"], 100.0)
             for sp in doc["species"]}
    shared = [evaluate_entry(sp, grids[sp["id"]]) for sp in doc["species"] * 2]
    monkeypatch.setattr(budget, "_integral_rows", budget._integral_rows.__wrapped__)
    monkeypatch.setattr(budget, "_cp_rows", budget._cp_rows.__wrapped__)
    anew = [evaluate_entry(sp, grids[sp["id"]]) for sp in doc["species"] * 2]
    assert len(shared) == 2 * len(doc["species"]) > 20
    for a, b in zip(shared, anew):
        for key in ("Cp", "H", "S", "u_Cp", "u_H", "u_S"):
            assert np.array_equal(a[key], b[key])


@settings(max_examples=100, deadline=None)
@given(st.lists(st.floats(50.0, 6000.0), min_size=1, max_size=40, unique=True),
       st.sampled_from([(0, 1, 2, 3, 4), (-2, -1, 0, 1, 2, 3, 4), (-2, 0, 1, 2, 3)]),
       st.integers(0, 2))
def test_the_fit_s_grid_arrays_are_those_made_anew_to_the_last_bit(temperatures, powers, d):
    """The powers of a grid (the rows of every fit and check of the extension), the Einstein
    columns of the oscillator spectra and Wilhoit's y of each B, made once per grid, are
    the numbers made for each species."""
    from thermoledger.fit import extrapolate
    from thermoledger.physics import basis, forms
    from thermoledger.physics.statmech import einstein

    t = np.array(sorted(temperatures))
    for _ in range(2):                                       # made, then remembered
        assert np.array_equal(basis.powers_at(t, powers, d),
                              basis.powers_row(powers, t / forms.T_SCALE, d))
        for size in extrapolate.SPECTRUM_SIZES:
            assert np.array_equal(extrapolate.spectrum_columns(t, size), einstein(
                extrapolate.spectrum_theta(size)[None, :] / t[:, None]))
        y = t[None, :] / (t[None, :] + extrapolate.B_GRID[:, None])
        for got, want in zip(extrapolate._wilhoit_grid(t), (y, y * y, y - 1.0)):
            assert np.array_equal(got, want)


def test_wilhoit_s_back_substitution_solves_the_triangular_system():
    rng = np.random.default_rng(3)
    from thermoledger.fit import extrapolate

    for n in range(1, 5):
        r = np.triu(rng.uniform(-2.0, 2.0, (n, n))) + np.diag(rng.uniform(1.0, 3.0, n))
        b = rng.uniform(-5.0, 5.0, n)
        np.testing.assert_allclose(extrapolate._back_substitution(r, b),
                                   np.linalg.solve(r, b), rtol=1e-13, atol=1e-13)


def test_a_fit_s_rows_are_made_once_for_a_grid_and_breakpoints_and_read_only():
    """The Cp rows and continuity constraints of a fit are shared by the fits of one grid
    and breakpoints (a catalogue's species, and a fit that asks twice): the numbers made
    anew, and nobody can change them."""
    from thermoledger.physics import basis

    t = np.geomspace(200.0, 3000.0, 101)
    powers = (0, 1, 2, 3, 4)
    rows = basis.cp_rows(powers, t, [1000.0])
    assert basis.cp_rows(list(powers), t.copy(), [np.float64(1000.0)]) is rows
    np.testing.assert_array_equal(rows, basis._cp_rows.__wrapped__(t, powers, (1000.0,)))
    cons = basis.continuity_rows(powers, [1000.0], 1)
    assert basis.continuity_rows(list(powers), (1000.0,), 1) is cons
    np.testing.assert_array_equal(cons, basis.continuity_rows_of_sets(powers, [[1000.0]], 1)[0])
    for made in (rows, cons):
        with pytest.raises(ValueError):
            made[0, 0] = 1.0
