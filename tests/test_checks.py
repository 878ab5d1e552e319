"""Validation checks on deliberately broken tables, built in the tests from clean references.

Each defect must be caught with the right code and row; each clean reference table must
give no error and no warning. Sources of the references: tests/trials.py.
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from thermoledger import build
from thermoledger.checks import reconcile
from thermoledger.core import chemistry
from thermoledger.core.constants import GAS_CONSTANT as R
from thermoledger.core.settings import FitSettings, Settings
from thermoledger.testing import trials
from thermoledger.testing.trials import make_table

pytest.importorskip("CoolProp")

REFS = trials.references()


def codes(found):
    return sorted({f.code for f in found if f.severity != "info"})


@pytest.mark.parametrize("ref", REFS, ids=[r[0] for r in REFS])
def test_clean_reference_gives_no_error_and_no_warning(ref):
    name, t, cp, formula, geometry = ref
    found = trials.run_checks(make_table(t, cp, formula, geometry))
    assert codes(found) == [], [f.message for f in found]


def ref(label):
    return next(r for r in REFS if r[0] == label)


def table_of(label, cp=None, **kw):
    name, t, base, formula, geometry = ref(label)
    return make_table(t, base if cp is None else cp, formula, geometry, **kw)


def test_genuine_smooth_maximum_is_not_an_outlier():
    # atomic oxygen: Cp rises through a maximum from its 3P fine structure (NIST ASD levels)
    name, t, cp, formula, geometry = ref("O atom (electronic levels)")
    assert np.argmax(cp) not in (0, len(cp) - 1) or cp[0] > cp[5]
    assert cp.max() > 2.5 * R * 1.05
    assert trials.run_checks(make_table(t, cp, formula, geometry)) == []


def test_below_equipartition_names_the_rows():
    name, t, cp, formula, geometry = ref("Ar CoolProp 50 K")
    bad = cp.copy()
    bad[[4, 9]] *= 0.9
    (f,) = [x for x in trials.run_checks(make_table(t, bad, formula, geometry))
            if x.code == "CP-BELOW-EQUIPARTITION"]
    assert f.lines == (6, 11) and f.severity == "error"


def test_above_classical_limit_is_a_warning():
    name, t, cp, formula, geometry = ref("N2 CoolProp 50 K")
    bad = cp * np.where(t > 1500, 1.25, 1.0)  # 4.5 R = 37.4 J/(mol K) is the N2 limit
    found = trials.run_checks(make_table(t, bad, formula, geometry))
    above = [f for f in found if f.code == "CP-ABOVE-CLASSICAL"]
    assert above and above[0].severity == "warning"
    assert above[0].line == int(np.argmax(bad > 4.5 * R * 1.1)) + 2


def o2_cp(t):
    """Ideal-gas Cp [J/(mol K)] of O2 from its spectroscopic constants (K. P. Huber & G.
    Herzberg, Constants of Diatomic Molecules, 1979, from memory): anharmonic vibrational
    levels (we = 1580.19, wexe = 11.98 cm-1), a rotor with Bv = Be - ae (v + 1/2) (Be = 1.4456,
    ae = 0.0159 cm-1) and the a and b electronic levels (7918.1 cm-1, g = 2; 13195.1 cm-1,
    g = 1) over the X ground level (g = 3); Cp from the partition function by differences."""
    c2 = 1.438776877  # second radiation constant [cm K] (CODATA 2018)
    v = np.arange(0, 60)
    ev = 1580.19 * (v + 0.5) - 11.98 * (v + 0.5) ** 2
    keep = np.diff(np.append(ev, -np.inf)) > 0
    ev, bv = ev[keep] - ev[0], 1.4456 - 0.0159 * (v[keep] + 0.5)

    def ln_q(x):
        vib_rot = np.sum(np.exp(-c2 * ev / x) * x / (c2 * bv))
        el = 3 + 2 * np.exp(-c2 * 7918.1 / x) + np.exp(-c2 * 13195.1 / x)
        return np.log(vib_rot) + np.log(el) + 1.5 * np.log(x)

    def u(x, h):
        return x * x * (ln_q(x + h) - ln_q(x - h)) / (2 * h)

    out = []
    for x in np.atleast_1d(t):
        h = 1e-3 * x
        out.append(((u(x + h, h) - u(x - h, h)) / (2 * h) + 1.0) * R)
    return np.array(out)


def test_real_oxygen_up_to_6000_k_is_not_above_its_physical_ceiling():
    t = np.arange(300.0, 6001.0, 100.0)
    cp = o2_cp(t)
    # the model reproduces the tabulated value at 1000 K, 34.87 J/(mol K) (JANAF, from memory)
    assert cp[t == 1000.0][0] == pytest.approx(34.87, abs=0.1)
    assert cp.max() > 4.5 * R * 1.1      # beyond the old 10 % margin of the classical limit
    found = trials.run_checks(make_table(t, cp, "O2", "linear"))
    assert not [f for f in found if f.code == "CP-ABOVE-CLASSICAL"]


@pytest.mark.parametrize("divide, name", [(4.184, "cal taken as J"), (R, "Cp/R taken as Cp"),
                                          (None, "per gram taken as per mole"),
                                          (1e-3, "J taken as kJ"), (1e3, "kJ taken as J")])
def test_whole_table_unit_factor_names_the_factor(divide, name):
    label, t, cp, formula, geometry = ref("CO2 CoolProp 50 K")
    f = chemistry.composition("CO2").molar_mass if divide is None else divide
    found = trials.run_checks(make_table(t, cp / f, formula, geometry))
    (hit,) = [x for x in found if x.code == "UNIT-FACTOR"]
    assert name in hit.message and hit.fix
    assert f"{f:.6g}" in hit.message
    assert not any(x.code == "CP-BELOW-EQUIPARTITION" for x in found)  # one finding, not many


def test_block_of_rows_in_calories():
    label, t, cp, formula, geometry = ref("CH4 CoolProp 50 K")
    bad = cp.copy()
    bad[10:16] /= 4.184
    found = trials.run_checks(make_table(t, bad, formula, geometry))
    (hit,) = [x for x in found if x.code == "UNIT-BLOCK"]
    assert hit.lines == tuple(range(12, 18))
    assert "4.184" in hit.message and "multiply lines 12-17 by 4.184" in hit.fix


def test_single_point_slip_reports_row_value_and_expected():
    label, t, cp, formula, geometry = ref("CO2 CoolProp 25 K")
    bad = cp.copy()
    bad[20] *= 1.03
    (hit,) = [x for x in trials.run_checks(make_table(t, bad, formula, geometry))]
    assert (hit.code, hit.line) == ("SMOOTH-OUTLIER", 22)
    assert float(hit.expected) == pytest.approx(cp[20], rel=2e-3)
    assert float(hit.seen) == pytest.approx(bad[20], rel=1e-5)


def test_jitter_run_is_reported_once():
    label, t, cp, formula, geometry = ref("N2 CoolProp 25 K")
    bad = cp.copy()
    bad[30:36] *= 1 + 0.02 * np.array([1, -1, 1, -1, 1, -1])
    found = trials.run_checks(make_table(t, bad, formula, geometry))
    jit = [f for f in found if f.code == "SMOOTH-JITTER"]
    assert len(jit) == 1 and set(jit[0].lines) <= set(range(32, 38))
    assert len(jit[0].lines) >= 3


def test_scatter_beyond_stated_uncertainty():
    label, t, cp, formula, geometry = ref("O2 CoolProp 25 K")
    rng = np.random.default_rng(3)
    bad = cp * (1 + 3e-3 * rng.standard_normal(len(cp)))
    found = trials.run_checks(make_table(t, bad, formula, geometry, u=2e-4 * cp))
    assert "SMOOTH-SCATTER" in codes(found)


def coolprop_columns(fluid, t, s298):
    from scipy.integrate import quad

    cp = trials.coolprop_cp(fluid, t)
    dh = np.array([quad(lambda y: trials.coolprop_cp(fluid, [y])[0], 298.15, x)[0] for x in t])
    s = s298 + np.array([quad(lambda y: trials.coolprop_cp(fluid, [y])[0] / y, 298.15, x)[0]
                         for x in t])
    return cp, dh, s


@pytest.fixture(scope="module")
def n2_columns():
    t = trials.grid(200.0, 1500.0, 50.0)
    # S°(298.15 K) of N2 = 191.609 J/(mol K), CODATA Key Values (Cox et al. 1989), from memory
    return t, *coolprop_columns("Nitrogen", t, 191.609)


def test_consistent_columns_give_no_finding(n2_columns):
    t, cp, dh, s = n2_columns
    found = trials.run_checks(make_table(t, cp, "N2", "linear", dh=dh, s=s, s298=191.609))
    assert codes(found) == []


def test_h_column_that_does_not_integrate_names_the_first_row(n2_columns):
    t, cp, dh, s = n2_columns
    bad = dh.copy()
    bad[15:] += 400.0  # a transcription error from line 17 on
    found = trials.run_checks(make_table(t, cp, "N2", "linear", dh=bad, s=s, s298=191.609))
    (hit,) = [f for f in found if f.code == "CONS-H"]
    assert hit.line == 17


def test_s_column_parts_and_metadata_disagreement(n2_columns):
    t, cp, dh, s = n2_columns
    bad = s.copy()
    bad[20:] += 0.5
    (hit,) = [f for f in trials.run_checks(make_table(t, cp, "N2", "linear", s=bad,
                                                      s298=191.609)) if f.code == "CONS-S"]
    assert hit.line == 22
    # an S column still at 1 atm while entropy_298 is at 1 bar: off by R ln(1.01325) = 0.109
    found = trials.run_checks(make_table(t, cp, "N2", "linear", s=s - 0.1094, s298=191.609))
    assert codes(found) == ["CONS-S298"]


def test_gap_and_range_of_use():
    label, t, cp, formula, geometry = ref("CO CoolProp 25 K")
    keep = (t < 700) | (t > 1300)
    found = trials.run_checks(make_table(t[keep], cp[keep], formula, geometry))
    (gap,) = [f for f in found if f.code == "COV-GAP"]
    assert "700" in gap.message or "675" in gap.message
    ctx = Settings(fit=FitSettings(use_t_min=200.0, use_t_max=3000.0))
    found = trials.run_checks(make_table(t, cp, formula, geometry), ctx)
    assert [f.code for f in found] == ["COV-EXTRAPOLATED"]


def test_condensed_phase_dulong_petit():
    # an Einstein solid of 2 atoms (Einstein 1907) is clean; three times its Cp is implausible
    t = trials.grid(100.0, 1000.0, 25.0)
    cp = 3 * 2 * R * trials.statmech.einstein(300.0 / t)
    assert trials.run_checks(make_table(t, cp, "NaCl", None, phase="cr")) == []
    found = trials.run_checks(make_table(t, 3 * cp, "NaCl", None, phase="cr"))
    assert codes(found) == ["CP-ABOVE-DULONG-PETIT"]


def test_sources_disagree_and_merge_by_priority():
    label, t, cp, formula, geometry = ref("CO2 CoolProp 25 K")
    a = trials.with_source(make_table(t[t <= 1500], cp[t <= 1500], formula, geometry),
                           "lab-a", 20, "lab-a/co2.csv")
    other = cp * (1 + 0.03 * (t / 2000.0))
    b = trials.with_source(make_table(t, other, formula, geometry), "lab-b", 10, "lab-b/co2.csv")
    sels, found, dropped = reconcile.reconcile([a, b], [], Settings())
    (sel,) = sels
    dis = [f for f in found if f.code == "SRC-DISAGREE"]
    assert dis and "lab-a" in dis[0].message and "lab-b" in dis[0].message
    used = {u.meta.file: (u.rows, u.t_min, u.t_max) for u in sel.uses}
    top = float(t[t <= 1500].max())
    assert used["lab-a/co2.csv"][2] == top
    assert used["lab-b/co2.csv"][1] > top  # only rows outside the preferred range
    assert sorted(set(sel.data["file"].tolist())) == ["lab-a/co2.csv", "lab-b/co2.csv"]


def test_sources_differing_by_a_factor():
    # condensed phase, where the gas bounds cannot catch it: the second source is in cal
    t = trials.grid(100.0, 1000.0, 25.0)
    cp = 3 * 2 * R * trials.statmech.einstein(300.0 / t)
    a = trials.with_source(make_table(t, cp, "NaCl", None, phase="cr"), "lab-a", 20, "lab-a/x.csv")
    b = trials.with_source(make_table(t, cp / 4.184, "NaCl", None, phase="cr"), "lab-b", 10,
                           "lab-b/x.csv")
    sels, found, dropped = reconcile.reconcile([a, b], [], Settings())
    (hit,) = [f for f in found if f.code == "SRC-FACTOR"]
    assert hit.file == "lab-b/x.csv" and "4.184" in hit.message
    assert [m.file for m, _ in dropped] == ["lab-b/x.csv"]


def test_outlier_rows_are_left_out_of_the_fit(tmp_path):
    from thermoledger.testing import table_entry, write_source

    label, t, cp, formula, geometry = ref("CO2 CoolProp 25 K")
    bad = cp.copy()
    bad[20] *= 1.05
    rows = [[f"{a:.10g}", f"{b:.10g}"] for a, b in zip(t, bad)]
    write_source(tmp_path / "raw", "lab", [dict(table_entry("co2.csv", "CO2", "CO2", "linear"),
                                                header=["T [K]", "Cp [J/(mol*K)]"], rows=rows)])
    result = build.build(tmp_path / "raw", tmp_path / "out")
    (sp,) = result.document["species"]
    assert sp["excluded"] == [{"file": "lab/co2.csv", "line": 22, "code": "SMOOTH-OUTLIER"}]
    assert sp["quality"]["points"] == len(t) - 1
    assert sp["quality"]["cp_max_rel_dev"] < 0.01


@settings(max_examples=60, deadline=None)
@given(st.integers(5, 60), st.floats(60.0, 400.0), st.integers(1, 40),
       st.lists(st.floats(0.0, 3.0), min_size=3, max_size=3), st.floats(-0.5, 0.5),
       st.integers(0, 2 ** 31))
def test_the_coarse_misfit_bounds_the_frozen_vibrations_misfit(n, lo, modes, weights, shift,
                                                               seed):
    """labels._misfit_bound, the problem on every other θ, is never below labels._misfit (to
    round-off at the data's scale), whatever the data: sums of Einstein functions off the θ
    grid, shifted (as Cv under a Cp label is) or not, with noise, on 5 to 60 points (the
    fewest fitted exactly)."""
    from thermoledger.checks import labels
    from thermoledger.physics.statmech import einstein

    t = np.geomspace(lo, labels.LOW_END, n)
    rng = np.random.default_rng(seed)
    theta = rng.uniform(100.0, 5000.0, 3)
    y = (np.asarray(weights)[None, :] * einstein(theta[None, :] / t[:, None])).sum(axis=1)
    y = y + shift + rng.normal(0.0, 0.01, n)
    slack = 1e-9 * np.abs(y).max()                 # round-off, at the data's scale
    assert labels._misfit(t, y, modes) <= labels._misfit_bound(t, y, modes) + slack


@settings(max_examples=60, deadline=None)
@given(st.floats(0.002, 0.2), st.floats(0.2, 0.8), st.floats(0.0, 0.004),
       st.integers(0, 2 ** 31))
def test_the_jump_check_reports_by_its_rule_whatever_its_shortcut(step, where, scatter, seed):
    """check_unlisted_transition passes a table whose every jump is below STEP_MIN without
    the rest of its figures; what it reports is what its rule says of jumps.steps, for jumps
    around STEP_MIN at any place, with scatter (a smooth Cp of a linear molecule, the rows
    above a temperature raised by ``step``)."""
    from thermoledger.checks import jumps
    from thermoledger.core.settings import Settings
    from thermoledger.physics.statmech import einstein

    t = np.geomspace(200.0, 3000.0, 60)
    cp = R * (3.5 + einstein(3000.0 / t) + 2 * einstein(1000.0 / t))
    cp = cp * (1 + np.random.default_rng(seed).normal(0.0, scatter, len(t)))
    cp[int(where * len(t)):] *= 1 + step
    jump, side, apart, _ = jumps.steps(t, cp)
    size = np.abs(jump)
    k = int(size.argmax())
    rule = not (size[k] < max(jumps.STEP_MIN, jumps.STEP_OVER_MEDIAN * np.median(size))
                or side[k] > jumps.SIDE_FIT * size[k] or not apart[k] * jump[k] > 0.5 * jump[k] ** 2)
    found = jumps.check_unlisted_transition(make_table(t, cp, "CO2", "linear"), Settings())
    assert [f.code for f in found] == (["TRS-UNLISTED"] if rule else [])


@settings(max_examples=80, deadline=None)
@given(st.sampled_from(["N2", "CO2", "CH4", "H2", "SF6"]), st.floats(0.0, 0.05),
       st.sampled_from([1.0, 4.184, 1000.0, 8.314462618, 1.02, 0.5]), st.integers(0, 2 ** 31))
def test_the_unit_block_check_passes_early_only_where_no_step_is_near_a_factor(
        formula, scatter, factor, seed):
    """check_unit_blocks passes a table at once when even its largest step in ln Cp, plus the
    tolerance, stays below the smallest factor's logarithm: then no step is within the
    tolerance of any factor, and the check finds nothing, as its full comparison would."""
    from thermoledger.checks import physical
    from thermoledger.checks.smooth_model import median
    from thermoledger.core.settings import Settings

    rng = np.random.default_rng(seed)
    t = np.geomspace(200.0, 3000.0, 50)
    cp = R * 4.5 * (1 + t / 3000.0) * (1 + rng.normal(0.0, scatter, len(t)))
    cp[15:25] *= factor
    table = make_table(t, cp, formula, "linear")
    found = physical.check_unit_blocks(table, Settings())
    size = np.abs(np.diff(np.log(table.valid["Cp"])))
    tol = Settings().checks.factor_tolerance + 2.0 * median(size)
    logs = np.log([f for _, f, _ in physical.factor_candidates(table.meta.molar_mass) if f > 1])
    near = bool((np.abs(size[:, None] - logs[None, :]) < tol).any())
    if physical._no_step_near(size, tol, logs):
        assert not near and found == []
