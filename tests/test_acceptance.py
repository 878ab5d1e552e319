"""The acceptance rule (fit/acceptance.py): honest tables pass at the stated false-rejection
rate, genuine misfits are rejected, and the library records which rule passed and its
statistics.

Reference: CoolProp's ideal-gas Cp of nitrogen (R. Span et al., J. Phys. Chem. Ref. Data 29,
1361 (2000)), methane (U. Setzmann & W. Wagner, J. Phys. Chem. Ref. Data 20, 1061 (1991))
and propane (E. W. Lemmon et al., J. Chem. Eng. Data 54, 3141 (2009)); honest tables carry
normal noise equal to their stated u(Cp). benchmarks/acceptance.py measures the rates over
five fluids and 1500 tables.
"""

from dataclasses import replace

import numpy as np
import pytest
from scipy.stats import norm
from thermoledger.core.errors import FitRejected
from thermoledger.core.settings import FitSettings
from thermoledger.fit import acceptance
from thermoledger.testing import coverage, fit_arrays

pytest.importorskip("CoolProp.CoolProp")


@pytest.fixture(scope="module")
def refs():
    return {f: coverage.reference(f, 2.0) for f in ("Nitrogen", "Methane", "Propane")}


def test_the_point_bound_is_sidak_corrected():
    # n honest points all inside the bound with probability 1 - alpha
    for n in (10, 74, 500):
        z = acceptance.point_bound(n, 0.001)
        assert (1 - 2 * norm.sf(z)) ** n == pytest.approx(0.999, rel=1e-9)
    assert acceptance.point_bound(500, 0.001) > acceptance.point_bound(10, 0.001)


@pytest.mark.parametrize("u", [0.003, 0.005, 0.01])
def test_honest_tables_are_rarely_rejected(refs, u):
    # 20 tables per fluid and u: at 0.2 % expected rejections, more than one in 60 would
    # happen with probability below 1 %
    rejected = 0
    for k, ref in enumerate(refs.values()):
        for seed in range(20):
            try:
                coverage.fit_fluid(ref, noise=u, seed=10_000 * k + seed)
            except FitRejected:
                rejected += 1
    assert rejected <= 1


def misfit(ref, kind, rng):
    t = coverage.data_grid()
    cp = ref.at(t)[0]
    u = 0.003 * cp
    y = cp * (1 + 0.003 * rng.standard_normal(len(t)))
    settings = FitSettings()
    if kind == "one range":
        y = cp * (1 + 0.001 * rng.standard_normal(len(t)))
        u = 0.001 * cp
        settings = replace(settings, ranges=1)
    elif kind == "defect":
        y[len(t) // 3] *= 1.05
    elif kind == "block":
        y[20:30] *= 1.03
    elif kind == "understated":
        y = cp * (1 + 0.01 * rng.standard_normal(len(t)))
    return t, y, u, settings


@pytest.mark.parametrize("kind", ["one range", "defect", "block", "understated"])
def test_genuine_misfits_are_rejected(refs, kind):
    rng = np.random.default_rng(11)
    for name, ref in refs.items():
        t, y, u, settings = misfit(ref, kind, rng)
        with pytest.raises(FitRejected):
            fit_arrays(name, t, y, u, 0.0, 200.0, settings)


def test_the_library_records_the_rule_and_its_statistics(refs):
    ref = refs["Nitrogen"]
    stated = coverage.fit_fluid(ref, noise=0.005, seed=3)
    rec = stated.acceptance
    assert rec["rule"] == "stated-u" and rec["alpha"] == 0.001
    assert rec["p_value"] >= 0.001 and rec["max_z"] <= rec["z_bound"]
    assert rec["dof"] == stated.points - (len(stated.breakpoints) + 1) * 5 + 2 * len(
        stated.breakpoints)
    plain = coverage.fit_fluid(ref)
    assert plain.acceptance["rule"] == "threshold"
    assert plain.acceptance["max_rel_dev"] == pytest.approx(plain.cp_max_rel_dev)


def test_without_a_stated_u_a_point_beyond_the_threshold_rejects(refs):
    t = coverage.data_grid()
    cp = refs["Nitrogen"].at(t)[0]
    cp[30] *= 1.02
    with pytest.raises(FitRejected, match="> 1 %"):
        fit_arrays("N2", t, cp, None, 0.0, 191.609)
