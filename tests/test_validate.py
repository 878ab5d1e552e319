"""Structural checks on clean tables: each defect gives its code and row."""

import numpy as np
from thermoledger.checks import registry as validate
from thermoledger.core.records import SourceMeta, Table, TableMeta
from thermoledger.core.rows import Rows
from thermoledger.core.settings import Settings

SRC = SourceMeta(id="s", folder="s", title="t", citation="c", method="other", license="l",
                 priority=1, standard_pressure=1e5, sha256="0" * 64)


def table(t, cp, u=None):
    n = len(t)
    data = Rows({"line": np.arange(2, n + 2), "T": np.asarray(t, float),
                 "Cp": np.asarray(cp, float),
                 "u_Cp": np.full(n, np.nan) if u is None else np.asarray(u, float),
                 "dH": np.full(n, np.nan), "S": np.full(n, np.nan),
                 "u_dH": np.full(n, np.nan), "u_S": np.full(n, np.nan),
                 "gef": np.full(n, np.nan)})
    meta = TableMeta(source=SRC, file="s/x.csv", species="X", formula="N2", phase="g",
                     geometry="linear", molar_mass=28.0, atoms=2, enthalpy_of_formation_298=0.0,
                     entropy_298=190.0, sha256="0" * 64, size=1)
    return Table(meta=meta, data=data)


T = list(range(200, 1400, 100))
CP = [29.0 + 0.003 * x for x in T]


def found(tab):
    return [(f.code, f.line) for f in validate.validate([tab])]


def test_clean_table_has_no_findings():
    assert found(table(T, CP)) == []


def test_non_positive_temperature_and_cp():
    t = list(T)
    t[3] = -5.0
    cp = list(CP)
    cp[5] = 0.0
    assert found(table(t, cp)) == [("T-NOT-POSITIVE", 5), ("CP-NOT-POSITIVE", 7)]


def test_duplicate_temperature_names_the_second_line():
    t = list(T)
    t[4] = t[3]
    (f,) = validate.validate([table(t, CP)])
    assert (f.code, f.line) == ("T-DUPLICATE", 6)
    assert "repeats line 5" in f.message


def test_too_few_points():
    assert found(table(T[:4], CP[:4])) == [("TOO-FEW-POINTS", None)]


def test_anchor_reach():
    s = Settings()
    far = [x + 200 for x in T]
    assert [f.code for f in validate.validate([table(far, CP)], s)] == ["ANCHOR-OUT-OF-REACH"]
    near = [x + 150 for x in T]  # data from 350 K: stretched to 298.15 K with a warning
    assert [f.code for f in validate.validate([table(near, CP)], s)] == ["RANGE-EXTENDED"]


def test_non_positive_uncertainty():
    u = [0.1] * len(T)
    u[2] = 0.0
    assert found(table(T, CP, u)) == [("UCP-NOT-POSITIVE", 4)]
