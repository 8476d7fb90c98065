"""Operands of monitor commands: every hostile value is refused with a named reason."""

from __future__ import annotations

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from emulator.monitor import operands as op


@pytest.mark.parametrize("value", [math.inf, -math.inf, math.nan, 2**64, -(2**70), "5",
                                   None, True, [1], {"a": 1}, b"1", 1e308])
def test_hostile_numbers_are_refused(value) -> None:
    with pytest.raises(op.OperandError, match="frames"):
        op.integer({"frames": value} if value is not None else {}, "frames", 1, 100_000)


@pytest.mark.parametrize("value", [math.inf, math.nan, 2**64, "0.5", True, 1.5, -1.5])
def test_hostile_efforts_are_refused(value) -> None:
    with pytest.raises(op.OperandError, match="effort"):
        op.number({"effort": value}, "effort", -1.0, 1.0)


def test_good_operands_pass() -> None:
    assert op.integer({"frames": 5}, "frames", 1, 10) == 5
    assert op.integer({"frames": 5.0}, "frames", 1, 10) == 5  # a float without a fraction
    assert op.integer({}, "frames", 1, 10, default=1) == 1
    assert op.number({"effort": -1}, "effort", -1.0, 1.0) == -1.0
    assert op.flag({"stop": True}, "stop") and not op.flag({}, "stop")
    assert op.numbers_map({"params": {"gain": 2}}, "params") == {"gain": 2.0}


@pytest.mark.parametrize("name", ["../x", "/etc/passwd", "a/b", ".hidden", "..", "x" * 65,
                                  "a\x00b", "", 7, ["a"], "sub\\..\\x", "ok..rrec"])
def test_recording_names_are_bare_file_names(name) -> None:
    with pytest.raises(op.OperandError, match="bare file name"):
        op.recording_name({"name": name}, "name")


def test_recording_name_gets_its_suffix() -> None:
    assert op.recording_name({"name": "dip-test_2"}, "name") == "dip-test_2.rrec"
    assert op.recording_name({"name": "a.rrec"}, "name") == "a.rrec"
    assert op.recording_name({}, "name") is None


def test_texts_and_maps_have_bounds() -> None:
    with pytest.raises(op.OperandError, match="longer"):
        op.text({"fault": "x" * 10_000}, "fault")
    with pytest.raises(op.OperandError, match="text"):
        op.text({"fault": 3}, "fault")
    with pytest.raises(op.OperandError, match="params"):
        op.numbers_map({"params": {str(i): 1 for i in range(100)}}, "params")
    with pytest.raises(op.OperandError, match="gain"):
        op.numbers_map({"params": {"gain": math.nan}}, "params")
    with pytest.raises(op.OperandError, match="stop"):
        op.flag({"stop": "yes"}, "stop")


@given(st.one_of(st.none(), st.booleans(), st.integers(), st.floats(), st.text(),
                 st.binary(), st.lists(st.integers()), st.dictionaries(st.text(), st.floats())))
def test_any_value_gives_a_number_in_range_or_an_operand_error(value) -> None:
    try:
        x = op.number({"v": value}, "v", -5.0, 5.0)
    except op.OperandError:
        return
    assert math.isfinite(x) and -5.0 <= x <= 5.0
