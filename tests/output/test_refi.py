"""Writing spans back: a consensus added to the original package as one more user, a new project
from a span table, and span tables; every package checked against the standard's Project schema
(tests/io/schemas/) and read back."""

from __future__ import annotations

import zipfile
from pathlib import Path

import pandas as pd
import pytest
import xmlschema

from agree.core.errors import AgreeError
from agree.io.refi import read_project
from agree.io.spans import read_spans
from agree.output.refi import write_project
from agree.output.spans import write_spans
from tests.io import projects as P

SCHEMAS = Path(__file__).resolve().parents[1] / "io" / "schemas"
PROJECT_SCHEMA = xmlschema.XMLSchema10(str(SCHEMAS / "Project-mrt2019.xsd"))


def rows(data):
    return sorted(map(tuple, data.table().itertuples(index=False, name=None)))


def project_xml(path: Path) -> str:
    with zipfile.ZipFile(path) as z:
        name = next(n for n in z.namelist() if n.lower().endswith(".qde"))
        return z.read(name).decode("utf-8")


def assert_valid(path: Path) -> None:
    PROJECT_SCHEMA.validate(project_xml(path))


@pytest.fixture
def original(tmp_path):
    return P.standard_qdpx(tmp_path / "bakery.qdpx")


def test_hand_written_fixtures_are_valid_projects(original):
    assert_valid(original)


def test_consensus_is_one_added_user_and_the_rest_is_untouched(tmp_path, original):
    read = read_project(original)
    consensus = read.subset_coders(["Iris"])  # stands in for a reconciled coding
    out = write_project(consensus, tmp_path / "settled.qdpx", project=original)
    assert_valid(out)
    back = read_project(out)
    assert back.coders == ("Iris", "Tomás", "consensus")
    assert rows(back.subset_coders(["Iris", "Tomás"])) == rows(read) == P.expected_rows()
    assert [(d, k, s, e) for d, _, k, s, e in rows(back.subset_coders(["consensus"]))] == \
        [(d, k, s, e) for d, _, k, s, e in rows(consensus)]
    # the sources are copied byte for byte, the original selections and users are all still there
    with zipfile.ZipFile(original) as a, zipfile.ZipFile(out) as b:
        for name in a.namelist():
            if name != "project.qde":
                assert a.read(name) == b.read(name)
    new_xml = project_xml(out)
    import xml.etree.ElementTree as ET
    ns = {"p": P.NS}
    before = ET.fromstring(project_xml(original))
    after = ET.fromstring(new_xml)
    old = {s.get("guid"): s.attrib for s in before.iterfind(".//p:PlainTextSelection", ns)}
    new = {s.get("guid"): s.attrib for s in after.iterfind(".//p:PlainTextSelection", ns)}
    assert all(new[g] == attrs for g, attrs in old.items()) and len(new) == len(old) + 5
    added = [u for u in after.iterfind("p:Users/p:User", ns) if u.get("name") == "consensus"]
    assert len(added) == 1 and added[0].get("guid") not in {u.get("guid") for u in before.iterfind(".//p:User", ns)}
    # each added selection names its text: the name check confirms the positions
    assert any(n.startswith("name check: 15 of 15") for n in back.report.notes)


def test_written_conventions_read_back_with_the_same_options(tmp_path, original):
    consensus = read_project(original).subset_coders(["Tomás"])
    for options in (dict(span_end="inclusive"), dict(crlf="one"), dict(positions="utf-16"),
                    dict(span_end="inclusive", crlf="one", positions="utf-16")):
        out = write_project(consensus, tmp_path / "c.qdpx", force=True, **options)
        assert_valid(out)
        assert rows(read_project(out, **options)) == rows(consensus), options


def test_new_project_from_a_span_table(tmp_path):
    docs = P.text_folder(tmp_path / "texts")
    pd.DataFrame(P.span_rows()).to_csv(tmp_path / "spans.csv", index=False)
    table = read_spans(tmp_path / "spans.csv", documents_dir=docs)
    out = write_project(table, tmp_path / "new.qdpx")
    assert_valid(out)
    back = read_project(out)
    assert rows(back) == rows(table) and back.texts == table.texts
    assert back.codes == table.codes and back.parents.tolist() == table.parents.tolist()


def test_a_bare_qde_gives_a_package_with_its_sources(tmp_path):
    (tmp_path / "sources").mkdir()
    for d, g in P.DOCS.items():
        (tmp_path / "sources" / f"{g}.txt").write_bytes(P.TEXTS[d].encode("utf-8"))
    qde = tmp_path / "bakery.qde"
    qde.write_text(P.project_xml(P.standard_sources()), encoding="utf-8")
    consensus = read_project(qde).subset_coders(["Iris"])
    out = write_project(consensus, tmp_path / "out.qdpx", project=qde)
    assert_valid(out)
    assert read_project(out).coders == ("Iris", "Tomás", "consensus")


def test_refusals(tmp_path, original):
    read = read_project(original)
    one = read.subset_coders(["Iris"])
    with pytest.raises(AgreeError, match="refusing to overwrite the input"):
        write_project(one, original, project=original)
    with pytest.raises(AgreeError, match="one coder's spans; got 2"):
        write_project(read, tmp_path / "x.qdpx", project=original)
    with pytest.raises(AgreeError, match="already has a user named 'Iris'"):
        write_project(one, tmp_path / "x.qdpx", project=original, coder="Iris")
    with pytest.raises(AgreeError, match=r"written as \.qdpx"):
        write_project(one, tmp_path / "x.zip", project=original)
    (tmp_path / "exists.qdpx").write_bytes(b"")
    with pytest.raises(AgreeError, match="already exists"):
        write_project(one, tmp_path / "exists.qdpx", project=original)
    from dataclasses import replace
    changed = replace(one, texts=("X" * len(one.texts[0]), one.texts[1]))
    with pytest.raises(AgreeError, match="differs from the project's source"):
        write_project(changed, tmp_path / "x.qdpx", project=original)
    stranger = replace(one, documents=("Baker Q", "Baker B"), document_guids=None)
    with pytest.raises(AgreeError, match="document 'Baker Q' is not in the project"):
        write_project(stranger, tmp_path / "x.qdpx", project=original)
    assert not (tmp_path / "x.qdpx").exists()


@pytest.mark.parametrize("suffix", ["csv", "xlsx", "parquet"])
def test_span_tables_read_back(tmp_path, original, suffix):
    read = read_project(original)
    out = write_spans(read, tmp_path / f"spans.{suffix}")
    docs = P.text_folder(tmp_path / "texts")
    back = read_spans(out, documents_dir=docs)
    assert rows(back) == rows(read)
    assert any("excerpts in 'excerpt' match the text at the offsets (10 checked)" == n for n in back.report.notes)
    inclusive = write_spans(read, tmp_path / f"incl.{suffix}", span_end="inclusive")
    assert rows(read_spans(inclusive, documents_dir=docs, span_end="inclusive")) == rows(read)


def test_formula_like_excerpts_stay_text(tmp_path):
    docs = tmp_path / "texts"
    docs.mkdir()
    (docs / "memo.txt").write_text("=SUM(A1) is not a formula here", encoding="utf-8")
    pd.DataFrame([dict(document="memo", coder="Iris", code="Work", start=0, end=8)]).to_csv(tmp_path / "s.csv",
                                                                                           index=False)
    data = read_spans(tmp_path / "s.csv", documents_dir=docs)
    csv_out = write_spans(data, tmp_path / "out.csv")
    assert "'=SUM(A1)" in csv_out.read_text(encoding="utf-8")
    xlsx_out = write_spans(data, tmp_path / "out.xlsx")
    import openpyxl
    cell = openpyxl.load_workbook(xlsx_out).active["F2"]
    assert cell.value == "=SUM(A1)" and cell.data_type == "s"
    with pytest.raises(AgreeError, match="cannot write a span table as 'json'"):
        write_spans(data, tmp_path / "out.json")


def test_the_hand_written_projects_of_the_reader_tests_are_valid(tmp_path):
    from tests.io.test_refi import _crlf_as_one

    assert_valid(P.standard_qdpx(tmp_path / "a.qdpx", end_offset=-1, names=False, count=_crlf_as_one))
    sels = [P.Selection(0, 5, [(None, P.CODES["Work"])], user=P.CODERS["Iris"], name="x")]
    xml = P.project_xml(P.text_source(P.DOCS["Baker A"], "Baker A", sels, inline="Flour\r\neverywhere",
                                      whole=[(P.CODERS["Iris"], P.CODES["Work"])]))
    assert_valid(P.write_qdpx(tmp_path / "b.qdpx", xml, {}))


def test_a_consensus_table_is_written_into_its_project(tmp_path, original):
    read = read_project(original)
    table = read.subset_coders(["Tomás"]).table().assign(coder="consensus", source="decided")
    out = write_project(table, tmp_path / "settled.qdpx", project=original)
    assert_valid(out)
    back = read_project(out)
    assert [r[:1] + r[2:] for r in rows(back.subset_coders(["consensus"]))] == \
        [r[:1] + r[2:] for r in rows(read.subset_coders(["Tomás"]))]
    with pytest.raises(AgreeError, match="unknown code"):
        write_project(table.assign(code="Nope"), tmp_path / "bad.qdpx", project=original)
    with pytest.raises(AgreeError, match="give project="):
        write_project(table, tmp_path / "bad.qdpx")


def test_the_added_user_is_written_into_the_original_bytes(tmp_path, original):
    """The project XML is copied byte for byte: taking out the added user and its selections gives
    the original back. A layout the splice does not handle (a prefixed namespace) is rebuilt from the
    parsed tree instead and reads back to the same spans."""
    import re

    read = read_project(original)
    out = write_project(read.subset_coders(["Iris"]), tmp_path / "settled.qdpx", project=original)
    new = project_xml(out)
    guid = re.search(r'<User guid="([^"]+)" name="consensus" />', new).group(1)
    stripped = re.sub(rf'<PlainTextSelection [^>]*creatingUser="{guid}"[^>]*>.*?</PlainTextSelection>', "", new,
                      flags=re.S).replace(f'<User guid="{guid}" name="consensus" />', "")
    assert stripped == project_xml(original)

    prefixed = re.sub(r"<(/?)(?=[A-Za-z])", r"<\1q:", project_xml(original).split("\n", 1)[1])
    prefixed = prefixed.replace(f'xmlns="{P.NS}"', f'xmlns:q="{P.NS}"')
    other = P.write_qdpx(tmp_path / "prefixed.qdpx", prefixed)
    assert read_project(other).table().equals(read.table())
    out = write_project(read.subset_coders(["Iris"]), tmp_path / "settled2.qdpx", project=other)
    assert_valid(out)
    back = read_project(out)
    assert rows(back.subset_coders(["Iris", "Tomás"])) == rows(read)
    assert [r[:1] + r[2:] for r in rows(back.subset_coders(["consensus"]))] == \
        [r[:1] + r[2:] for r in rows(read.subset_coders(["Iris"]))]
