"""Reports: one result object (`Report`), one set of tables, four formats.

The package is cut along the report's seams:

- `build`: data → numbers (`build_report` for one variable, `build_study_report` for several,
  `summarise_consensus`);
- `model`: the frozen result objects (`Report`, `StudyReport`, `Variable` and their parts),
  raw numbers only;
- `text`: the words (methods paragraph, interpretation, cautions, headings, settings, notes);
- `tables` and `figures`: numbers formatted once for every format, plots as PNG;
- `document`: the outline every format follows (the same headings in the same order);
- `html`, `markdown`, `latex`, `docx`: one renderer per format;
- `write`: `write_report`, the format chosen by the file name's suffix.

Every number in every format goes through `agree.core.format.format_value`, applied once per
table by `report_tables`, so the formats cannot disagree with each other or with
`Report.to_dict()`. Text is written in a tiny markup shared by all formats: ``*N*`` is an
italic symbol and ``[[...]]`` a placeholder the author must fill in (shown highlighted, never
invented).

Typography follows APA 7: Latin-letter statistical symbols in italics (*N*, *n*, *SE*, *p*),
Greek letters upright (α, κ, π), no leading zero for values that cannot exceed 1
(coefficients, probabilities), confidence intervals in brackets.

References
----------
American Psychological Association (2020). Publication Manual (7th ed.), sections 6.36-6.46.
"""

from agree.core.format import format_bound, format_interval, format_value, lit, plain, spans
from agree.output.report.build import (
    DEFAULT_MINIMUM,
    HOW_DECIDED,
    HOW_ORDER,
    build_report,
    build_study_report,
    summarise_consensus,
)
from agree.output.report.document import document_figures, document_headings, report_document
from agree.output.report.docx import render_docx
from agree.output.report.figures import ReportFigure, report_figures
from agree.output.report.html import render_html
from agree.output.report.latex import latex_escape, render_latex
from agree.output.report.markdown import render_markdown
from agree.output.report.model import (
    CoderSummary,
    ConsensusSummary,
    CrossTable,
    Report,
    SampleSummary,
    StudyReport,
    Variable,
)
from agree.output.report.tables import Cell, Table, p_min_column_note, report_tables, rounds_tables, se_note
from agree.output.report.text import (
    BAND_TEXT,
    CAUTIONS,
    DEFAULT_TITLE,
    HEADINGS,
    INTERVAL_METHODS,
    PLACEHOLDER_NOTE,
    STATUS_TEXT,
    TENTATIVE,
    cautions,
    coefficient_label,
    interpretation,
    krippendorff_band,
    landis_koch,
    methods_paragraph,
    notes_markup,
    result_label,
    settings_line,
    status_text,
    study_methods_paragraph,
)
from agree.output.report.write import FORMATS, figure_folder, write_report

__all__ = [
    "BAND_TEXT", "CAUTIONS", "DEFAULT_MINIMUM", "DEFAULT_TITLE", "FORMATS", "HEADINGS", "HOW_DECIDED", "HOW_ORDER",
    "INTERVAL_METHODS", "PLACEHOLDER_NOTE", "STATUS_TEXT", "TENTATIVE", "Cell", "CoderSummary", "ConsensusSummary",
    "CrossTable", "Report", "ReportFigure", "SampleSummary", "StudyReport", "Table", "Variable", "p_min_column_note",
    "build_report", "build_study_report", "cautions", "coefficient_label", "document_figures", "document_headings",
    "figure_folder", "format_bound", "format_interval", "format_value", "interpretation", "krippendorff_band",
    "landis_koch", "latex_escape", "lit", "methods_paragraph", "notes_markup", "plain", "render_docx",
    "render_html", "render_latex", "render_markdown", "report_document", "report_figures", "report_tables",
    "result_label", "rounds_tables", "se_note", "settings_line", "spans", "status_text", "study_methods_paragraph",
    "summarise_consensus", "write_report",
]
