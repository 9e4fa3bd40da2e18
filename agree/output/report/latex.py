"""The report as a LaTeX fragment (booktabs tables; figures from a folder beside it)."""

from __future__ import annotations

from typing import TYPE_CHECKING

from agree.core.format import spans
from agree.output.report.document import Bullets, Heading, Paragraph, report_document
from agree.output.report.tables import Table

if TYPE_CHECKING:
    from agree.output.report.model import Report, StudyReport

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


_SECTIONS = {1: "section", 2: "subsection", 3: "subsubsection"}


def render_latex(report: Report | StudyReport, *, figure_dir: str | None = None) -> str:
    """The report as a LaTeX fragment: the methods paragraph, booktabs tables, interpretation.

    Needs ``\\usepackage{booktabs}`` (and ``graphicx`` when figures are included, from
    `figure_dir`); for ``\\input`` into a paper. Placeholders are set in bold.
    """
    out = ["% Agreement report written by agree. Needs \\usepackage{booktabs}"
           + (" and \\usepackage{graphicx}." if figure_dir else "."),
           "% Bold bracketed text is for you to fill in.", ""]
    for block in report_document(report, figures=figure_dir is not None):
        if isinstance(block, Heading):
            out += [f"\\{_SECTIONS[block.level]}*{{{_tex_markup(block.text)}}}", ""]
        elif isinstance(block, Paragraph):
            text = _tex_markup(block.text)
            out += [f"{{\\small {text}}}" if block.style in ("settings", "note") else text, ""]
        elif isinstance(block, Bullets):
            out += ["\\begin{itemize}"] + [f"  \\item {_tex_markup(i)}" for i in block.items]
            out += ["\\end{itemize}", ""]
        elif isinstance(block, Table):
            out += [_tex_table(block)]
        else:
            out += ["\\begin{figure}[htbp]", "\\centering",
                    f"\\includegraphics[width=\\linewidth]{{{figure_dir}/{block.key}.png}}",
                    f"\\caption{{{latex_escape(block.title)}. {latex_escape(block.caption)}}}", "\\end{figure}", ""]
    return "\n".join(out).rstrip("\n") + "\n"
