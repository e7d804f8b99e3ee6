"""The one number formatter of the app, the figures and the report."""

import math

import pytest

from sleepfuse.model.numbers import MISSING, fmt, format_number, format_p


@pytest.mark.parametrize(
    "p, text",
    [(3.6e-6, "< 0.001"), (0.0009999, "< 0.001"), (0.001, "0.001"), (0.0494, "0.049"), (0.5, "0.500"), (1.0, "1.000")],
)
def test_p_values_below_one_in_a_thousand_are_not_printed_as_zero(p, text):
    assert format_p(p) == text


@pytest.mark.parametrize("bad", [None, math.nan, math.inf, "0.1"])
def test_missing_values_show_a_dash(bad):
    assert format_p(bad) == MISSING
    assert format_number(bad) == MISSING
    assert fmt(bad) == MISSING


def test_no_negative_zero():
    assert format_number(-0.0001, 1) == "0.0"
    assert format_number(-0.04, 1, signed=True) == "+0.0"
    assert fmt(-0.04, "%") == "0.0"
    assert format_number(-0.06, 1) == "-0.1"


def test_narrow_column_values():
    assert fmt(30.0) == "30"
    assert fmt(30.5) == "30.5"
    assert fmt(85.0, "%") == "85.0"
    assert fmt(4.0, signed=True) == "+4"


def test_figures_and_report_print_a_true_minus():
    import numpy as np

    from sleepfuse.model.numbers import MINUS

    assert format_number(-3.25, 1, minus=MINUS) == "−3.2"  # half to even, as Python's format rounds
    assert format_number(-0.04, 1, minus=MINUS) == "0.0"
    assert format_number(np.float32(-2.5), 1, minus=MINUS) == "−2.5"
    assert format_number(np.int64(7), 0) == "7"  # numpy scalars are numbers too


def test_intervals_p_sentences_and_levels():
    from sleepfuse.model.numbers import MINUS, format_interval, format_level, format_p_text

    assert format_interval(-8.34, 1.88, minus=MINUS) == "−8.3 to 1.9"
    assert format_interval(0.1, math.nan) == MISSING
    assert format_p_text(3.6e-6) == "p < 0.001" and format_p_text(0.0384) == "p = 0.038"
    assert format_level(0.95) == "95%" and format_level(0.975) == "97.5%"
