"""The frozen slotted records pickle to equal objects, every field kept (core/slotstate.py):
a build's stored partitions and its workers' results carry them by the ten thousand."""

import copy
import pickle
from dataclasses import fields

import pytest
from thermoledger.core.findings import Finding
from thermoledger.core.records import InputFile, SourceMeta, TableMeta

SRC = SourceMeta(id="src", folder="s", title="t", citation="c", method="computed",
                 license="CC0-1.0", priority=1, standard_pressure=1e5, sha256="0" * 64)


def _samples():
    meta = TableMeta(source=SRC, file="s/x.csv", species="X", formula="N2", phase="g",
                     geometry="linear", molar_mass=28.0134, atoms=2,
                     enthalpy_of_formation_298=0.0, entropy_298=191.61, sha256="a" * 64,
                     size=123, columns=("T", "Cp"))
    return [meta, InputFile(path="s/x.csv", sha256="b" * 64, size=9),
            Finding(code="FIT-REJECTED", severity="error", message="m", source="src",
                    file="s/x.csv", line=4, column="Cp", seen="1", expected="2", fix="f",
                    lines=(4, 5), acknowledged="why", extra={"t": [1.0, 2.0]})]


@pytest.mark.parametrize("obj", _samples(), ids=lambda o: type(o).__name__)
def test_a_record_survives_pickling_and_copying_field_by_field(obj):
    for again in (pickle.loads(pickle.dumps(obj, protocol=pickle.HIGHEST_PROTOCOL)),
                  pickle.loads(pickle.dumps(obj, protocol=2)), copy.copy(obj),
                  copy.deepcopy(obj)):
        assert type(again) is type(obj) and again == obj
        # every field, those left out of == (a finding's extra) too
        assert [getattr(again, f.name) for f in fields(obj)] == \
            [getattr(obj, f.name) for f in fields(obj)]


def test_a_record_stays_frozen_after_unpickling():
    again = pickle.loads(pickle.dumps(_samples()[1]))
    with pytest.raises(AttributeError):
        again.size = 1
