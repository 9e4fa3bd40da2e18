"""The one number style (agree.core.format): APA 7, Publication Manual (7th ed.), 6.36 (from
memory): no leading zero for a value that cannot exceed 1; the same strings in every output."""

from __future__ import annotations

import pytest

from agree.core.format import BOUNDED_KINDS, DEFAULT_DIGITS, format_interval, format_value, signed, signed_interval


def test_three_decimals_tell_apart_what_two_would_merge():
    # six coefficients from .786 to .793 all read ".79" with two decimals
    values = [0.786, 0.787, 0.789, 0.790, 0.791, 0.793]
    assert DEFAULT_DIGITS == 3
    assert len({format_value(v) for v in values}) == len(values)
    assert len({format_value(v, digits=2) for v in values}) == 1


@pytest.mark.parametrize("kind", BOUNDED_KINDS)
def test_no_leading_zero_on_the_scale_of_a_coefficient(kind):
    assert not format_value(0.034, kind).startswith("0")
    assert not format_value(-0.25, kind).startswith(("0", "-0", "\u22120"))


def test_signed_changes_and_their_intervals():
    assert signed(0.0123) == "+.012" and signed(-0.034) == "\u2212.034" and signed(0.0) == ".000"
    assert signed(None) == "–"
    assert signed_interval(-0.012, 0.034) == "[\u2212.012, +.034]"
    assert signed_interval(float("nan"), 0.1) == "–"
    assert format_interval(-0.1, 1.0) == "[\u2212.100, 1.000]"


def test_notebook_tables_follow_the_number_style():
    """Issue 13: result tables in a notebook (and reprs) drop the leading zero of quantities bounded
    by 1 and keep it for columns of quantities that can exceed 1 (statistics, ratios)."""
    import pandas as pd

    from agree.core.format import notebook_html, notebook_text

    frame = pd.DataFrame({"code": ["a", "b"], "estimate": [0.5854, -0.12], "ci_low": [0.49, -0.3],
                          "usage_statistic": [0.45, 0.2], "o_over_e": [0.84, 0.5], "n_units": [120, 80]})
    text = notebook_text("X", "summary", frame)
    assert ".585" in text and "−.120" in text and "0.585" not in text
    assert "0.450" in text and "0.840" in text and "120" in text
    html = notebook_html("summary", frame)
    assert "<td>.585</td>" in html and "<td>0.450</td>" in html
