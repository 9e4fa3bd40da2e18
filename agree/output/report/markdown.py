"""The report as Markdown (figures linked from a folder beside it)."""

from __future__ import annotations

import re
from typing import TYPE_CHECKING, Sequence

from agree.core.format import lit, spans
from agree.output.report.figures import ReportFigure
from agree.output.report.tables import Table, report_tables
from agree.output.report.text import PLACEHOLDER_NOTE, notes_markup, settings_line

if TYPE_CHECKING:
    from agree.output.report.model import Report

def _md_markup(markup: str) -> str:
    out = []
    for kind, text in spans(markup):
        t = re.sub(r"([\\`*_|<>])", r"\\\1", text).replace("](", "\\](")
        out.append(f"*{t}*" if kind == "italic" else f"**{t}**" if kind == "placeholder" else t)
    return "".join(out)


def _md_table(t: Table) -> str:
    lines = [f"**{_md_markup(t.caption)}**", "", "| " + " | ".join(_md_markup(h) for h in t.header) + " |",
             "| " + " | ".join("---:" if i and t.rows and t.rows[0][i].numeric else "---"
                                for i in range(len(t.header))) + " |"]
    for row in t.rows:
        lines.append("| " + " | ".join(_md_markup(c.text) for c in row) + " |")
    if t.note:
        lines += ["", f"*Note.* {_md_markup(t.note)}"]
    return "\n".join(lines) + "\n"


def render_markdown(report: Report, *, figure_dir: str | None = None,
                    figures: Sequence[ReportFigure] = ()) -> str:
    """The report as Markdown. Figures are linked from `figure_dir` (relative) when given."""
    tables = {t.key: t for t in report_tables(report)}
    out = [f"# {_md_markup(lit(report.title))}", "", _md_markup(settings_line(report)), "",
           "## Methods paragraph", "", f"*{PLACEHOLDER_NOTE}*", "", _md_markup(report.methods), "",
           "## Agreement", "", _md_table(tables["coefficients"]), "## Interpretation", ""]
    out += [_md_markup(p) + "\n" for p in report.interpretation]
    out += ["### Cautions", ""] + [f"- {_md_markup(c)}" for c in report.cautions] + [""]
    order = ["per_code", "confused_pairs", "code_use"]
    if report.rounds is not None:
        out += ["## Coding rounds", ""] + [f"- {_md_markup(s)}" for s in report.rounds.summary_markup(report.digits)]
        out.append("")
        order += ["rounds", "round_changes", "drift", "definitions"]
    order.append("consensus")
    for key in order:
        if key in tables:
            out += [_md_table(tables[key])]
    if figure_dir is not None:
        out += ["## Figures", ""]
        for f in figures:
            out += [f"![{f.title}]({figure_dir}/{f.key}.png)", "", f"*{f.title}.* {f.caption}", ""]
    out += ["## Notes", ""] + [f"- {_md_markup(n)}" for n in notes_markup(report)]
    return "\n".join(out) + "\n"


