"""H and S are anchored at 298.15 K only inside the data or inside an interval the build
extends on purpose and flags; otherwise the table is held back with what to supply.

Reference: CoolProp's ideal-gas Cp of nitrogen (R. Span et al., J. Phys. Chem. Ref. Data 29,
1361 (2000)) and of para-hydrogen (J. W. Leachman et al., J. Phys. Chem. Ref. Data 38, 721
(2009)). The liquid and crystal tables are inputs only (their values are never checked):
liquid N2 about 56 J/(mol K) at 65-115 K, ice about 35-38 J/(mol K) below 273.15 K, both
from memory.
"""

import json

import numpy as np
import pytest
from thermoledger.core.errors import FitError
from thermoledger.library.document import evaluate_entry
from thermoledger.testing import coverage, fit_arrays, table_entry, write_source

from .conftest import run_cli as run

CP = pytest.importorskip("CoolProp.CoolProp")


def build_n2(tmp_path, capsys, t):
    """The nitrogen reference at ``t`` [K] built alone: its one library entry."""
    entry = table_entry("n2.csv", "N2", "N2", "linear", s="191.609 J/(mol*K)")
    _, _, lib = build_one(tmp_path, capsys, entry, t, coverage.cp0("Nitrogen", t))
    (sp,) = lib["species"]
    return sp


def build_one(tmp_path, capsys, entry, t, cp):
    rows = [[f"{a:.6g}", f"{b:.6g}"] for a, b in zip(t, cp)]
    write_source(tmp_path / "raw", "lab", [dict(entry, header=["T [K]", "Cp [J/(mol*K)]"],
                                                rows=rows)])
    code, out, _ = run(capsys, "build", "--raw", tmp_path / "raw", "--out", tmp_path / "out",
                       "--no-report", "--quiet")
    return code, out, json.loads((tmp_path / "out" / "library.json").read_text())


@pytest.mark.parametrize("phase, t, cp, said", [
    ("l", np.linspace(65.0, 115.0, 21), np.linspace(55.6, 58.6, 21), "only below 298.15 K"),
    ("cr", np.linspace(200.0, 273.15, 21), np.linspace(34.7, 38.1, 21), "only below 298.15 K"),
    ("l", np.linspace(933.5, 2000.0, 21), np.full(21, 31.75), "only above 298.15 K"),
])
def test_a_condensed_phase_away_from_298_is_held_back_with_the_reason(tmp_path, capsys, phase,
                                                                    t, cp, said):
    entry = table_entry("x.csv", "X", "N2", None, phase=phase)
    entry.pop("geometry")
    code, out, lib = build_one(tmp_path, capsys, entry, t, cp)
    assert lib["species"] == []
    (q,) = lib["quarantined"]
    codes = {f["code"] for f in q["reasons"]}
    assert "ANCHOR-OUT-OF-REACH" in codes
    text = " ".join(f["message"] for f in q["reasons"])
    assert said in text and "transitions" in text


def test_the_fit_stage_alone_refuses_to_anchor_a_condensed_phase_outside_its_data():
    with pytest.raises(FitError, match="anchored through its transitions"):
        fit_arrays("X", np.linspace(65.0, 115.0, 21), np.linspace(55.6, 58.6, 21), None,
                   0.0, 100.0, phase="l")


def test_a_gas_that_ends_below_298_is_carried_there_by_its_model_and_flagged(tmp_path, capsys):
    sp = build_n2(tmp_path, capsys, np.linspace(100.0, 250.0, 31))
    assert sp["ranges"][-1]["t_max"] == 298.15
    (ext,) = sp["extrapolated"]
    assert (ext["t_min"], ext["t_max"]) == (250.0, 298.15) and ext["model"] != "polynomial"
    codes = {f["code"] for f in sp["findings"]}
    assert {"RANGE-EXTENDED", "FIT-EXTRAPOLATED"} <= codes
    ev = evaluate_entry(sp, [298.15])
    assert ev["extrapolated"][0]
    # within twice the stated uncertainty of the reference at the anchor
    assert abs(ev["Cp"][0] - coverage.cp0("Nitrogen", [298.15])[0]) <= 2 * ev["u_Cp"][0]


def test_para_hydrogen_below_200_k_is_never_exported_with_an_invented_anchor(tmp_path,
                                                                              capsys):
    t = np.linspace(30.0, 200.0, 40)
    cp = coverage.cp0("ParaHydrogen", t)
    _, _, lib = build_one(tmp_path, capsys, table_entry("h2.csv", "H2", "H2", "linear",
                                                        s="130.68 J/(mol*K)"), t, cp)
    if lib["species"]:
        (sp,) = lib["species"]
        ev = evaluate_entry(sp, [298.15])
        assert ev["extrapolated"][0]
        assert abs(ev["Cp"][0] - coverage.cp0("ParaHydrogen", [298.15])[0]) <= 2 * ev["u_Cp"][0]
    else:
        (q,) = lib["quarantined"]
        assert {f["code"] for f in q["reasons"]} & {"FIT-REJECTED", "ANCHOR-OUT-OF-REACH"}


def test_data_starting_just_above_298_are_stretched_and_marked_extrapolated(tmp_path, capsys):
    sp = build_n2(tmp_path, capsys, np.linspace(320.0, 1500.0, 40))
    assert sp["ranges"][0]["t_min"] == 298.15
    assert sp["extrapolated"][0]["t_min"] == 298.15 and sp["extrapolated"][0]["t_max"] == 320.0
    assert "RANGE-EXTENDED" in {f["code"] for f in sp["findings"]}
