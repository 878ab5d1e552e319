"""A sample of the fuzz benchmark (benchmarks/fuzz_inputs.py runs 12 000 cases): every
fuzzed input is answered by findings that name its file, never by an exception or a hang."""

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from thermoledger.testing import fuzzcases

SAMPLE = list(fuzzcases.cases(160, seed=11))


@pytest.mark.parametrize("case", SAMPLE, ids=[f"{c[0]}-{c[1]}" for c in SAMPLE])
def test_fuzzed_input_is_answered(case):
    i, kind, table, meta = case
    result = fuzzcases.answer(kind, table, meta, limit=60,
                              publish=i % fuzzcases.PUBLISH_EVERY == 0)
    assert result["outcome"] == "answered", result


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.text(max_size=40), st.text(max_size=40))
def test_random_header_units_are_answered(t_unit, cp_unit):
    table = fuzzcases.good_table().replace("T [K]", f"T [{t_unit}]", 1).replace(
        "Cp [J/(mol*K)]", f"Cp [{cp_unit}]", 1)
    result = fuzzcases.answer("unit strings", table.encode("utf-8", "surrogatepass"), None,
                              limit=60)
    assert result["outcome"] == "answered", result


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.sampled_from(["enthalpy_of_formation_298", "entropy_298"]), st.text(max_size=30))
def test_random_quantities_are_answered(field, text):
    import json

    doc = json.loads(json.dumps(fuzzcases.SOURCE))
    doc["tables"][0][field] = text
    result = fuzzcases.answer("source.json", fuzzcases.good_table().encode(),
                              json.dumps(doc).encode(), limit=60)
    assert result["outcome"] == "answered", result
