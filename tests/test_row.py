"""The result row: one definition (record/row.py), one builder, and the JSON Schema agrees with it."""

from __future__ import annotations

import typing

import numpy as np
import pytest
from meanband.record import row as row_module
from meanband.record.row import OPTIONAL_ROW_KEYS, ROW_KEYS, ResultRow, build_row
from meanband.stats.bands import make_band
from meanband.stats.decision import decide
from meanband.store.report_json import schema

# Each TypedDict of the row and the $defs entry of report.schema.json that declares the same object.
PAIRS = {
    "row": row_module.ResultRow,
    "decision": row_module.DecisionRecord,
    "band": row_module.BandRecord,
    "interval": row_module.IntervalRecord,
    "note": row_module.NoteRecord,
    "settings": row_module.SettingsRecord,
    "timing": row_module.TimingRecord,
    "uncertainty": row_module.UncertaintyRecord,
    "rule": row_module.RuleRecord,
    "two_stage": row_module.TwoStageRecord,
    "comparison": row_module.ComparisonRecord,
    "baseline": row_module.BaselineRecord,
    "suggestion": row_module.SuggestionRecord,
    "pooled": row_module.PooledRecord,
    "instrument": row_module.InstrumentRecord,
    "sequential": row_module.SequentialRecord,
}


@pytest.mark.parametrize("name", sorted(PAIRS))
def test_schema_declares_exactly_the_keys_of_the_definition(name: str) -> None:
    definition = PAIRS[name]
    declared = schema()["$defs"][name]
    assert set(declared["properties"]) == set(typing.get_type_hints(definition)), name
    required = set(declared.get("required", ()))
    if name == "row":
        required.discard("run")  # a report tags each row with its run; a live row has none yet
    assert required == set(definition.__required_keys__), name


def test_every_row_key_is_either_core_or_optional() -> None:
    assert ROW_KEYS | OPTIONAL_ROW_KEYS == set(ResultRow.__annotations__)
    assert not ROW_KEYS & OPTIONAL_ROW_KEYS
    assert "run" in OPTIONAL_ROW_KEYS and "values" in ROW_KEYS


def _decision(**kwargs):
    x = np.random.default_rng(4).normal(12.0, 0.01, 20)
    return decide(x, make_band(11.9, 12.1, unit="V"), **kwargs), x


def test_decision_to_dict_holds_its_uncertainty_rule_and_power() -> None:
    # Before: to_dict() left out the uncertainty and the rule, so two places bolted them on.
    decision, _ = _decision(instrument_uncertainty=0.002, power=0.8)
    full = decision.to_dict()
    assert full["uncertainty"] == decision.uncertainty.to_dict()
    assert full["rule"] == decision.rule.to_dict()
    assert full["power"] == 0.8


def test_build_row_puts_uncertainty_and_rule_under_their_own_keys() -> None:
    decision, x = _decision(instrument_uncertainty=0.002)
    row = build_row(nodeid="t.py::a", series="", unit="V", source="values", values=x,
                    decision=decision, settings={"confidence": 0.95, "method": "t"})
    assert row["kind"] == "check" and set(row) == ROW_KEYS | {"uncertainty", "rule"}
    assert "uncertainty" not in row["decision"] and "rule" not in row["decision"]
    assert row["uncertainty"]["type_b"] == 0.002 and row["rule"]["rule"] == "guarded"
    assert all(type(v) is float for v in row["values"])  # builtin floats: xdist-safe


def test_build_row_without_a_decision_is_an_unchecked_series() -> None:
    row = build_row(nodeid="t.py::a", series="cold", unit=None, source="values",
                    values=np.arange(3.0))
    assert row["kind"] == "unchecked" and row["decision"] is None and row["values"] == [0.0, 1.0, 2.0]


def test_build_row_refuses_a_key_the_definition_does_not_declare() -> None:
    with pytest.raises(TypeError, match=r"unknown result-row key.*flavour"):
        build_row(nodeid="t.py::a", series="", unit=None, source=None, values=[1.0, 2.0],
                  flavour="vanilla")
