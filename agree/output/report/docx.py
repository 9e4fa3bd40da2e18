"""The report as a Word document (python-docx, loaded when a document is written)."""

from __future__ import annotations

import io
from typing import TYPE_CHECKING

from agree.core.format import lit, spans
from agree.output.report.figures import report_figures
from agree.output.report.tables import Table, report_tables
from agree.output.report.text import PLACEHOLDER_NOTE, notes_markup, settings_line

if TYPE_CHECKING:
    from agree.output.report.model import Report

def render_docx(report: Report) -> bytes:
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

    tables = {t.key: t for t in report_tables(report)}
    figs = {f.key: f for f in report_figures(report)}

    def add_figure(key: str):
        f = figs.get(key)
        if f is None:
            return
        doc.add_picture(io.BytesIO(f.png), width=Inches(6.0))
        add_markup(doc.add_paragraph(), f"*{lit(f.title)}.* {lit(f.caption)}", size=9)

    doc.add_heading(report.title, level=1)
    add_markup(doc.add_paragraph(), settings_line(report), size=9)
    doc.add_heading("Methods paragraph", level=2)
    add_markup(doc.add_paragraph(), lit(PLACEHOLDER_NOTE), size=9)
    add_markup(doc.add_paragraph(), report.methods)
    doc.add_heading("Agreement", level=2)
    add_table(tables["coefficients"])
    doc.add_heading("Interpretation", level=2)
    for p in report.interpretation:
        add_markup(doc.add_paragraph(), p)
    doc.add_heading("Cautions", level=3)
    for c in report.cautions:
        add_markup(doc.add_paragraph(style="List Bullet"), c)
    if "per_code" in tables:
        doc.add_heading("Codes", level=2)
        add_table(tables["per_code"])
    add_figure("forest")
    if "confused_pairs" in tables:
        add_table(tables["confused_pairs"])
    doc.add_heading("Coders", level=2)
    add_figure("confusion")
    if "code_use" in tables:
        add_table(tables["code_use"])
    add_figure("code_use")
    if report.rounds is not None:
        doc.add_heading("Coding rounds", level=2)
        for s in report.rounds.summary_markup(report.digits):
            add_markup(doc.add_paragraph(style="List Bullet"), s)
        for key in ("rounds", "round_changes", "drift", "definitions"):
            if key in tables:
                add_table(tables[key])
        add_figure("rounds")
    if "consensus" in tables:
        doc.add_heading("Resolution of disagreements", level=2)
        add_table(tables["consensus"])
    doc.add_heading("Notes", level=2)
    for n in notes_markup(report):
        add_markup(doc.add_paragraph(style="List Bullet"), n, size=9)
    buffer = io.BytesIO()
    doc.save(buffer)
    return buffer.getvalue()


