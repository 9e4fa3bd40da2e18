"""The HTML report in a real browser, and every format read back against Report.to_dict().

- Headless Chromium loads the self-contained HTML with an inline probe script (added to a
  copy of the report) that records load errors and checks that every image decodes
  (naturalWidth > 0), then writes the verdict into document.title, read back from
  --dump-dom. The report also prints to PDF. Skipped when Chromium is not installed
  (`.ci/run` installs it).
- The DOCX is read back with python-docx and the HTML with html.parser (standard library):
  every number in every table equals the JSON value (Report.to_dict()) it came from, up to
  the rounding shown.
"""

from __future__ import annotations

import re
import shutil
import subprocess
from html.parser import HTMLParser
from pathlib import Path

import pandas as pd
import pytest

from agree.analysis.rounds import split_rounds
from agree.io.readers import read
from agree.output.report import build_report, plain, report_tables, write_report

SAMPLES = Path(__file__).resolve().parents[2] / "samples"
CHROMIUM = shutil.which("chromium") or ("/usr/bin/chromium" if Path("/usr/bin/chromium").exists() else None)

PROBE = """<script>
window.__errors = [];
window.addEventListener('error', function (e) {
  window.__errors.push(e.message || (e.target && e.target.tagName) || 'error');
}, true);
window.addEventListener('load', function () {
  var imgs = Array.prototype.slice.call(document.images);
  var bad = imgs.filter(function (i) { return !(i.complete && i.naturalWidth > 0); }).length;
  var ok = window.__errors.length === 0 && bad === 0;
  document.title = (ok ? 'ok ' : 'fail ') + imgs.length + ' bad ' + bad + ' errors ' + window.__errors.join('|');
});
</script>"""


@pytest.fixture(scope="module")
def full_report():
    """Rounds, a consensus file and every table: the richest report the samples give."""
    data = read(SAMPLES / "rounds_long.csv", codebook=SAMPLES / "codebook.csv", keep=["round"])
    final = data.subset(data.columns["round"].astype(str) == "2")
    n = final.n_units
    consensus = pd.DataFrame({"unit": list(map(str, final.unit_ids)), "final code": "Belonging",
                              "source": ["agreed"] * (n - 30) + ["decided"] * 25 + ["majority"] * 5})
    return build_report(None, rounds=split_rounds(data), n_resamples=300, seed=17, corpus_size=600, consensus=consensus,
                        title="Agreement & reliability <test>")


def _chromium(args: list[str], profile: Path) -> subprocess.CompletedProcess:
    base = [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
            "--disable-background-networking", "--disable-component-update", "--disable-sync",
            f"--user-data-dir={profile}", "--virtual-time-budget=10000"]
    return subprocess.run(base + args, capture_output=True, text=True, timeout=120)


@pytest.mark.skipif(CHROMIUM is None, reason="chromium is not installed (.ci/run installs it)")
def test_html_report_loads_in_a_browser_and_every_image_decodes(full_report, tmp_path):
    path = tmp_path / "report.html"
    write_report(full_report, path)
    text = path.read_text(encoding="utf-8")
    n_images = text.count("<img ")
    assert n_images == 4                      # forest, confusion, code use, rounds
    probe = tmp_path / "probe.html"
    probe.write_text(text.replace("<head>", "<head>" + PROBE, 1), encoding="utf-8")
    proc = _chromium(["--dump-dom", probe.as_uri()], tmp_path / "profile")
    assert proc.returncode == 0, proc.stderr[-2000:]
    title = re.search(r"<title>(.*?)</title>", proc.stdout, re.S)
    assert title is not None, proc.stdout[:500]
    assert title.group(1) == f"ok {n_images} bad 0 errors "
    # prints: a non-empty PDF through the @media print rules
    pdf = tmp_path / "report.pdf"
    proc = _chromium(["--no-pdf-header-footer", f"--print-to-pdf={pdf}", path.as_uri()], tmp_path / "profile2")
    assert pdf.exists() and pdf.read_bytes()[:5] == b"%PDF-" and pdf.stat().st_size > 10_000


# -- numbers read back ---------------------------------------------------------------------

def _lookup(tree, path: str):
    node = tree
    for part in path.split("."):
        node = node[int(part)] if isinstance(node, list) else node[part]
    return node


def _numbers(text: str) -> list[float | None]:
    """The numbers shown in a cell: '−.12' -> -0.12, '[.72, .84]' -> two, '–' -> None."""
    text = text.replace("\u2212", "-").replace(",", "") if "[" not in text else text.replace("\u2212", "-")
    if text.strip() in ("–", ""):
        return [None]
    if text in ("yes", "no"):
        return [text == "yes"]
    found = re.findall(r"-?\d*\.?\d+", text.replace("< ", ""))
    values = [float(x) for x in found]
    if text.endswith("%"):
        values = [v / 100 for v in values]
    return values


def _decimals(text: str) -> int:
    parts = re.findall(r"\.(\d+)", text)
    return min((len(p) for p in parts), default=0)


def _check_cell(text: str, paths: tuple[str, ...], tree) -> None:
    shown = _numbers(text)
    expected = [_lookup(tree, p) for p in paths]
    if len(paths) == 2 and shown == [None]:
        assert expected[0] is None or expected[1] is None
        return
    assert len(shown) == len(expected), (text, paths)
    tolerance = 0.5 * 10 ** -_decimals(text) / (100 if text.endswith("%") else 1) + 1e-9
    for s, e in zip(shown, expected):
        if s is None or e is None:
            assert s is None and e is None, (text, paths, e)
        elif isinstance(e, bool):
            assert s == e
        elif text.startswith("< "):
            assert 0 <= e < s
        else:
            assert abs(s - e) <= tolerance, (text, paths, e)


class _Cells(HTMLParser):
    """Every <td> of the HTML with its data-field attribute and its text."""

    def __init__(self):
        super().__init__()
        self.cells: list[tuple[str | None, str]] = []
        self._field = None
        self._text: list[str] | None = None

    def handle_starttag(self, tag, attrs):
        if tag == "td":
            self._field = dict(attrs).get("data-field")
            self._text = []

    def handle_data(self, data):
        if self._text is not None:
            self._text.append(data)

    def handle_endtag(self, tag):
        if tag == "td" and self._text is not None:
            self.cells.append((self._field, "".join(self._text)))
            self._text = None


def test_html_numbers_equal_the_json(full_report, tmp_path):
    path = tmp_path / "report.html"
    write_report(full_report, path)
    tree = full_report.to_dict()
    parser = _Cells()
    parser.feed(path.read_text(encoding="utf-8"))
    fields = [(f, t) for f, t in parser.cells if f]
    assert len(fields) > 100
    checked = set()
    for field, text in fields:
        _check_cell(text, tuple(field.split(" ")), tree)
        checked.add(field.split(".")[0])
    assert {"coefficients", "per_code", "code_use", "rounds", "consensus", "confused_pairs"} <= checked
    # the methods paragraph in the HTML is the JSON's, word for word
    methods = re.sub(r"<[^>]+>", "", path.read_text(encoding="utf-8").split('<div class="methods"><p>')[1]
                     .split("</p>")[0])
    import html as _html
    assert _html.unescape(methods) == tree["methods"]


def test_docx_numbers_equal_the_json(full_report, tmp_path):
    from docx import Document

    path = tmp_path / "report.docx"
    write_report(full_report, path)
    doc = Document(str(path))
    tree = full_report.to_dict()
    tables = report_tables(full_report)
    assert len(doc.tables) == len(tables)
    for word_table, table in zip(doc.tables, tables):
        rows = word_table.rows
        assert [c.text for c in rows[0].cells] == [plain(h) for h in table.header]
        assert len(rows) == len(table.rows) + 1
        for word_row, row in zip(rows[1:], table.rows):
            for word_cell, cell in zip(word_row.cells, row):
                assert word_cell.text == plain(cell.text)
                if cell.paths:
                    _check_cell(word_cell.text, cell.paths, tree)
    assert len(doc.inline_shapes) == 4            # the plots, as pictures
    body = "\n".join(p.text for p in doc.paragraphs)
    assert tree["methods"] in body
    # placeholders are highlighted runs, symbols italic
    runs = [r for p in doc.paragraphs for r in p.runs]
    assert any(r.text.startswith("[") and r.font.highlight_color is not None for r in runs)
    assert any(r.text == "N" and r.italic for r in runs)
