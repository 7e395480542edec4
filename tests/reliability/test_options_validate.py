"""The reusable checks of roomconv.validate, against closed forms and IEEE 754 values.

Sizes: samples × channels × 8 bytes (float64), 1 GiB = 2^30 bytes (IEC 80000-13 binary
prefixes, from memory). Non-finite values are those for which ``math.isfinite`` is false (IEEE 754).
"""

from __future__ import annotations

import math

import pytest

from roomconv import validate
from roomconv.errors import InputError


@pytest.mark.parametrize("value", [math.nan, math.inf, -math.inf, "nan", "-inf", "Infinity"])
def test_finite_refuses_every_non_finite_spelling(value):
    with pytest.raises(InputError, match="not a finite number"):
        validate.finite(value, "output gain")


def test_messages_name_the_meaning_not_an_option():
    with pytest.raises(InputError) as exc:
        validate.in_range(2.0, "wet/dry mix", 0.0, 1.0)
    assert "wet/dry mix" in str(exc.value) and "--" not in str(exc.value)
    assert "0 to 1" in str(exc.value)


def test_ranges_and_counts():
    assert validate.in_range("0.5", "x", 0.0, 1.0) == 0.5
    with pytest.raises(InputError):
        validate.in_range(0.0, "x", 0.0, 1.0, lo_open=True)
    assert validate.count("1e3", "n", 1) == 1000
    for bad in ("2.5", "0", "-1", "x"):
        with pytest.raises(InputError):
            validate.count(bad, "n", 1)
    with pytest.raises(InputError, match="must be positive"):
        validate.positive(-5, "room side")
    with pytest.raises(InputError, match="must not be negative"):
        validate.non_negative(-1e-9, "fade-in")


@pytest.mark.parametrize(
    "rate, ok",
    [
        (0, False),
        (1, False),
        (7999, False),
        (8000, True),
        (48000, True),
        (384000, True),
        (384001, False),
    ],
)
def test_sample_rate_bounds(rate, ok):
    if ok:
        assert validate.sample_rate(rate) == rate
    else:
        with pytest.raises(InputError):
            validate.sample_rate(rate)


def test_memory_budget_arithmetic():
    # 1e6 s at 48 kHz, one channel, float64: 1e6·48000·8 B = 3.84e11 B = 357.63 GiB.
    with pytest.raises(InputError, match="358 GiB"):
        validate.seconds_budget(1e6, 48000, "pre-delay")
    # 60 s of stereo at 48 kHz: 60·48000·2·8 B = 46 MB, well inside the budget.
    assert validate.seconds_budget(60, 48000, "x", channels=2) == 60 * 48000
    # Exactly at the budget passes, one sample more does not.
    n = validate.MEMORY_BUDGET_BYTES // 8
    assert validate.memory_budget(n, "x") == n
    with pytest.raises(InputError):
        validate.memory_budget(n + 1, "x")
    with pytest.raises(InputError):
        validate.memory_budget(math.inf, "x")


@pytest.mark.parametrize("text, expected", [("1", (1,)), ("1,2", (1, 2)), (" 3 , 4 ", (3, 4))])
def test_channel_lists(text, expected):
    assert validate.channel_list(text, "inputs") == expected


@pytest.mark.parametrize("text", ["a,b", "1,,2", "0", "1,1", "", "1.5", "257"])
def test_bad_channel_lists(text):
    with pytest.raises(InputError):
        validate.channel_list(text, "inputs")


def test_human_bytes():
    assert validate.human_bytes(3 * 1024**3) == "3 GiB"
    assert validate.human_bytes(512) == "512 bytes"
