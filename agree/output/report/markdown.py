"""The report as Markdown (figures linked from a folder beside it)."""

from __future__ import annotations

import re
from typing import TYPE_CHECKING

from agree.core.format import lit, spans
from agree.output.report.document import Bullets, Heading, Paragraph, report_document
from agree.output.report.tables import Table

if TYPE_CHECKING:
    from agree.output.report.model import Report, StudyReport

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


def render_markdown(report: Report | StudyReport, *, figure_dir: str | None = None) -> str:
    """The report as Markdown. Figures are linked from `figure_dir` (a folder beside the report,
    relative) when given, else left out."""
    out: list[str] = []
    for block in report_document(report, figures=figure_dir is not None):
        if isinstance(block, Heading):
            out += ["#" * block.level + " " + _md_markup(block.text), ""]
        elif isinstance(block, Paragraph):
            text = _md_markup(block.text)
            out += [f"*{text}*" if block.style == "note" else f"> {text}" if block.style == "methods" else text, ""]
        elif isinstance(block, Bullets):
            out += [f"- {_md_markup(i)}" for i in block.items] + [""]
        elif isinstance(block, Table):
            out += [_md_table(block)]
        else:
            out += [f"![{_md_markup(lit(block.title))}]({figure_dir}/{block.key}.png)", "",
                    f"*{_md_markup(lit(block.title))}.* {_md_markup(lit(block.caption))}", ""]
    return "\n".join(out).rstrip("\n") + "\n"
