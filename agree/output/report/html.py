"""The report as HTML: one self-contained file (CSS inline, plots as base64 PNG), or a fragment
for a notebook."""

from __future__ import annotations

import base64
import html
from typing import TYPE_CHECKING

from agree.core.format import spans
from agree.output.report.document import Block, Bullets, Heading, Paragraph, report_document
from agree.output.report.tables import Table

if TYPE_CHECKING:
    from agree.output.report.model import Report, StudyReport

_CSS = """
:root { --ink: #1a1a1a; --rule: #444; --soft: #666; }
body { font-family: Georgia, 'Times New Roman', serif; color: var(--ink); max-width: 62rem;
       margin: 2rem auto; padding: 0 1.2rem; line-height: 1.5; }
h1, h2, h3 { font-family: 'Helvetica Neue', Arial, sans-serif; line-height: 1.2; }
h1 { font-size: 1.6rem; margin-bottom: .2rem; } h2 { font-size: 1.2rem; margin-top: 2rem;
       border-bottom: 1px solid #bbb; padding-bottom: .2rem; }
.settings, .note, figcaption, .meta { color: var(--soft); font-size: .9rem; }
.placeholder { background: #fff3b0; border: 1px dashed #8a6d00; padding: 0 .15em; }
.methods { background: #f7f7f7; border-left: 4px solid #0072B2; padding: .6rem 1rem; }
table { border-collapse: collapse; margin: .8rem 0; font-size: .92rem; }
caption { text-align: left; font-weight: bold; padding-bottom: .3rem; font-family: Arial, sans-serif; }
thead th { border-top: 2px solid var(--rule); border-bottom: 1px solid var(--rule); padding: .25rem .6rem;
           text-align: left; vertical-align: bottom; }
tbody td { padding: .2rem .6rem; vertical-align: top; }
tbody tr:last-child td { border-bottom: 2px solid var(--rule); }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
h3 { font-size: 1.05rem; margin-top: 1.6rem; }
figure { margin: 1rem 0; } figure img { max-width: 100%; height: auto; border: 1px solid #ddd; }
ul.cautions li { margin-bottom: .4rem; }
@media print {
  body { max-width: none; margin: 0; font-size: 10.5pt; }
  h2 { break-after: avoid; } table, figure { break-inside: avoid; }
  .placeholder { background: none; border: 1px dashed #000; }
  .methods { background: none; border-left: 2px solid #000; }
  a { color: inherit; text-decoration: none; }
}
"""


def _html_markup(markup: str) -> str:
    out = []
    for kind, text in spans(markup):
        t = html.escape(text)
        if kind == "italic":
            out.append(f"<i>{t}</i>")
        elif kind == "placeholder":
            out.append(f'<span class="placeholder">{t}</span>')
        else:
            out.append(t)
    return "".join(out)


def _html_table(t: Table) -> str:
    head = "".join(f"<th scope=\"col\">{_html_markup(h)}</th>" for h in t.header)
    body = []
    for row in t.rows:
        cells = []
        for c in row:
            attrs = ' class="num"' if c.numeric else ""
            if c.paths:
                attrs += f' data-field="{html.escape(" ".join(c.paths))}"'
            cells.append(f"<td{attrs}>{_html_markup(c.text)}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    note = f'<p class="note">{_html_markup(t.note)}</p>' if t.note else ""
    return (f'<table id="table-{t.key}"><caption>{_html_markup(t.caption)}</caption><thead><tr>{head}</tr>'
            f'</thead><tbody>{"".join(body)}</tbody></table>{note}')


def _html_block(block: Block) -> str:
    if isinstance(block, Heading):
        return f'<h{block.level} id="{html.escape(block.key)}">{_html_markup(block.text)}</h{block.level}>'
    if isinstance(block, Paragraph):
        if block.style == "methods":
            return f'<div class="methods"><p>{_html_markup(block.text)}</p></div>'
        cls = f' class="{block.style}"' if block.style else ""
        return f"<p{cls}>{_html_markup(block.text)}</p>"
    if isinstance(block, Bullets):
        cls = f' class="{block.style}"' if block.style else ""
        return f"<ul{cls}>" + "".join(f"<li>{_html_markup(i)}</li>" for i in block.items) + "</ul>"
    if isinstance(block, Table):
        return _html_table(block)
    data = base64.b64encode(block.png).decode("ascii")
    return (f'<figure id="figure-{html.escape(block.key)}"><img src="data:image/png;base64,{data}" '
            f'alt="{html.escape(block.title)}"><figcaption><b>{html.escape(block.title)}.</b> '
            f"{html.escape(block.caption)}</figcaption></figure>")


def render_html(report: Report | StudyReport, *, standalone: bool = True, figures: bool = True) -> str:
    """The report as HTML: one self-contained file (CSS inline, plots as base64 PNG); with
    ``standalone=False`` a fragment for a notebook."""
    body = "\n".join(_html_block(b) for b in report_document(report, figures=figures))
    if not standalone:
        return f'<div class="agree-report"><style>{_scoped_css()}</style>{body}</div>'
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
            f"<title>{html.escape(report.title)}</title><style>{_CSS}</style></head>\n<body>\n{body}\n</body></html>\n")


def _scoped_css() -> str:
    rules = [".agree-report table { border-collapse: collapse; } .agree-report td.num { text-align: right; }",
             ".agree-report .placeholder { background: #fff3b0; border: 1px dashed #8a6d00; }",
             ".agree-report thead th { border-bottom: 1px solid #444; text-align: left; }",
             ".agree-report figure img { max-width: 100%; }"]
    return " ".join(rules)
