"""Reading REFI-QDA projects: hand-written packages (tests/io/projects.py) with offsets computed
here by str.find on the texts, the standard's ambiguities read both ways, and hostile packages."""

from __future__ import annotations

import os
import zipfile
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from agree.core.errors import AgreeError
from agree.io.refi import read_project
from agree.io.spans import read_spans
from tests.io import projects as P


def rows(data):
    return sorted(map(tuple, data.table().itertuples(index=False, name=None)))


def test_standard_project_reads_the_coders_codes_and_spans(tmp_path):
    data = read_project(P.standard_qdpx(tmp_path / "bakery.qdpx"))
    assert data.coders == ("Iris", "Tomás")
    assert data.documents == ("Baker A", "Baker B")
    assert data.texts == (P.TEXTS["Baker A"], P.TEXTS["Baker B"])
    assert data.codes == ("Work", "Work/Night shift", "Work/Craft", "Feelings", "Feelings/Pride", "Feelings/Fatigue")
    assert data.parents.tolist() == [-1, 0, 0, -1, 3, 3]
    assert rows(data) == P.expected_rows()
    # GUIDs normalised: braces gone, lower case
    assert data.coder_guids == ("7f0c1a52-0d4b-4c6e-9d2a-1b3c4d5e6f70", "8a1d2b63-1e5c-4d7f-8e3b-2c4d5e6f7081")
    assert data.code_guids == tuple(P.CODES.values()) and data.document_guids == tuple(P.DOCS.values())
    assert data.coverage == "inferred" and data.coded.all()
    report = data.report
    assert report.detected.startswith("REFI-QDA project 'Night bakery'")
    assert "10 spans by 2 coders (Iris, Tomás) over 2 text sources" in report.detected
    assert "end exclusive" in report.detected
    assert any("CRLF" in n and "two characters" in n for n in report.notes)
    assert any("outside the Basic Multilingual Plane" in n for n in report.notes)
    assert any(n.startswith("name check: 10 of 10") for n in report.notes)
    assert any("10 by the coding's creatingUser" in n for n in report.notes)


def test_the_emoji_and_crlf_are_one_and_two_code_points(tmp_path):
    data = read_project(P.standard_qdpx(tmp_path / "bakery.qdpx"))
    text = data.texts[0]
    # hand count: line 1 is 52 characters + CR + LF; "Baker A: " is 9; "The dough doesn't wait " is 23
    # characters, then the croissant (one code point), a space, an em dash and 22 more characters
    assert text.index("The dough") == 52 + 2 + 9
    assert text[63 + 23] == "🥐" and len("🥐") == 1 and len("🥐".encode("utf-16-le")) == 4
    craft = data.table().query("coder == 'Iris' and code == 'Work/Craft' and document == 'Baker A'")
    assert craft[["start", "end"]].values.tolist() == [[63, 63 + 48]]


def test_span_table_and_package_give_the_same_spans(tmp_path):
    docs = P.text_folder(tmp_path / "texts")
    pd.DataFrame(P.span_rows()).to_csv(tmp_path / "spans.csv", index=False)
    table = read_spans(tmp_path / "spans.csv", documents_dir=docs)
    package = read_project(P.standard_qdpx(tmp_path / "bakery.qdpx"))
    assert rows(table) == rows(package)
    assert table.documents == package.documents and table.texts == package.texts
    assert table.lengths.tolist() == package.lengths.tolist()
    assert (table.coded == package.coded).all()
    # the parents agree once codes are named by their paths
    parent = lambda d: {c: (d.codes[p] if p >= 0 else None) for c, p in zip(d.codes, d.parents)}
    used = set(table.codes)
    assert {k: v for k, v in parent(package).items() if k in used} == parent(table)


def test_inclusive_ends_read_with_span_end_inclusive(tmp_path):
    path = P.standard_qdpx(tmp_path / "inclusive.qdpx", end_offset=-1)
    assert rows(read_project(path, span_end="inclusive")) == P.expected_rows()
    wrong = read_project(path)  # read as exclusive: every span one character short, and the name check says so
    assert all(e == e2 - 1 for (*_, e), (*_, e2) in zip(rows(wrong), P.expected_rows()))
    assert any("warning" in n and "span_end='inclusive'" in n for n in wrong.report.notes)


def _crlf_as_one(doc: str, position: int) -> int:
    return position - P.TEXTS[doc][:position].count("\r\n")


def _utf16_units(doc: str, position: int) -> int:
    return len(P.TEXTS[doc][:position].encode("utf-16-le")) // 2


def test_positions_of_software_counting_crlf_once(tmp_path):
    path = P.standard_qdpx(tmp_path / "lf.qdpx", count=_crlf_as_one)
    assert rows(read_project(path, crlf="one")) == P.expected_rows()
    default = read_project(path)
    assert rows(default) != P.expected_rows()
    assert any("crlf='one'" in n and "warning" in n for n in default.report.notes)


def test_positions_of_software_counting_utf16_units(tmp_path):
    path = P.standard_qdpx(tmp_path / "utf16.qdpx", count=_utf16_units)
    assert rows(read_project(path, positions="utf-16")) == P.expected_rows()
    default = read_project(path)
    # read as code points, only positions after the emoji are one late: the end of Iris's Craft span
    # (the emoji is inside it) and both Pride spans of Baker A
    emoji = P.TEXTS["Baker A"].index("🥐")
    late = [(d, c, k, s + (s > emoji), e + (e > emoji)) if d == "Baker A" else (d, c, k, s, e)
            for d, c, k, s, e in P.expected_rows()]
    assert rows(default) == sorted(late)
    assert {r[2] for r in set(late) - set(P.expected_rows())} == {"Work/Craft", "Feelings/Pride"}
    assert any("positions='utf-16'" in n for n in default.report.notes)


def test_both_counts_combined(tmp_path):
    path = P.standard_qdpx(tmp_path / "both.qdpx", count=lambda d, p: _utf16_units(d, p) - P.TEXTS[d][:p].count("\r\n"))
    assert rows(read_project(path, positions="utf-16", crlf="one")) == P.expected_rows()


def test_bare_qde_with_its_sources_folder_in_other_letter_case(tmp_path):
    (tmp_path / "Sources").mkdir()
    for d, g in P.DOCS.items():
        (tmp_path / "Sources" / f"{g.upper()}.TXT").write_bytes(P.TEXTS[d].encode("utf-8"))
    qde = tmp_path / "bakery.qde"
    qde.write_text(P.project_xml(P.standard_sources()), encoding="utf-8")
    assert rows(read_project(qde)) == P.expected_rows()


def test_byte_order_mark_is_removed_and_reported(tmp_path):
    files = {f"{g}.txt": b"\xef\xbb\xbf" + P.TEXTS[d].encode("utf-8") for d, g in P.DOCS.items()}
    data = read_project(P.write_qdpx(tmp_path / "bom.qdpx", P.project_xml(P.standard_sources()), files))
    assert rows(data) == P.expected_rows() and data.texts[0] == P.TEXTS["Baker A"]
    assert any("byte-order mark" in n for n in data.report.notes)


def test_coder_attribution_order(tmp_path):
    iris, tomas = P.CODERS["Iris"], P.CODERS["Tomás"]
    code = P.CODES["Work/Craft"]
    sels = [P.Selection(0, 5, [(iris, code)], user=tomas),  # the coding's user wins
            P.Selection(6, 10, [(None, code)], user=tomas),  # else the selection's
            P.Selection(11, 15, [(None, code)])]  # else the file's coder, else unknown
    xml = P.project_xml(P.text_source(P.DOCS["Baker A"], "Baker A", sels, path=f"internal://{P.DOCS['Baker A']}.txt"))
    path = P.write_qdpx(tmp_path / "who.qdpx", xml)
    data = read_project(path)
    assert rows(data) == [("Baker A", "Iris", "Work/Craft", 0, 5), ("Baker A", "Tomás", "Work/Craft", 6, 10),
                          ("Baker A", "unknown", "Work/Craft", 11, 15)]
    note = next(n for n in data.report.notes if n.startswith("coder of each coding"))
    assert "1 by the coding's creatingUser; 1 by the selection's creatingUser; 1 by none" in note
    named = read_project(path, coder="Ulla")
    assert ("Baker A", "Ulla", "Work/Craft", 11, 15) in rows(named)


def test_user_named_by_id_then_guid_and_unknown_users(tmp_path):
    users = {"": "11111111-2222-4333-8444-555555555555"}
    stranger = "99999999-2222-4333-8444-555555555555"
    xml = P.project_xml(P.text_source(P.DOCS["Baker B"], "Baker B", [
        P.Selection(0, 6, [(users[""], P.CODES["Work/Craft"])]),
        P.Selection(0, 6, [(stranger, P.CODES["Work/Craft"])])], path=f"internal://{P.DOCS['Baker B']}.txt"),
        users={"": users[""]}).replace('name=""', 'id="login-7"')
    data = read_project(P.write_qdpx(tmp_path / "ids.qdpx", xml))
    assert data.coders == ("login-7", f"unknown user {stranger}")


def test_dangling_codes_missing_files_and_other_sources_are_reported(tmp_path):
    iris = P.CODERS["Iris"]
    sels = [P.Selection(0, 5, [(iris, "a0000000-0000-4000-8000-0000000000ff"), (iris, P.CODES["Work"])])]
    sources = (P.text_source(P.DOCS["Baker A"], "Baker A", sels, path=f"internal://{P.DOCS['Baker A']}.txt")
               + P.text_source(P.DOCS["Baker B"], "Baker B", [P.Selection(2, 9, [(iris, P.CODES["Work"])])],
                               path="internal://missing.txt")
               + '<PictureSource guid="e0000000-0000-4000-8000-000000000001" name="oven photo" path="internal://o.jpg">'
                 '<PictureSelection guid="e0000000-0000-4000-8000-000000000002" firstX="0" firstY="9" secondX="5" '
                 'secondY="1"><Coding guid="e0000000-0000-4000-8000-000000000003"><CodeRef '
                 f'targetGUID="{P.CODES["Work"]}"/></Coding></PictureSelection></PictureSource>'
               + '<AudioSource guid="e0000000-0000-4000-8000-000000000004" name="night.m4a" path="relative://n.m4a"/>')
    data = read_project(P.write_qdpx(tmp_path / "mixed.qdpx", P.project_xml(sources)))
    left = " | ".join(data.report.left_out)
    assert "1 coding(s) refer to codes missing from the code book" in left and "0000000000ff" in left
    assert "2 source(s) that are not text skipped (1 coding(s) in them): 'oven photo (picture)', " \
           "'night.m4a (audio)'" in left
    assert "missing from the package" in left and "missing.txt" in left
    # the source without its text is still compared position by position
    assert rows(data) == [("Baker A", "Iris", "Work", 0, 5), ("Baker B", "Iris", "Work", 2, 9)]
    assert data.texts[1] is None and data.lengths[1] == 9


def test_whole_source_codings_cover_the_text_and_are_flagged(tmp_path):
    iris = P.CODERS["Iris"]
    xml = P.project_xml(P.text_source(P.DOCS["Baker B"], "Baker B", [], path=f"internal://{P.DOCS['Baker B']}.txt",
                                      whole=[(iris, P.CODES["Work"])]))
    data = read_project(P.write_qdpx(tmp_path / "whole.qdpx", xml))
    assert rows(data) == [("Baker B", "Iris", "Work", 0, len(P.TEXTS["Baker B"]))]
    assert any(n.startswith("flag: 1 coding(s) apply to a whole source") for n in data.report.notes)


def test_inline_text_and_not_codable_codes(tmp_path):
    iris = P.CODERS["Iris"]
    text = "Flour everywhere, ça va."
    xml = P.project_xml(P.text_source(P.DOCS["Baker A"], "Baker A",
                                      [P.Selection(0, 5, [(iris, P.CODES["Feelings"])])], inline=text))
    data = read_project(P.write_qdpx(tmp_path / "inline.qdpx", xml, {}))
    assert data.texts == (text,) and rows(data) == [("Baker A", "Iris", "Feelings", 0, 5)]
    assert any("marked not codable" in n for n in data.report.notes)


def test_code_depth_rolls_up_to_the_parents(tmp_path):
    data = read_project(P.standard_qdpx(tmp_path / "bakery.qdpx"), code_depth=1)
    assert data.codes == ("Work", "Feelings")
    assert data.code_guids == (P.CODES["Work"], P.CODES["Feelings"])
    assert len(rows(data)) == 10 and {r[2] for r in rows(data)} == {"Work", "Feelings"}


def test_bad_positions_are_left_out_and_counted_and_repeats_counted_once(tmp_path):
    iris, code = P.CODERS["Iris"], P.CODES["Work"]
    sels = [P.Selection(-1, 4, [(iris, code)]), P.Selection(9, 3, [(iris, code)]), P.Selection(0, 10_000, [(iris, code)]),
            P.Selection(4, 4, [(iris, code)]), P.Selection(1, 8, [(iris, code)]), P.Selection(1, 8, [(iris, code)])]
    xml = P.project_xml(P.text_source(P.DOCS["Baker A"], "Baker A", sels, path=f"internal://{P.DOCS['Baker A']}.txt"))
    data = read_project(P.write_qdpx(tmp_path / "bad.qdpx", xml))
    assert rows(data) == [("Baker A", "Iris", "Work", 1, 8)]
    left = " | ".join(data.report.left_out)
    for what in ("1 selection(s) with a negative start", "1 selection(s) with an end before the start",
                 "1 selection(s) with an end past the end of the text", "1 empty selection(s)",
                 "1 repeated coding(s)"):
        assert what in left, what


@pytest.mark.parametrize("namespace", ["urn:QDA-XML:project:0:10", None])
def test_other_project_namespaces_are_read_with_a_warning(tmp_path, namespace):
    xml = P.project_xml(P.standard_sources(), namespace=namespace)
    data = read_project(P.write_qdpx(tmp_path / "ns.qdpx", xml))
    assert rows(data) == P.expected_rows()
    assert any(n.startswith("warning") and "namespace" in n for n in data.report.notes)


def test_project_xml_in_a_wrapping_folder(tmp_path):
    path = P.write_qdpx(tmp_path / "wrapped.qdpx", P.project_xml(P.standard_sources()),
                        qde_name="Export/Project.qde", folder="Export/Sources")
    data = read_project(path)
    assert rows(data) == P.expected_rows()
    assert any("inside a folder" in n for n in data.report.notes)


# -- hostile and mistaken files: refused with one clear line, nothing written ------------------------
def _listing(*folders: Path) -> set:
    return {str(p) for f in folders for p in f.rglob("*")}


def _refused(path: Path, match: str, **kw) -> AgreeError:
    before = _listing(path.parent, Path.cwd())
    with pytest.raises(AgreeError, match=match) as info:
        read_project(path, **kw)
    assert _listing(path.parent, Path.cwd()) == before
    assert "\n" not in str(info.value)
    return info.value


BILLION_LAUGHS = ('<?xml version="1.0"?>\n<!DOCTYPE Project [<!ENTITY a "ha">'
                  + "".join(f'<!ENTITY {chr(98 + i)} "{("&" + chr(97 + i) + ";") * 10}">' for i in range(9))
                  + f']>\n<Project xmlns="{P.NS}" name="&j;"/>')


def test_billion_laughs_is_refused(tmp_path):
    err = _refused(P.write_qdpx(tmp_path / "laughs.qdpx", BILLION_LAUGHS, {}), "refused: the project XML declares")
    assert err.code == "unsafe-xml"


def test_external_entity_is_refused(tmp_path):
    secret = tmp_path / "secret.txt"
    secret.write_text("do not read me")
    xml = (f'<?xml version="1.0"?>\n<!DOCTYPE Project [<!ENTITY x SYSTEM "file://{secret}">]>\n'
           f'<Project xmlns="{P.NS}" name="&x;"/>')
    _refused(P.write_qdpx(tmp_path / "xxe.qdpx", xml, {}), "external references|declares entities")
    qde = tmp_path / "xxe.qde"
    qde.write_text(xml)
    _refused(qde, "refused")


def test_oversized_entry_is_refused_before_it_is_unpacked(tmp_path):
    path = tmp_path / "bomb.qdpx"
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as z:
        z.writestr("project.qde", P.project_xml(P.standard_sources()).encode())
        z.writestr(f"sources/{P.DOCS['Baker A']}.txt", b" " * (8 << 20))  # 8 MiB of spaces, ~8 KiB packed
        z.writestr(f"sources/{P.DOCS['Baker B']}.txt", P.TEXTS["Baker B"].encode())
    assert path.stat().st_size < 100_000
    err = _refused(path, "exceed the limit of 4 MiB", max_bytes=4 << 20)
    assert err.code == "too-large" and "max_bytes" in err.hint


def test_an_entry_that_lies_about_its_size_is_still_capped(tmp_path):
    path = tmp_path / "liar.qdpx"
    P.standard_qdpx(path)
    raw = bytearray(path.read_bytes())
    # shrink the declared size of project.qde in the central directory and the local header
    info = zipfile.ZipFile(path).getinfo("project.qde")
    for offset in (raw.find(b"PK\x01\x02"), info.header_offset):
        at = offset + (24 if raw[offset:offset + 4] == b"PK\x01\x02" else 22)
        raw[at:at + 4] = (10).to_bytes(4, "little")
    path.write_bytes(bytes(raw))
    _refused(path, "damaged|not well-formed|exceed")


def test_too_many_entries_are_refused(tmp_path):
    files = {f"{i}.txt": b"x" for i in range(30)}
    path = P.write_qdpx(tmp_path / "many.qdpx", P.project_xml(""), files)
    err = _refused(path, "31 entries, more than the limit of 20", max_entries=20)
    assert err.code == "too-many-entries"


def test_traversal_names_are_ignored_and_nothing_is_written(tmp_path):
    files = {f"{g}.txt": P.TEXTS[d].encode() for d, g in P.DOCS.items()}
    path = P.write_qdpx(tmp_path / "trav.qdpx", P.project_xml(P.standard_sources()), files)
    with zipfile.ZipFile(path, "a") as z:
        for name in ("../../evil.txt", "/etc/evil.txt", "C:/evil.txt", "sources/..\\..\\evil.txt"):
            z.writestr(name, b"evil")
    before = _listing(tmp_path, Path.cwd())
    data = read_project(path)
    assert _listing(tmp_path, Path.cwd()) == before
    assert rows(data) == P.expected_rows()
    assert any("4 package entries ignored: the name would escape" in n for n in data.report.left_out)


def test_internal_path_that_escapes_the_sources_folder_is_not_followed(tmp_path):
    iris = P.CODERS["Iris"]
    xml = P.project_xml(P.text_source(P.DOCS["Baker A"], "Baker A", [P.Selection(0, 3, [(iris, P.CODES["Work"])])],
                                      path="internal://../project.qde"))
    data = read_project(P.write_qdpx(tmp_path / "esc.qdpx", xml))
    assert data.texts == (None,)
    assert any("unsafe name" in n for n in data.report.left_out)


@pytest.mark.parametrize("content, match", [
    (b"document,coder,code,start,end\nA,ana,x,0,3\n", "content is plain text \\(a CSV"),
    (b"PK\x03\x04 this is no zip at all", "not a readable zip archive"),
    (b"%PDF-1.4 ...", "content is a PDF"),
])
def test_a_file_that_is_not_a_package_is_refused(tmp_path, content, match):
    path = tmp_path / "project.qdpx"
    path.write_bytes(content)
    err = _refused(path, match)
    assert err.code in ("not-a-project", "corrupt-package")


def test_a_zip_that_is_not_a_project_is_refused(tmp_path):
    path = tmp_path / "photos.qdpx"
    with zipfile.ZipFile(path, "w") as z:
        z.writestr("holiday.jpg", b"\xff\xd8\xff")
        z.writestr("notes.txt", b"hello")
    _refused(path, "not a REFI-QDA project package: the zip holds no project.qde")


def test_a_truncated_package_is_refused(tmp_path):
    path = P.standard_qdpx(tmp_path / "cut.qdpx")
    path.write_bytes(path.read_bytes()[:300])
    _refused(path, "not a readable zip archive|damaged")


@pytest.mark.parametrize("xml, match", [
    ('<?xml version="1.0"?><html><body/></html>', "root element is <html>, not <Project>"),
    ('<CodeBook xmlns="urn:QDA-XML:codebook:1.0"><Codes/></CodeBook>', "code book exchange file"),
    ('<Project xmlns="urn:example:other" name="x"/>', "namespace 'urn:example:other'"),
    ("<Project name='x'><Users>", "not well-formed"),
])
def test_xml_that_is_not_a_project_is_refused(tmp_path, xml, match):
    _refused(P.write_qdpx(tmp_path / "x.qdpx", xml, {}), match)


def test_a_missing_file_and_a_wrong_type(tmp_path):
    _refused(tmp_path / "nothere.qdpx", "file not found")
    other = tmp_path / "spans.csv"
    other.write_text("a,b\n1,2\n")
    _refused(other, "file type is '.csv'")


def test_cli_style_error_is_one_line(tmp_path):
    path = tmp_path / "p.qdpx"
    path.write_text("document,coder\n")
    with pytest.raises(AgreeError) as info:
        read_project(path)
    assert os.linesep not in info.value.one_line() and "hint:" in info.value.one_line()
    assert np.isscalar(info.value.code)
