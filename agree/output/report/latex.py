"""The report as a LaTeX fragment (booktabs tables; figures from a folder beside it)."""

from __future__ import annotations

from typing import TYPE_CHECKING, Sequence

from agree.core.format import spans
from agree.output.report.figures import ReportFigure
from agree.output.report.tables import Table, report_tables
from agree.output.report.text import notes_markup

if TYPE_CHECKING:
    from agree.output.report.model import Report

_LATEX_SPECIAL = {"\\": r"\textbackslash{}", "&": r"\&", "%": r"\%", "$": r"\$", "#": r"\#", "_": r"\_",
                  "{": r"\{", "}": r"\}", "~": r"\textasciitilde{}", "^": r"\textasciicircum{}",
                  "α": r"$\alpha$", "κ": r"$\kappa$", "π": r"$\pi$", "−": r"$-$", "–": "--", "—": "---",
                  "≥": r"$\geq$", "≤": r"$\leq$", "→": r"$\rightarrow$", "·": r"\textperiodcentered{}",
                  "‘": "`", "’": "'", "“": "``", "”": "''", "<": r"\textless{}", ">": r"\textgreater{}",
                  "…": r"\ldots{}"}


def latex_escape(text: str) -> str:
    """Escape LaTeX special characters (and map the few Unicode symbols the report uses)."""
    return "".join(_LATEX_SPECIAL.get(ch, ch) for ch in text)


def _tex_markup(markup: str) -> str:
    out = []
    for kind, text in spans(markup):
        t = latex_escape(text)
        out.append(f"\\textit{{{t}}}" if kind == "italic" else f"\\textbf{{{t}}}" if kind == "placeholder" else t)
    return "".join(out)


def _tex_table(t: Table) -> str:
    align = "".join("r" if t.rows and t.rows[0][i].numeric else "l" for i in range(len(t.header)))
    lines = ["\\begin{table}[htbp]", "\\centering", "\\small", f"\\caption{{{_tex_markup(t.caption)}}}",
             f"\\label{{tab:agree-{t.key.replace('_', '-')}}}", f"\\begin{{tabular}}{{{align}}}", "\\toprule",
             " & ".join(_tex_markup(h) for h in t.header) + " \\\\", "\\midrule"]
    lines += [" & ".join(_tex_markup(c.text) for c in row) + " \\\\" for row in t.rows]
    lines += ["\\bottomrule", "\\end{tabular}"]
    if t.note:
        lines += ["", f"\\parbox{{\\linewidth}}{{\\footnotesize\\textit{{Note.}} {_tex_markup(t.note)}}}"]
    lines.append("\\end{table}")
    return "\n".join(lines) + "\n"


def render_latex(report: Report, *, figure_dir: str | None = None,
                 figures: Sequence[ReportFigure] = ()) -> str:
    """The report as a LaTeX fragment: the methods paragraph, booktabs tables, interpretation.

    Needs ``\\usepackage{booktabs}`` (and ``graphicx`` when figures are included); for
    ``\\input`` into a paper. Placeholders are set in bold.
    """
    tables = report_tables(report)
    out = ["% Agreement report written by agree. Needs \\usepackage{booktabs}"
           + (" and \\usepackage{graphicx}." if figure_dir else "."),
           "% Bold bracketed text is for you to fill in.", "",
           f"\\section*{{{latex_escape(report.title)}}}", "", "\\subsection*{Methods}", "",
           _tex_markup(report.methods), "", "\\subsection*{Interpretation}", ""]
    out += [_tex_markup(p) + "\n" for p in report.interpretation]
    out += ["\\begin{itemize}"] + [f"  \\item {_tex_markup(c)}" for c in report.cautions] + ["\\end{itemize}", ""]
    if report.rounds is not None:
        out += ["\\subsection*{Coding rounds}", "", "\\begin{itemize}"]
        out += [f"  \\item {_tex_markup(s)}" for s in report.rounds.summary_markup(report.digits)]
        out += ["\\end{itemize}", ""]
    out += [_tex_table(t) for t in tables]
    for f in figures:
        out += ["\\begin{figure}[htbp]", "\\centering",
                f"\\includegraphics[width=\\linewidth]{{{figure_dir}/{f.key}.png}}",
                f"\\caption{{{latex_escape(f.title)}. {latex_escape(f.caption)}}}", "\\end{figure}", ""]
    out += ["\\subsection*{Notes}", "", "\\begin{itemize}"] + [f"  \\item {_tex_markup(n)}" for n in notes_markup(report)]
    out += ["\\end{itemize}"]
    return "\n".join(out) + "\n"


