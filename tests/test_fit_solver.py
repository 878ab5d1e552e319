"""The constrained solver: agreement with a general optimiser, exact continuity in every
form, uncertainty coverage, simultaneous H/S fitting, minimax, acceptance."""

import json

import numpy as np
import pytest
from scipy.optimize import minimize
from thermoledger.core.constants import GAS_CONSTANT as R
from thermoledger.core.settings import FitSettings
from thermoledger.fit import lsq
from thermoledger.physics import basis, forms, statmech
from thermoledger.testing import fit_arrays, table_entry, trials, write_source

NU = ("nonlinear", [2917.0, 1534.0, 3019.0, 1306.0], [1, 2, 3, 3])  # CH4, Shimanouchi 1972


def rrho(t):
    return R * statmech.rrho_cp_over_r(t, *NU)


def test_solution_agrees_with_slsqp_on_the_same_problem():
    t = trials.grid(200.0, 3000.0, 50.0)
    rng = np.random.default_rng(4)
    cp = rrho(t) * (1 + 1e-3 * rng.standard_normal(t.size))
    powers, bps = forms.FORMS["nasa7"].powers, [900.0]
    a = basis.cp_rows(powers, t, bps)
    c = basis.continuity_rows(powers, bps, 1)
    y, sig = cp / R, 3e-3 * cp / R
    ours = lsq.solve(a, y, sig, c)
    aw, yw = a / sig[:, None], y / sig
    # SLSQP works in columns scaled to unit norm (z = x / scale): unscaled, the powers of T
    # span orders of magnitude and its equality subproblem is rank-deficient on some CPUs
    scale = 1.0 / np.linalg.norm(aw, axis=0)
    az, cz = aw * scale, c * scale

    def f(x):
        r = aw @ x - yw
        return r @ r

    def fz(z):
        r = az @ z - yw
        return r @ r

    def grad(z):
        return 2 * az.T @ (az @ z - yw)

    z0 = np.linalg.lstsq(az, yw, rcond=None)[0]
    ref = minimize(fz, z0, jac=grad, method="SLSQP",
                   constraints=[{"type": "eq", "fun": lambda z: cz @ z, "jac": lambda z: cz}],
                   options={"ftol": 1e-14, "maxiter": 500})
    assert ref.success, ref.message
    assert np.max(np.abs(cz @ ref.x)) < 1e-9 * np.max(np.abs(ref.x))   # its constraint holds
    assert f(ours.c) == pytest.approx(ref.fun, rel=1e-6)
    assert f(ours.c) <= ref.fun * (1 + 1e-9)   # and ours is not worse
    assert np.max(np.abs(c @ ours.c)) < 1e-12 * np.max(np.abs(ours.c))


@pytest.mark.parametrize("seed", [1, 2, 3, 4])
def test_inequalities_agree_with_slsqp_and_a_row_zero_to_rounding_is_no_constraint(seed):
    """lsq.at_least (Lawson & Hanson's least-distance reduction) against scipy's SLSQP with
    the same inequalities, on well-conditioned random problems with active constraints: as
    good a fit, every constraint held. A row of G that is zero to rounding with h above
    zero by rounding (a slope fixed by the join, asked to be >= 0 again) changes nothing:
    kept, it made at_least return coefficients without bound."""
    rng = np.random.default_rng(seed)
    a, y, sig = rng.standard_normal((40, 5)), rng.standard_normal(40), rng.uniform(0.5, 2, 40)
    free = lsq.solve(a, y, sig).c
    g = rng.standard_normal((12, 5))
    inside = free + 0.5 * rng.standard_normal(5)          # a point that holds them all
    h = g @ inside - rng.uniform(0.0, 0.3, 12)
    assert np.any(g @ free < h)                          # the free fit breaks some
    got = lsq.at_least(a, y, sig, g, h)
    aw, yw = a / sig[:, None], y / sig

    def f(x):
        return float(np.sum((aw @ x - yw) ** 2))

    ref = minimize(f, free, jac=lambda x: 2 * aw.T @ (aw @ x - yw), method="SLSQP",
                   constraints=[{"type": "ineq", "fun": lambda x: g @ x - h, "jac": lambda x: g}],
                   options={"ftol": 1e-12, "maxiter": 500})
    assert ref.success, ref.message
    assert np.all(g @ got.c >= h - 1e-9 * np.max(np.abs(h)))
    assert f(got.c) == pytest.approx(ref.fun, rel=1e-8) and f(got.c) <= ref.fun * (1 + 1e-10)
    nothing = np.vstack([g, 1e-17 * rng.standard_normal(5)])
    again = lsq.at_least(a, y, sig, nothing, np.append(h, 7e-13))
    np.testing.assert_allclose(again.c, got.c, rtol=1e-12, atol=1e-12)


def jumps(form, r):
    """Relative jumps at every breakpoint of Cp, T dCp/dT, T² d2Cp/dT2, H, S (exported)."""
    f = forms.FORMS[form]
    out = []
    for lo, hi in zip(r.ranges[:-1], r.ranges[1:]):
        tb = lo.t_max
        a, ha, sa = f.unpack(lo.coefficients)
        b, hb, sb = f.unpack(hi.coefficients)
        cp = f.cp(a, tb)
        out.append([abs(f.cp(a, tb) - f.cp(b, tb)) / cp,
                    abs(f.dcp(a, tb) - f.dcp(b, tb)) * tb / cp,
                    abs(f.d2cp(a, tb) - f.d2cp(b, tb)) * tb * tb / cp,
                    abs((f.h_integral(a, tb) + ha) - (f.h_integral(b, tb) + hb))
                    / abs(f.h_integral(a, tb) + ha),
                    abs((f.s_integral(a, tb) + sa) - (f.s_integral(b, tb) + sb))
                    / abs(f.s_integral(a, tb) + sa)])
    return np.array(out)


@pytest.mark.parametrize("form", list(forms.FORMS))
@pytest.mark.parametrize("n_ranges, order", [(2, 1), (3, 1), (3, 2), (4, 2)])
def test_continuity_at_every_breakpoint(form, n_ranges, order):
    t = trials.grid(200.0, 6000.0, 50.0)
    rng = np.random.default_rng(n_ranges * 10 + order)
    cp = rrho(t) * (1 + 1e-3 * rng.standard_normal(t.size))
    r = fit_arrays("CH4", t, cp, None, -74870.0, 186.25,
                        FitSettings(form=form, ranges=n_ranges, continuity=order,
                                    accept_cp_max_rel=1.0))
    j = jumps(form, r)
    assert j.shape[0] == n_ranges - 1
    assert np.max(j[:, :order + 1]) < 1e-9          # the constrained derivatives
    assert np.max(j[:, 3:]) < 1e-9                  # H and S everywhere
    ev = forms.evaluate_ranges([(x.t_min, x.t_max, x.coefficients) for x in r.ranges], [298.15], form)
    assert ev["H"][0] == pytest.approx(-74870.0, abs=1e-6)
    assert ev["S"][0] == pytest.approx(186.25, rel=1e-12)


def test_one_sigma_band_covers_the_truth_about_68_percent():
    # synthetic tables: a truth the model can represent (one smooth quartic, invented for the
    # test) plus known Gaussian noise (0.3 %, stated as u(Cp)); fixed breakpoint, so that
    # the band is tested and not the breakpoint search
    t = trials.grid(200.0, 3000.0, 50.0)
    truth = R * forms.cp_over_r([3.0, 4.0e-3, -1.5e-6, 2.5e-10, -1.5e-14], t)
    rng = np.random.default_rng(11)
    inside = total = 0
    fixed = FitSettings(breakpoint_mode="fixed", fixed_breakpoints=(1000.0,),
                        accept_cp_max_rel=1.0)
    for _ in range(100):
        u = 3e-3 * truth
        cp = truth + u * rng.standard_normal(t.size)
        r = fit_arrays("X", t, cp, u, 0.0, 186.25, fixed)
        sp = {"form": "nasa7", "breakpoints": list(r.breakpoints),
              "ranges": [{"t_min": x.t_min, "t_max": x.t_max, "coefficients": x.coefficients}
                         for x in r.ranges], "extrapolated": [],
              "uncertainty": {"powers": list(r.powers), "covariance": r.covariance}}
        from thermoledger.library import document as library

        band = library.uncertainty(sp, t)["u_Cp"]
        fitted = forms.evaluate_ranges(library.ranges_of(sp), t, "nasa7")["Cp"]
        inside += int(np.sum(np.abs(fitted - truth) <= band))
        total += t.size
    coverage = inside / total
    assert 0.60 <= coverage <= 0.76, coverage


def test_simultaneous_h_column_improves_enthalpy():
    t = trials.grid(200.0, 2000.0, 50.0)
    truth = rrho(t)
    rng = np.random.default_rng(2)
    cp = truth * (1 + 0.01 * rng.standard_normal(t.size))       # poor Cp, 1 % noise
    dh = np.array([statmech_integral(x) for x in t])             # precise H - H298
    u_dh = np.full(t.size, 1.0)                                  # stated: 1 J/mol
    only_cp = fit_arrays("CH4", t, cp, None, 0.0, 186.25,
                              FitSettings(simultaneous=False, accept_cp_max_rel=1.0), dh=dh,
                              u_dh=u_dh)
    both = fit_arrays("CH4", t, cp, None, 0.0, 186.25,
                           FitSettings(accept_cp_max_rel=1.0, accept_h_max=1e4), dh=dh,
                           u_dh=u_dh)
    assert both.h_max_dev < 0.2 * only_cp.h_max_dev


def statmech_integral(x):
    from scipy.integrate import quad

    return quad(lambda y: rrho(np.array([y]))[0], 298.15, x, epsrel=1e-12)[0]


def test_minimax_lowers_the_largest_deviation():
    t = trials.grid(200.0, 6000.0, 50.0)
    cp = rrho(t)
    ls = fit_arrays("CH4", t, cp, None, 0.0, 186.25, FitSettings(accept_cp_max_rel=1.0))
    mm = fit_arrays("CH4", t, cp, None, 0.0, 186.25,
                         FitSettings(minimax=True, accept_cp_max_rel=1.0))
    assert mm.cp_max_rel_dev < 0.9 * ls.cp_max_rel_dev


def test_optimised_breakpoint_beats_the_conventional_one():
    t = trials.grid(200.0, 6000.0, 50.0)
    cp = rrho(t)
    conv = fit_arrays("CH4", t, cp, None, 0.0, 186.25,
                           FitSettings(breakpoint_mode="conventional", accept_cp_max_rel=1.0))
    # without the preference for the conventional breakpoint the optimum wins on its own
    # objective (rms)
    opt = fit_arrays("CH4", t, cp, None, 0.0, 186.25,
                     FitSettings(accept_cp_max_rel=1.0, breakpoint_stability=0.0))
    assert conv.breakpoints == (1000.0,) and opt.breakpoints != (1000.0,)
    assert opt.cp_rms_rel_dev < conv.cp_rms_rel_dev


def test_failing_fit_is_reported_not_exported(tmp_path, capsys):
    from thermoledger.cli import main as cli

    t = trials.grid(200.0, 6000.0, 50.0)
    rows = [[f"{a:.6g}", f"{b:.6f}"] for a, b in zip(t, rrho(t))]
    entries = [dict(table_entry("ch4.csv", "CH4", "CH4", "nonlinear"),
                    header=["T [K]", "Cp [J/(mol*K)]"], rows=rows),
               dict(table_entry("ch4b.csv", "CH4b", "CH4", "nonlinear",
                                fit={"form": "nasa9", "ranges": 3}),
                    header=["T [K]", "Cp [J/(mol*K)]"], rows=rows)]
    write_source(tmp_path / "raw", "lab", entries)
    code = cli.main(["build", "--raw", str(tmp_path / "raw"), "--out", str(tmp_path / "out"),
                     "--accept-cp", "0.001"])
    out = capsys.readouterr().out
    assert code == 0 and "FIT-REJECTED" in out
    lib = json.loads((tmp_path / "out" / "library.json").read_text())
    assert [s["id"] for s in lib["species"]] == ["CH4b(g)"]       # the nasa9 override passes
    assert lib["species"][0]["form"] == "nasa9" and len(lib["species"][0]["ranges"]) == 3
    assert lib["quarantined"][0]["reasons"][0]["code"] == "FIT-REJECTED"


@pytest.mark.parametrize("form", ["nasa7", "nasa9", "shomate"])
def test_values_of_stacked_coefficients_are_those_of_the_rows(form):
    """basis.values (Cp/R and its slope without the other ranges' zero columns), used to
    check a fit beyond the data, gives the numbers of cp_rows @ c and slope_rows @ c to
    rounding, on one range, across breakpoints and at a breakpoint itself."""
    powers = forms.FORMS[form].powers
    rng = np.random.default_rng(7)
    bps = [700.0, 1500.0]
    c = rng.uniform(-1.0, 1.0, 3 * len(powers))
    for t in (np.geomspace(2000.0, 6000.0, 400), np.geomspace(200.0, 6000.0, 401),
              np.array([700.0]), np.array([200.0, 700.0, 1500.0, 6000.0])):
        for deriv, rows in ((0, basis.cp_rows), (1, basis.slope_rows)):
            want = rows(powers, t, bps) @ c
            got = basis.values(powers, t, bps, c, deriv)
            np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-12 * np.abs(want).max())


@pytest.mark.parametrize("order", [0, 1, 2])
def test_the_join_s_projector_and_null_space_keep_the_join_exact(order):
    """beyond._join: P c meets every continuity condition of c at tn (K P c = K c), and every
    direction of N leaves them alone (K N = 0, N orthonormal), so the joined range is
    continuous whatever its free part."""
    from thermoledger.fit import beyond

    powers = forms.FORMS["nasa9"].powers
    tn = 3000.0
    project, null = beyond._join(tuple(powers), tn, order)
    k = np.vstack([basis.powers_row(powers, tn / forms.T_SCALE, d) for d in range(order + 1)])
    c = np.random.default_rng(order).uniform(-1.0, 1.0, len(powers))
    np.testing.assert_allclose(k @ (project @ c), k @ c, rtol=1e-12)
    assert null.shape == (len(powers), len(powers) - order - 1)
    np.testing.assert_allclose(k @ null, 0.0, atol=1e-12 * np.abs(k).max())
    np.testing.assert_allclose(null.T @ null, np.eye(null.shape[1]), atol=1e-13)


def test_a_fit_whose_cp_turns_negative_inside_the_range_of_use_is_rejected_where_it_does():
    """The positivity check of a fit (species._judge) looks at a fine grid of the whole range
    of use, not only the data: Cp/R = 2 − 2 τ fits rows up to 900 K but is zero at 1000 K
    and negative above; the rejection names the first grid temperature at or past 1000 K."""
    from thermoledger.core.errors import FitRejected
    from thermoledger.core.records import CpData, FitRange, SpeciesIdentity
    from thermoledger.fit import species

    form = forms.FORMS["nasa7"]
    c = np.array([2.0, -2.0, 0.0, 0.0, 0.0])
    cp_coeffs = [form.cp_coefficients(c)]
    h0, s0 = species.integration_constants(form, cp_coeffs, [200.0, 1500.0], 0.0, 200.0)
    ranges = (FitRange(200.0, 1500.0, tuple(form.pack(cp_coeffs[0], h0[0], s0[0], 0.0))),)
    t = np.linspace(200.0, 900.0, 15)
    cov = np.eye(5) * 1e-12
    solved = species.Solved(form=form, ranges=ranges, breakpoints=(),
                            solution=lsq.Solution(c=c, residual=np.zeros(15), cov=cov, chi2=1.0,
                                                  dof=10),
                            extensions=(), notes=(), weighting="relative", covariance=cov,
                            model_error=({"cp": 0.0, "h": 0.0, "s": 0.0},),
                            covariance_scale=1.0, choice=None)
    data = CpData(t=t, cp=R * (2.0 - 2.0 * t / 1000.0))
    with pytest.raises(FitRejected, match="not positive") as got:
        species._judge(SpeciesIdentity("X(g)", 0.0, 200.0), solved, data, FitSettings())
    bad = float(got.value.reason.split(" at ")[1].split(" K")[0])
    assert 1000.0 <= bad <= 1000.0 * (1500.0 / 200.0) ** (1 / 399)
