"""The report's outline in every format: the same headings in the same order, figure folders that
do not collide, the same number strings everywhere, our own title and heading words.

External checks: the headings are read back from each written file with independent parsers
(html.parser for HTML, python-docx for DOCX, line patterns for Markdown and LaTeX), not from
the outline that produced them.
"""

from __future__ import annotations

import html
import io
import re
from html.parser import HTMLParser
from pathlib import Path

import pytest

from agree.analysis.rounds import split_rounds
from agree.io.readers import read
from agree.output.report import (
    DEFAULT_TITLE,
    HEADINGS,
    Variable,
    build_report,
    build_study_report,
    document_headings,
    figure_folder,
    plain,
    render_docx,
    render_html,
    render_latex,
    render_markdown,
    report_tables,
    write_report,
)

SAMPLES = Path(__file__).resolve().parents[2] / "samples"


@pytest.fixture(scope="module")
def full_report():
    """Rounds, a consensus table, per-code and coder sections: every heading a report can have."""
    import pandas as pd

    data = read(SAMPLES / "rounds_long.csv", codebook=SAMPLES / "codebook.csv", keep=["round"])
    parts = split_rounds(data)
    ids = list(map(str, parts["2"].unit_ids))
    consensus = pd.DataFrame({"unit": ids, "final code": "Belonging",
                              "source": ["agreed"] * (len(ids) - 10) + ["decided"] * 10})
    return build_report(None, rounds=parts, n_resamples=200, seed=3, consensus=consensus)


@pytest.fixture(scope="module")
def study():
    return build_study_report({
        "topics": read(SAMPLES / "multicode.xlsx"),
        "commitment": Variable(read(SAMPLES / "ratings.csv", codebook=SAMPLES / "ratings_codebook.csv")),
    }, n_resamples=200, seed=3)


class _Headings(HTMLParser):
    def __init__(self):
        super().__init__()
        self.found, self._open = [], None

    def handle_starttag(self, tag, attrs):
        if re.fullmatch(r"h[1-3]", tag):
            self._open, self._text = tag, []

    def handle_data(self, data):
        if self._open:
            self._text.append(data)

    def handle_endtag(self, tag):
        if tag == self._open:
            self.found.append("".join(self._text))
            self._open = None


def _html_headings(text: str) -> list[str]:
    parser = _Headings()
    parser.feed(text)
    return parser.found


def _md_headings(text: str) -> list[str]:
    return [re.sub(r"\\(.)", r"\1", m.group(1)) for m in re.finditer(r"^#{1,3} (.*)$", text, re.M)]


def _tex_headings(text: str) -> list[str]:
    return [m.group(1) for m in re.finditer(r"^\\(?:sub)*section\*\{(.*)\}$", text, re.M)]


def _docx_headings(payload: bytes) -> list[str]:
    from docx import Document

    doc = Document(io.BytesIO(payload))
    return [p.text for p in doc.paragraphs if p.style.name.startswith("Heading")]


@pytest.mark.parametrize("which", ["full_report", "study"])
def test_every_format_has_the_same_headings_in_the_same_order(request, which):
    report = request.getfixturevalue(which)
    expected = document_headings(report)
    assert _html_headings(render_html(report, figures=False)) == expected
    assert _md_headings(render_markdown(report)) == expected
    assert _tex_headings(render_latex(report)) == expected
    assert _docx_headings(render_docx(report)) == expected


def test_markdown_puts_codes_coders_and_rounds_under_their_own_headings(full_report):
    # before, the Markdown report had no Codes, Coders or Rounds headings, so those tables sat
    # under "Cautions"
    md = render_markdown(full_report)
    order = [HEADINGS[k] for k in ("agreement", "interpretation", "codes", "coders", "rounds", "resolution",
                                   "cautions", "notes")]
    assert [h for h in _md_headings(md) if h in order] == order
    heads = [(m.start(), m.group(1)) for m in re.finditer(r"^#{1,3} (.*)$", md, re.M)]

    def section_of(text: str) -> str:
        at = md.index(text)
        return [h for start, h in heads if start < at][-1]

    assert section_of("**Agreement per code (each code as present or absent)**") == HEADINGS["codes"]
    assert section_of("**Units given each code, per coder**") == HEADINGS["coders"]
    assert section_of("**Agreement per coding round**") == HEADINGS["rounds"]
    assert section_of("**Units by how their final code was reached**") == HEADINGS["resolution"]
    cautions = md.index(f"## {HEADINGS['cautions']}")
    assert "**" not in md[cautions:md.index(f"## {HEADINGS['notes']}")].replace("**[", "")   # no table there


def test_title_and_headings_are_our_own_words(full_report):
    assert full_report.title == DEFAULT_TITLE == "Reliability of the coding"
    headings = document_headings(full_report)
    assert headings[0] == DEFAULT_TITLE
    assert set(headings[1:]) == set(HEADINGS.values())
    # the old title, which is also the name of a function of a well-known analysis program, is gone
    for fmt in (render_markdown(full_report), render_html(full_report, figures=False)):
        assert "Intercoder agreement" not in fmt
    # the trade's terms for the coefficients stay
    assert "Krippendorff's α" in plain(render_markdown(full_report))


def test_study_headings_name_each_variable_once(study):
    headings = document_headings(study)
    assert headings.count("Variable: topics") == 1 and headings.count("Variable: commitment") == 1
    assert headings.index("Variable: topics") < headings.index("Variable: commitment")
    # each variable has its own sections; cautions and notes once, at the end
    assert headings.count(HEADINGS["agreement"]) == 2
    assert headings[-2:] == [HEADINGS["cautions"], HEADINGS["notes"]]


# -- figure folders ---------------------------------------------------------------------------------

def test_each_report_has_its_own_figure_folder(full_report, tmp_path):
    md, tex = tmp_path / "r.md", tmp_path / "r.tex"
    assert figure_folder(md) != figure_folder(tex)
    write_report(full_report, md)
    write_report(full_report, tex)           # before: failed, the folder of r.md was in the way
    for path in (md, tex):
        folder = figure_folder(path)
        names = sorted(p.name for p in folder.iterdir())
        assert names == ["code_use.png", "confusion.png", "forest.png", "rounds.png"]
        assert f"{folder.name}/forest.png" in path.read_text()


def test_rewriting_a_report_reuses_its_folder_and_leaves_other_files_alone(full_report, tmp_path):
    md = tmp_path / "r.md"
    write_report(full_report, md)
    folder = figure_folder(md)
    mine = folder / "my-notes.txt"
    mine.write_text("keep me")
    before = (folder / "forest.png").stat().st_ino
    write_report(full_report, md)
    assert mine.read_text() == "keep me"
    assert (folder / "forest.png").stat().st_ino != before          # replaced by a new file (atomic rename)
    assert not [p for p in folder.iterdir() if p.name.endswith(".tmp")]


def test_study_figures_are_named_by_variable(study, tmp_path):
    written = write_report(study, tmp_path / "s.md")
    names = {p.name for p in written[1:]}
    assert {"topics-forest.png", "topics-confusion.png", "commitment-confusion.png"} <= names
    assert not any(n.startswith("commitment-forest") for n in names)     # a rating scale has no per-code plot


# -- one number style in every format ---------------------------------------------------------------

def _numbers(report) -> list[str]:
    cells = []
    for table in report_tables(report):
        for row in table.rows:
            cells += [plain(c.text) for c in row if c.numeric]
    return cells


def test_every_format_prints_the_same_number_strings(full_report, tmp_path):
    from docx import Document

    from agree.output.report import latex_escape

    strings = _numbers(full_report)
    assert strings and all(not re.match(r"^−?0\.\d", s) for s in strings if not s.endswith("%"))
    md = plain(render_markdown(full_report))
    page = html.unescape(re.sub(r"<[^>]+>", " ", render_html(full_report, figures=False)))
    tex = render_latex(full_report)
    doc = Document(io.BytesIO(render_docx(full_report)))
    docx_cells = {cell.text for table in doc.tables for row in table.rows for cell in row.cells}
    for s in set(strings):
        assert s in md and s in page and latex_escape(s) in tex and s in docx_cells, s


def test_the_terminal_prints_the_report_strings(full_report, monkeypatch):
    from rich.console import Console

    import agree.cli.report as report_command

    console = Console(width=250, file=io.StringIO(), record=True)
    monkeypatch.setattr(report_command, "stdout", console)
    report_command._print_coefficients(full_report)
    printed = console.export_text()
    table = report_tables(full_report)[0]
    for row in table.rows:
        for cell in row[1:-1]:
            assert plain(cell.text) in printed


def test_score_and_report_print_a_coefficient_alike(monkeypatch):
    # the same result gives the same strings in `agree score` and in the report
    from rich.console import Console

    import agree.cli.score as score_command
    from agree import score
    from agree.core.format import format_interval, format_value

    data = read(SAMPLES / "round2.csv", codebook=SAMPLES / "codebook.csv")
    report = build_report(data, n_resamples=200, seed=9)
    scored = score(data, n_resamples=200, seed=9, minimum=0.8)
    console = Console(width=250, file=io.StringIO(), record=True)
    monkeypatch.setattr(score_command, "stdout", console)
    score_command.print_score(scored)
    printed = console.export_text()
    cells = {plain(c.text) for c in report_tables(report)[0].rows[0]}
    alpha = scored.coefficients["krippendorff_alpha"]
    for text in (format_value(alpha.estimate), format_value(alpha.se, "se"),
                 format_interval(alpha.ci_low, alpha.ci_high)):
        assert text in printed and text in cells
