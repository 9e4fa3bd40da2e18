"""The report as a Word document (python-docx, loaded when a document is written)."""

from __future__ import annotations

import io
from typing import TYPE_CHECKING

from agree.core.format import lit, spans
from agree.output.report.document import Bullets, Heading, Paragraph, report_document
from agree.output.report.tables import Table

if TYPE_CHECKING:
    from agree.output.report.model import Report, StudyReport

def render_docx(report: Report | StudyReport) -> bytes:
    """The report as a Word document (python-docx): real tables, the plots as pictures."""
    from docx import Document
    from docx.enum.text import WD_ALIGN_PARAGRAPH, WD_COLOR_INDEX
    from docx.shared import Inches, Pt

    doc = Document()
    doc.core_properties.title = report.title

    def add_markup(paragraph, markup: str, *, size: float | None = None):
        for kind, text in spans(markup):
            run = paragraph.add_run(text)
            if kind == "italic":
                run.italic = True
            elif kind == "placeholder":
                run.font.highlight_color = WD_COLOR_INDEX.YELLOW
                run.bold = True
            if size:
                run.font.size = Pt(size)
        return paragraph

    def add_table(t: Table):
        add_markup(doc.add_paragraph(style="Caption") if "Caption" in [s.name for s in doc.styles]
                   else doc.add_paragraph(), t.caption)
        table = doc.add_table(rows=1, cols=len(t.header))
        table.style = "Table Grid"
        for cell, text in zip(table.rows[0].cells, t.header):
            p = cell.paragraphs[0]
            add_markup(p, text)
            for run in p.runs:
                run.bold = True
        for row in t.rows:
            cells = table.add_row().cells
            for cell, c in zip(cells, row):
                p = cell.paragraphs[0]
                add_markup(p, c.text)
                if c.numeric:
                    p.alignment = WD_ALIGN_PARAGRAPH.RIGHT
        if t.note:
            add_markup(doc.add_paragraph(), "*Note.* " + t.note, size=9)

    for block in report_document(report):
        if isinstance(block, Heading):
            add_markup(doc.add_heading(level=block.level), block.text)
        elif isinstance(block, Paragraph):
            add_markup(doc.add_paragraph(), block.text, size=9 if block.style in ("settings", "note") else None)
        elif isinstance(block, Bullets):
            for item in block.items:
                add_markup(doc.add_paragraph(style="List Bullet"), item, size=9 if block.style == "notes" else None)
        elif isinstance(block, Table):
            add_table(block)
        else:
            doc.add_picture(io.BytesIO(block.png), width=Inches(6.0))
            add_markup(doc.add_paragraph(), f"*{lit(block.title)}.* {lit(block.caption)}", size=9)
    buffer = io.BytesIO()
    doc.save(buffer)
    return buffer.getvalue()


