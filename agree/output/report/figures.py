"""The report's figures as PNG bytes, drawn by `agree.output.plots` and made once per report."""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

from agree.core.constants import TENTATIVE
from agree.core.format import format_value, percent_label
from agree.output import plots

if TYPE_CHECKING:
    from agree.output.report.model import Report


@dataclass(frozen=True)
class ReportFigure:
    key: str
    title: str
    caption: str
    png: bytes


def report_figures(report: Report) -> list[ReportFigure]:
    """The report's plots as PNG bytes (matplotlib, Agg backend), made once per report."""
    if "all" not in report._figures:
        report._figures["all"] = _make_figures(report)
    return list(report._figures["all"])


def _make_figures(report: Report) -> list[ReportFigure]:
    figs: list[ReportFigure] = []
    level = percent_label(report.confidence_level)
    if report.per_code:
        recs = [r for r in report.per_code if "alpha" in r]
        if recs:
            fig = plots.forest_plot([r.get("code") for r in recs], [r.get("alpha") for r in recs],
                                    [r.get("lower_bound") for r in recs], statuses=[r.get("status") for r in recs],
                                    minimum=report.minimum, symbol="Presence/absence α", title="Agreement per code",
                                    confidence_level=report.confidence_level, digits=report.digits)
            bounds = any(r.get("lower_bound") is not None for r in recs)
            how = (f"the bar of each code starts at its one-sided {level} lower bound, the quantity its status "
                   "is judged on" if bounds else
                   "no bootstrap resamples were drawn, so there are no bounds and the statuses compare the "
                   "estimates with the minimum")
            figs.append(ReportFigure("forest", "Agreement per code",
                                     f"Each code's α (presence/absence) and status as in the per-code table; {how}. "
                                     f"Dashed line: the minimum; dotted line: {format_value(TENTATIVE, 'threshold')}. "
                                     + plots.MARKER_LEGEND, plots.figure_png(fig)))
    if report.confusion is not None and report.confusion.rows:
        c = report.confusion
        fig = plots.confusion_heatmap(c.counts, c.rows, c.columns, row_title=c.row_title,
                                      col_title=c.column_title, title=f"Confusion between coders: {c.source}")
        figs.append(ReportFigure("confusion", "Confusion between coders",
                                 f"Counts from the {c.source}. " + plots.HEATMAP_LEGEND, plots.figure_png(fig)))
    if report.code_use is not None and report.code_use.columns:
        cu = report.code_use
        fig = plots.code_use_bars(cu.columns, cu.rows, cu.counts, title="Units given each code, per coder")
        figs.append(ReportFigure("code_use", "Units given each code, per coder",
                                 "Units each coder gave each code; bars start at 0; each coder has its own "
                                 "hatching and the count is printed at the end of each bar.",
                                 plots.figure_png(fig)))
    if report.rounds is not None:
        png = plots.figure_png(plots.rounds_trend_figure(report.rounds, digits=report.digits))
        if png:
            figs.append(ReportFigure("rounds", "Agreement across rounds",
                                     f"α per round with two-sided {level} intervals, overall and per code, on one "
                                     "fixed axis; dashed line: the minimum.", png))
    return figs
