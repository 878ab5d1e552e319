"""The batched path of the fitting stage (fit/batched.py, breakchoice.choose_many,
lsq.batch_objectives): species that share their temperatures have their breakpoints searched
together, and every one of them gets the fit the per-species path gives it.

The species are those of the benchmarks (thermoledger.testing.catalogue: SYNTHETIC
rigid-rotor/harmonic-oscillator tables). They are no check values: the per-species path
is the reference here, and the issue's bound is 1e-9 relative on breakpoints and
coefficients."""

import json

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from thermoledger import build, fit
from thermoledger.core.records import CpData, SpeciesIdentity
from thermoledger.core.settings import FitSettings, OutputSettings, Settings, for_table
from thermoledger.fit import batched, breakchoice, phases
from thermoledger.physics import forms
from thermoledger.testing.catalogue import write_catalogue

from .conftest import tree_hashes

NO_REPORT = Settings(outputs=OutputSettings(report=False))
NASA7 = forms.FORMS["nasa7"]
GRID = np.unique(np.append(np.geomspace(200.0, 3000.0, 99), 298.15))


def _items(raw, ctx=NO_REPORT):
    """(species id, who, data, settings, None) of every selection of ``raw``."""
    checked = build.examine_part(raw, ctx)
    return [(s.species_id, SpeciesIdentity.of_table(s.primary.meta), CpData.of_rows(s.data),
             for_table(ctx.fit, s.primary.meta.fit_overrides), None)
            for s in checked.selections]


def _relative(a, b) -> float:
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    return float(np.max(np.abs(a - b) / np.maximum(np.abs(b), 1e-300)))


def test_every_benchmark_species_gets_its_per_species_fit(tmp_path, monkeypatch):
    write_catalogue(tmp_path, 40)
    items = _items(tmp_path)
    monkeypatch.setattr(batched, "CHUNK", 16)              # three chunks, the last short
    chosen = batched.choices(items)
    assert sorted(chosen) == sorted(i[0] for i in items)
    assert all(set(chosen[sid][1]) == {"all"} for sid in chosen)  # one grid: all batched
    _same_fits(items, chosen)


def _same_fits(items, chosen):
    """Every species of ``items`` fitted with its batched search as alone: the same
    breakpoints, coefficients within 1e-9 relative, the same choice, notes and
    extrapolation."""
    for sid, who, data, fs, _ in items:
        alone = fit.fit_species(who, data, fs)
        prepared, roles = chosen[sid]
        together = fit.fit_species(who, data, fs, None, roles, prepared)
        assert together.breakpoints == alone.breakpoints
        for a, b in zip(together.ranges, alone.ranges):
            assert (a.t_min, a.t_max) == (b.t_min, b.t_max)
            assert _relative(a.coefficients, b.coefficients) <= 1e-9
        assert together.breakpoint_choice == alone.breakpoint_choice
        assert together.notes == alone.notes
        assert together.extrapolated == alone.extrapolated


def _same(got, want):
    if isinstance(want, ValueError):
        assert isinstance(got, ValueError) and str(got) == str(want)
    else:
        assert (list(got[0]), list(got[1]), got[2]) == (list(want[0]), list(want[1]), want[2])


def _tables(count, seed=5, t=GRID):
    rng = np.random.default_rng(seed)
    ys = np.array([3.5 + rng.uniform(0.5, 3) * (1 - np.exp(-t / rng.uniform(400, 1500)))
                   + 1e-3 * rng.standard_normal(t.size) for _ in range(count)])
    return ys, 2e-3 * ys


@pytest.mark.parametrize("fs", [
    FitSettings(),
    FitSettings(breakpoint_norm="max"),
    FitSettings(breakpoint_mode="conventional"),
    FitSettings(breakpoint_mode="conventional", breakpoint=5000.0),   # not straddled: searched
    FitSettings(ranges=3),                                            # searched one by one
    FitSettings(ranges=1),
    FitSettings(breakpoint_mode="fixed", fixed_breakpoints=(900.0,)),
    FitSettings(breakpoint_mode="fixed", fixed_breakpoints=(210.0,)),  # too narrow: ValueError
    FitSettings(min_points_per_range=60),                             # one range only
    FitSettings(breakpoint_min=2900.0),                               # no candidate left
])
def test_choose_many_is_choose_of_each_table(fs):
    ys, sig = _tables(6)
    previous = [None, (1000.0,), (700.0,), (150.0,), (800.0, 1500.0), None]
    many = breakchoice.choose_many(GRID, ys, sig, NASA7, fs, previous)
    for y, s, prev, got in zip(ys, sig, previous, many):
        try:
            want = breakchoice.choose(GRID, y, s, NASA7, fs, prev)
        except ValueError as exc:
            want = exc
        _same(got, want)


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 2 ** 31), count=st.integers(1, 5), points=st.integers(14, 60),
       top=st.floats(900.0, 6000.0))
def test_choose_many_agrees_with_choose_on_any_tables(seed, count, points, top):
    t = np.geomspace(200.0, top, points)
    ys, sig = _tables(count, seed, t)
    for y, s, got in zip(ys, sig, breakchoice.choose_many(t, ys, sig, NASA7, FitSettings(),
                                                          [None] * count)):
        try:
            want = breakchoice.choose(t, y, s, NASA7, FitSettings())
        except ValueError as exc:
            want = exc
        _same(got, want)


def _mixed_raw(raw):
    """The catalogue, with a table of three ranges, one of a range of use past its data, one
    with an outlier, and a species in two sources: (the three species of the first, third
    and fourth, the species of the second)."""
    write_catalogue(raw, 24)
    doc_path = raw / "bench-0" / "source.json"
    doc = json.loads(doc_path.read_text())
    doc["tables"][0]["fit"] = {"ranges": 3}
    doc["tables"][1]["fit"] = {"use_t_max": 5000}
    doc_path.write_text(json.dumps(doc))
    bad = raw / "bench-1" / doc_path.name
    doc = json.loads(bad.read_text())
    lines = (raw / "bench-1" / doc["tables"][0]["file"]).read_text().splitlines()
    t, cp = lines[40].split(",")
    lines[40] = f"{t},{float(cp) * 1.05:.6f}"
    (raw / "bench-1" / doc["tables"][0]["file"]).write_text("\n".join(lines) + "\n")
    again = raw / "again"
    again.mkdir()
    first = json.loads((raw / "bench-2" / "source.json").read_text())["tables"][0]
    rows = (raw / "bench-2" / first["file"]).read_text().splitlines()
    (again / first["file"]).write_text("\n".join(rows[:1] + rows[1::3]) + "\n")
    (again / "source.json").write_text(json.dumps({
        "source": "again", "title": "every third row", "citation": "synthetic",
        "method": "estimation", "standard_pressure": "1 bar", "priority": 9,
        "license": "CC0-1.0", "notes": "SYNTHETIC", "tables": [first]}))
    return {doc["tables"][0]["species"] for doc in map(json.loads, (
        (raw / f"bench-{k}" / "source.json").read_text() for k in range(3)))}, \
        json.loads(doc_path.read_text())["tables"][1]["species"]


def test_a_build_takes_both_paths_and_gives_the_per_species_release(tmp_path, monkeypatch):
    alone, wide = _mixed_raw(tmp_path / "raw")
    served = {}
    real = batched.choices

    def spy(items):
        got = real(items)
        served.update((k, set(v[1])) for k, v in got.items())
        return got
    monkeypatch.setattr(batched, "choices", spy)
    both = build.build(tmp_path / "raw", tmp_path / "both", NO_REPORT)
    monkeypatch.setattr(batched, "choices", lambda items: {})
    build.build(tmp_path / "raw", tmp_path / "single", NO_REPORT)
    assert tree_hashes(tmp_path / "both") == tree_hashes(tmp_path / "single")
    assert len(both.fitted) == 24
    own = {f"{s}(g)": set() for s in alone | {wide}}      # own settings, rows or sources
    assert {k: v for k, v in served.items() if k in own} == own
    assert all(v == {"all"} for k, v in served.items() if k not in own)
    assert len(served) == 24


def test_a_batched_call_that_raises_leaves_its_species_to_the_per_species_path(
        tmp_path, monkeypatch):
    write_catalogue(tmp_path, 6)
    items = _items(tmp_path)

    def broken(*args):
        raise FloatingPointError("planted")
    monkeypatch.setattr(breakchoice, "choose_many", broken)
    assert all(roles == {} for _, roles in batched.choices(items).values())
    order = phases.fitting_order(build.examine_part(tmp_path, NO_REPORT).selections, ())
    assert all(roles == {} for *_, roles in
               build.batch_searched(order, NO_REPORT, {}, {}).values())
    assert len(build.build(tmp_path, None, NO_REPORT, write=False).fitted) == 6


def test_species_extrapolated_alike_share_both_their_searches(tmp_path):
    """A range of use past the data makes two searches (with the extension's rows, and of
    the data alone for beyond.protect_data); species of the same temperatures and range of
    use batch both, and get their per-species fits and extensions."""
    write_catalogue(tmp_path, 6)
    wide = FitSettings(use_t_max=6000.0)
    items = [(k, w, d, wide, p) for k, w, d, _, p in _items(tmp_path)]
    chosen = batched.choices(items)
    assert all(set(roles) == {"all", "data"} for _, roles in chosen.values())
    _same_fits(items, chosen)
    lonely = batched.choices(items[:1])
    assert list(lonely) == [items[0][0]] and lonely[items[0][0]][1] == {}


def test_a_species_that_raises_before_its_search_leaves_the_others(tmp_path, monkeypatch):
    """An unexpected exception while a species is readied for the batched path (its
    settings, its data, its preparation) is left to the per-species path: a species whose
    settings failed once is fitted there, and one whose preparation fails again gets it as
    its finding; the others are fitted."""
    write_catalogue(tmp_path, 5)
    real_settings, real_prepare = build.for_table, fit.species.prepare

    def settings_of(fs, overrides):
        if calls.append(1) or len(calls) == 1:
            raise KeyError("planted")
        return real_settings(fs, overrides)

    def prepare(who, data, fs):
        if who.species_id == "s000003(g)":
            raise ZeroDivisionError("planted")
        return real_prepare(who, data, fs)
    calls = []
    monkeypatch.setattr(build, "for_table", settings_of)
    monkeypatch.setattr(fit.species, "prepare", prepare)
    result = build.build(tmp_path, None, NO_REPORT, write=False)
    failed = {f.file: f.message for f in result.findings if f.code == "STAGE-FAILED"}
    assert len(calls) > 5                      # the first species' settings were asked again
    assert len(result.fitted) == 4 and len(failed) == 1
    assert "ZeroDivisionError" in failed.popitem()[1]
