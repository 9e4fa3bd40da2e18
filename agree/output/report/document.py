"""The report as a sequence of blocks (headings, paragraphs, lists, tables, figures), the one
outline every renderer follows, so every format shows the same headings in the same order.

A one-variable `Report` and a several-variable `StudyReport` give the same outline: the title
and settings, the methods paragraph, then each variable's sections (under a heading naming the
variable when there are several), then the conventions and cautions, then the notes.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Union

from agree.core.format import lit, plain
from agree.output.report.figures import ReportFigure, report_figures
from agree.output.report.tables import Table, report_tables
from agree.output.report.text import (
    HEADINGS,
    PLACEHOLDER_NOTE,
    made_with,
    notes_markup,
    settings_line,
    study_settings_line,
    variable_settings_line,
)

if TYPE_CHECKING:
    from agree.output.report.model import Report, StudyReport


@dataclass(frozen=True)
class Heading:
    """A heading: level 1 (the title), 2 (a section) or 3 (a section of one variable's part)."""

    level: int
    text: str            # markup
    key: str             # stable id: "methods", "agreement", "topic-codes", ...


@dataclass(frozen=True)
class Paragraph:
    text: str            # markup
    style: str = ""      # "settings", "note" or "methods" (renderers may set these apart)


@dataclass(frozen=True)
class Bullets:
    items: tuple[str, ...]   # markup
    style: str = ""          # "cautions" or "notes"


Block = Union[Heading, Paragraph, Bullets, Table, ReportFigure]

_ROUND_TABLES = ("rounds", "round_changes", "drift", "definitions")


def sections_of(report: Report | StudyReport) -> tuple[Report, ...]:
    """The one-variable reports a report is made of (itself, for a `Report`)."""
    return tuple(getattr(report, "sections", None) or (report,))


def slug(name: str) -> str:
    """A name for ids and file names: lower case letters, digits and hyphens."""
    return re.sub(r"[^a-z0-9]+", "-", str(name).lower()).strip("-") or "variable"


def variable_keys(report: Report | StudyReport) -> list[str]:
    """One distinct id per variable ("" for a one-variable report), for headings and figure files."""
    parts = sections_of(report)
    if len(parts) == 1 and parts[0].variable is None:
        return [""]
    keys: list[str] = []
    for r in parts:
        key = slug(r.variable or "variable")
        while key in keys:
            key += "-2"
        keys.append(key)
    return keys


def report_document(report: Report | StudyReport, *, figures: bool = True) -> list[Block]:
    """The blocks of the report, in order (figures left out with ``figures=False``)."""
    parts = sections_of(report)
    several = hasattr(report, "sections")
    blocks: list[Block] = [Heading(1, lit(report.title), "title")]
    if several:
        blocks.append(Paragraph(study_settings_line(report), "settings"))
    else:
        blocks.append(Paragraph(settings_line(report), "settings"))
    blocks += [Heading(2, HEADINGS["methods"], "methods"), Paragraph(lit(PLACEHOLDER_NOTE), "note"),
               Paragraph(report.methods, "methods")]
    for key, part in zip(variable_keys(report), parts):
        level = 2
        if several:
            blocks += [Heading(2, f"Variable: {lit(part.variable)}", key),
                       Paragraph(variable_settings_line(part), "settings")]
            level = 3
        blocks += _variable_blocks(part, key, level, figures)
    convention = parts[0].interpretation[:1]
    blocks += [Heading(2, HEADINGS["cautions"], "cautions")]
    blocks += [Paragraph(p) for p in convention]
    blocks += [Bullets(tuple(report.cautions), "cautions"), Heading(2, HEADINGS["notes"], "notes")]
    notes: list[str] = []
    for part in parts:
        prefix = f"{lit(part.variable)}: " if several else ""
        notes += [prefix + n for n in notes_markup(part, footer=False)]
    blocks.append(Bullets(tuple(notes + [made_with()]), "notes"))
    return blocks


def _variable_blocks(report: Report, key: str, level: int, figures: bool) -> list[Block]:
    """One variable's sections: agreement, interpretation, codes, coders, rounds, resolution."""
    tables = {t.key: t for t in report_tables(report)}
    figs = {f.key: f for f in report_figures(report)} if figures else {}
    prefix = f"{key}-" if key else ""
    name = f"{report.variable}: " if report.variable else ""

    def own(block: Table | ReportFigure) -> Table | ReportFigure:
        # ids and figure files stay distinct when several variables share a report
        if not key:
            return block
        if isinstance(block, ReportFigure):
            return replace(block, key=prefix + block.key, title=name + block.title)
        return replace(block, key=prefix + block.key)

    def heading(section: str) -> Heading:
        return Heading(level, HEADINGS[section], prefix + section)

    def t(k: str) -> list[Block]:
        return [own(tables[k])] if k in tables else []

    def f(k: str) -> list[Block]:
        return [own(figs[k])] if k in figs else []

    out: list[Block] = [heading("agreement"), *t("coefficients"), heading("interpretation")]
    out += [Paragraph(p) for p in report.interpretation[1:]]
    codes = t("per_code") + f("forest") + t("confused_pairs")
    if codes:
        out += [heading("codes")] + codes
    out += [heading("coders")] + t("coder_pairs") + t("leave_one_out") + f("confusion") + t("code_use") \
        + f("code_use")
    if report.rounds is not None:
        out += [heading("rounds"), Bullets(tuple(report.rounds.summary_markup(report.digits)))]
        out += [b for k in _ROUND_TABLES for b in t(k)] + f("rounds")
    if "consensus" in tables:
        out += [heading("resolution"), *t("consensus")]
    return out


def document_headings(report: Report | StudyReport) -> list[str]:
    """The report's headings as plain text, in order (what every format shows)."""
    return [plain(b.text) for b in report_document(report, figures=False) if isinstance(b, Heading)]


def document_figures(report: Report | StudyReport) -> list[ReportFigure]:
    """The figures of the report, in the order they appear (with their file keys)."""
    return [b for b in report_document(report) if isinstance(b, ReportFigure)]
