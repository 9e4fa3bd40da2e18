"""Writing a report in the format its file name's suffix names, atomically."""

from __future__ import annotations

import os
from pathlib import Path
from typing import TYPE_CHECKING

from agree.core.files import atomic_write_bytes, make_folder
from agree.core.model import AgreeError
from agree.output.report.docx import render_docx
from agree.output.report.document import document_figures
from agree.output.report.html import render_html
from agree.output.report.latex import render_latex
from agree.output.report.markdown import render_markdown

if TYPE_CHECKING:
    from agree.output.report.model import Report, StudyReport

FORMATS = {".html": "html", ".htm": "html", ".md": "markdown", ".markdown": "markdown", ".docx": "docx",
           ".tex": "latex"}


def figure_folder(path: str | os.PathLike) -> Path:
    """The folder beside a Markdown or LaTeX report that holds its figures: the file name with
    its suffix, then ``-figures`` (``r.md`` → ``r-md-figures/``, ``r.tex`` → ``r-tex-figures/``),
    so that reports of different formats never share, or fight over, one folder."""
    path = Path(path)
    return path.parent / f"{path.stem}-{path.suffix.lower().lstrip('.')}-figures"


def write_report(report: Report | StudyReport, path: str | os.PathLike, *, figures: bool = True) -> list[Path]:
    """Write the report in the format its suffix names (.html, .md, .docx, .tex), atomically.

    HTML and DOCX carry their figures inside the file. For Markdown and LaTeX the figures are
    written as PNG files into the report's own folder beside it (`figure_folder`:
    ``r.md`` → ``r-md-figures/``) unless ``figures=False``; an existing folder is reused, and
    only the report's own figure files in it are replaced (each atomically). Returns the paths
    written, the report first.
    """
    path = Path(path)
    fmt = FORMATS.get(path.suffix.lower())
    if fmt is None:
        raise AgreeError(f"cannot tell the report format from '{path.name}'",
                         hint="end the file name in .html, .md, .docx or .tex", code="report-format")
    if not path.parent.exists():
        raise AgreeError(f"the folder {path.parent} does not exist", code="output-folder")
    written = []
    if fmt == "html":
        payload: bytes = render_html(report, figures=figures).encode("utf-8")
    elif fmt == "docx":
        payload = render_docx(report)
    else:
        figs = document_figures(report) if figures else []
        fig_dir = None
        if figs:
            folder = make_folder(figure_folder(path))
            fig_dir = folder.name
            for f in figs:
                written.append(atomic_write_bytes(folder / f"{f.key}.png", f.png))
        render = render_markdown if fmt == "markdown" else render_latex
        payload = render(report, figure_dir=fig_dir).encode("utf-8")
    written.insert(0, atomic_write_bytes(path, payload))
    return written
