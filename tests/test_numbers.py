"""labbench.numbers: the one way labbench writes a number (CLI, report, window)."""

from __future__ import annotations

import decimal
import math

import numpy as np
import pytest

from labbench.numbers import duration, number, percent, setting, tick


def _reference(x: float, digits: int = 4) -> decimal.Decimal:
    # reference: Python's decimal module (the General Decimal Arithmetic specification): the float's
    # exact binary value rounded half-even to `digits` significant digits
    return decimal.Context(prec=digits, rounding=decimal.ROUND_HALF_EVEN).create_decimal(x)


def test_four_significant_digits_over_many_magnitudes_agree_with_the_decimal_module():
    rng = np.random.default_rng(7)
    values = rng.uniform(1.0, 10.0, 400) * 10.0 ** rng.integers(-9, 10, 400)
    values *= rng.choice([-1.0, 1.0], 400)
    checked = 0
    for x in values:
        text = number(float(x))
        d = decimal.Decimal(text)
        if 1e4 <= abs(x) < 1e5:
            # the rule keeps a whole number below 100 000 whole (five digits), never in e-form
            assert "e" not in text and d == decimal.Decimal(round(x))
            continue
        ref = _reference(float(x))
        assert d == ref, (x, text, ref)
        # exactly four significant digits are written, trailing zeros included (decimal module)
        assert len(d.as_tuple().digits) == 4, (x, text)
        # exponent form exactly outside [0.001, 100 000)
        assert ("e" in text) == (not 1e-3 <= abs(float(ref)) < 1e5), (x, text)
        checked += 1
    assert checked > 300


@pytest.mark.parametrize("x, text", [
    (0.8, "0.8000"), (12.5, "12.50"), (1234.56, "1235"), (12345.6, "12346"),
    (0.000123, "1.230e-4"), (123456.0, "1.235e5"), (-0.5, "-0.5000"), (0.001, "0.001000"),
    # rounding that carries into a new digit chooses the decimals after rounding (from memory:
    # 9.99996 to four significant digits is 10.00)
    (9.99996, "10.00"), (99999.6, "1.000e5"), (0.00099996, "0.001000"),
])
def test_the_documented_examples(x, text):
    assert number(x) == text


def test_missing_and_special_values():
    assert number(None) == "n/a" and number(float("nan")) == "n/a"
    assert number(None, missing="") == "" and number(float("nan"), missing="-") == "-"
    assert number(float("inf")) == "inf" and number(float("-inf")) == "-inf"
    assert number(0) == "0" and number(0.0) == "0" and number(-0.0) == "0"
    assert number(np.float32(0.25)) == "0.2500"        # numpy scalars are numbers too
    assert number(3) == "3.000"


def test_digits_changes_the_significant_digits():
    assert number(math.pi, 3) == "3.14" and number(math.pi, 6) == "3.14159"
    assert number(0.0001234, 2) == "1.2e-4"


def test_setting_values():
    assert setting(True) == "on" and setting(False) == "off"
    assert setting(64) == "64" and setting("relu") == "relu" and setting(None) == ""
    assert setting(0.001) == "0.001" and setting(0.0003) == "3e-4" and setting(0.9) == "0.9"
    assert setting(0.012345) == "0.01235" and setting(1.5e-5) == "1.5e-5" and setting(20.0) == "20"
    assert setting(float("nan")) == "n/a"


def test_duration():
    assert duration(None) == "?" and duration(float("nan")) == "?"
    assert duration(0.4) == "0s" and duration(45) == "45s" and duration(-3) == "0s"
    assert duration(185) == "3m05s" and duration(3599.6) == "1h00m"
    assert duration(7830) == "2h10m"                      # 2 h 10 min 30 s, minutes truncated
    assert duration(45, long=True) == "45 s" and duration(185, long=True) == "3 min 05 s"
    assert duration(7830, long=True) == "2 h 10 min" and duration(None, missing="unknown") == "unknown"


def test_percent():
    assert percent(0.4231) == "42%" and percent(0.4231, 1) == "42.3%"
    assert percent(1.0) == "100%" and percent(None) == "n/a" and percent(float("nan")) == "n/a"


def test_tick_decimals_follow_the_step():
    assert tick(0.0, 0.5) == "0"
    assert tick(0.5, 0.5) == "0.5" and tick(0.75, 0.25) == "0.75" and tick(20.0, 10.0) == "20"
    assert tick(0.00002, 0.00001) == "2.0e-5" and tick(300000.0, 100000.0) == "3.0e5"
