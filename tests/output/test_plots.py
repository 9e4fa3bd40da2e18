"""Figures: the per-code plot shows the quantity the status is judged on, the confusion map scales
the disagreements on their own, and every label follows the one number style.

External checks: the forest plot is compared with the per-code status column of
`agree.analysis.diagnostics.diagnose_codes` (which judges the one-sided lower bound), and with
the rule itself (status "ok" iff the bound reaches the minimum); the heat map's colour limits
with the table's largest off-diagonal count.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from agree.analysis.diagnostics import diagnose_codes
from agree.io.readers import read
from agree.output import plots

SAMPLES = Path(__file__).resolve().parents[2] / "samples"


def _markers(ax):
    """(y, x, marker, face) of every marker drawn (not the bound ticks)."""
    out = []
    for line in ax.get_lines():
        if line.get_marker() in ("None", None, "", "|") or len(line.get_xdata()) != 1:
            continue
        out.append((float(line.get_ydata()[0]), float(line.get_xdata()[0]), line.get_marker(),
                    line.get_markerfacecolor()))
    return out


def test_forest_plot_marks_a_code_by_its_one_sided_bound_as_the_status_column_does():
    # a code whose two-sided interval crosses the minimum but whose one-sided bound does not:
    # the status column says "ok", and so must the plot (filled circle, bar starting above the line)
    fig = plots.forest_plot(["crosses"], [0.86], [0.805], minimum=0.8, symbol="α", title="t")
    ax = fig.axes[0]
    (_, x, marker, face), = _markers(ax)
    assert x == pytest.approx(0.86) and marker == "o" and face != "white"
    bars = [seg for coll in ax.collections for seg in coll.get_segments()]
    assert any(seg[0][0] == pytest.approx(0.805) and seg[1][0] == pytest.approx(1.0) for seg in bars)
    legend = " ".join(t.get_text() for t in ax.get_legend().get_texts())
    assert "lower bound" in legend and "judged" in legend
    assert "lower bound" in ax.get_xlabel()
    assert "lower bound" in plots.MARKER_LEGEND and "judged" in plots.MARKER_LEGEND


def test_forest_plot_agrees_with_the_per_code_status_of_the_diagnostics():
    data = read(SAMPLES / "round1.csv", codebook=SAMPLES / "codebook.csv")
    diag = diagnose_codes(data, minimum=0.8, n_resamples=300, seed=2).to_frame()
    fig = plots.forest_plot(list(diag["code"]), list(diag["alpha"]), list(diag["lower_bound"]),
                            statuses=list(diag["status"]), minimum=0.8, symbol="α", title="t")
    drawn = sorted(_markers(fig.axes[0]), key=lambda m: -m[0])          # top row first
    defined = diag[np.isfinite(diag["alpha"])]
    assert len(drawn) == len(defined)
    for (_, x, marker, face), (_, row) in zip(drawn, defined.iterrows()):
        assert x == pytest.approx(max(row.alpha, -0.2))
        assert (marker, face if face == "white" else "filled") == \
            {"ok": ("o", "filled"), "uncertain": ("o", "white"), "below minimum": ("^", "white"),
             "too rare": ("D", "white")}[row.status]
        if row.status == "ok":                     # the rule, checked from the numbers themselves
            assert row.lower_bound >= 0.8
        if row.status == "uncertain":
            assert row.alpha >= 0.8 > row.lower_bound


def test_forest_plot_without_bounds_draws_no_bars():
    fig = plots.forest_plot(["a", "b"], [0.9, 0.5], [None, None], minimum=0.8, symbol="α", title="t")
    assert not [seg for coll in fig.axes[0].collections for seg in coll.get_segments() if len(seg)]


def test_confusion_map_scales_the_disagreements_on_their_own():
    counts = [[120, 3, 0], [5, 90, 1], [0, 2, 60]]
    fig = plots.confusion_heatmap(counts, ["a", "b", "c"], ["a", "b", "c"], row_title="r", col_title="c",
                                  title="t")
    image = fig.axes[0].images[0]
    assert image.norm.vmin == 0 and image.norm.vmax == 5           # the largest disagreement, not 120
    mask = np.ma.getmaskarray(image.get_array())
    assert mask.tolist() == np.eye(3, dtype=bool).tolist()          # the agreeing cells are off the scale
    assert sorted(t.get_text() for t in fig.axes[0].texts) == sorted(str(v) for row in counts for v in row)
    label = fig.axes[1].get_ylabel()
    assert "Disagreements" in label and "not on this scale" in label
    assert "disagreements alone" in plots.HEATMAP_LEGEND


@pytest.mark.parametrize("value, text", [(-0.2, "\u2212.2"), (0.0, "0"), (0.4, ".4"), (1.0, "1"), (-1.0, "\u22121"),
                                         (0.8, ".8")])
def test_agreement_axes_use_the_house_number_style(value, text):
    # no leading zero (APA 7, 6.36; from memory), the minus sign
    assert plots.axis_number(value) == text


def test_plot_labels_follow_the_number_style():
    fig = plots.forest_plot(["a"], [0.9123], [0.85], minimum=0.8, symbol="α", title="t")
    texts = [t.get_text() for t in fig.axes[0].texts]
    assert " minimum .800" in texts and ".912" in texts
    assert not any("0.8" in t for t in texts + [fig.axes[0].get_xlabel()])
    trend = plots.rounds_trend(["1", "2"], {"All codes": [(0.71, 0.6, 0.8), (0.83, 0.75, 0.9)]}, minimum=0.8,
                               symbol="α", title="t")
    assert "minimum .800" in trend._suptitle.get_text() and "0.8" not in trend._suptitle.get_text()
    assert {t.get_text() for t in trend.axes[0].texts} == {".710", ".830"}
