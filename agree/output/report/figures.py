"""The report's figures as PNG bytes, drawn by `agree.output.plots` and made once per report."""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

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
    if report.per_code:
        recs = [r for r in report.per_code if "alpha" in r]
        if recs:
            fig = plots.forest_plot([r.get("code") for r in recs], [r.get("alpha") for r in recs],
                                    [r.get("ci_low") for r in recs], [r.get("ci_high") for r in recs],
                                    minimum=report.minimum, symbol="Presence/absence α",
                                    title="Agreement per code", confidence_level=report.confidence_level)
            figs.append(ReportFigure("forest", "Agreement per code",
                                     "Each code's α with its interval; dashed line: the minimum; dotted line: "
                                     ".667. " + plots.MARKER_LEGEND, plots.figure_png(fig)))
    if report.confusion is not None and report.confusion.rows:
        c = report.confusion
        fig = plots.confusion_heatmap(c.counts, c.rows, c.columns, row_title=c.row_title,
                                      col_title=c.column_title, title=f"Confusion between coders ({c.source})")
        figs.append(ReportFigure("confusion", "Confusion between coders",
                                 f"Counts from the {c.source}; agreeing cells on the outlined diagonal. "
                                 "Colour scale (cividis) starts at 0 and repeats the printed counts.",
                                 plots.figure_png(fig)))
    if report.code_use is not None and report.code_use.columns:
        cu = report.code_use
        fig = plots.code_use_bars(cu.columns, cu.rows, cu.counts, title="Code use per coder")
        figs.append(ReportFigure("code_use", "Code use per coder",
                                 "Units each coder gave each code; bars start at 0; each coder has its own "
                                 "hatching and the count is printed at the end of each bar.",
                                 plots.figure_png(fig)))
    if report.rounds is not None:
        png = plots.figure_png(plots.rounds_trend_figure(report.rounds))
        if png:
            figs.append(ReportFigure("rounds", "Agreement across rounds",
                                     "α per round with intervals, overall and per code, on one fixed axis; "
                                     "dashed line: the minimum.", png))
    return figs


