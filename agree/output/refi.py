"""Write spans back as a REFI-QDA project package (``.qdpx``), so a team can take a consensus coding
back into its own analysis software.

Two ways:

- with the original project (``project=``): the package is copied with every original user,
  selection and coding untouched, and one user is added (named "consensus" by default, with a new
  GUID) who holds the given spans as new ``PlainTextSelection`` elements, each with one ``Coding``
  per code. Documents and codes are matched by the GUIDs the reader kept (``SpanData.document_guids``,
  ``code_guids``), else by name and code path, and each document's text must be the project's.
- without it: a new project holding the spans' documents as text sources (their texts are
  written to ``sources/``), their codes as a nested code book and every coder as a user.

Positions are written as the project reader reads them: code points of the plain text, end
exclusive, unless `span_end`, `crlf` or `positions` ask for the other conventions (use the ones
the project was read with). The package validates against the standard's Project schema; it is
written atomically and never over one of its inputs.
"""

from __future__ import annotations

import os
import re
import uuid
import zipfile
from pathlib import Path
from typing import Sequence
from xml.etree import ElementTree as ET

import numpy as np

from agree.core.errors import AgreeError
from agree.core.files import atomic_write, check_output
from agree.core.spans import SpanData
from agree.io.refi import (
    CRLF_CHOICES,
    MAX_BYTES,
    MAX_ENTRIES,
    POSITION_CHOICES,
    PROJECT_NAMESPACE,
    exporter_starts,
    from_codepoints,
    normalise_guid,
    open_package,
    parse_project,
    read_project,
)
import pandas as pd

from agree.io.spans import SPAN_ENDS, check_choice, spans_from_table

__all__ = ["write_project", "CONSENSUS_USER"]

CONSENSUS_USER = "consensus"
NAME_LENGTH = 60  # a selection is named by its text, cut to this many characters with "…"
# Children of a text source that come after its selections, in the schema's order.
_AFTER_SELECTIONS = ("Coding", "NoteRef", "VariableValue")


def _new_guid() -> str:
    return str(uuid.uuid4())


def _local(el: ET.Element) -> str:
    return el.tag.rsplit("}", 1)[-1] if isinstance(el.tag, str) else ""


def _selections(spans: SpanData, d: int, text: str | None, codes: Sequence[str], users: Sequence[str], q, *,
                span_end: str, crlf: str, positions: str) -> list[ET.Element]:
    """One PlainTextSelection per (coder, start, end) in document d, one Coding per code; with a
    single user GUID every span is that user's."""
    on = np.flatnonzero(spans.doc == d)
    coder = spans.coder[on] if len(users) > 1 else np.zeros(len(on), np.int64)
    sort = np.lexsort((spans.code[on], spans.end[on], spans.start[on], coder))
    order, coder = on[sort], coder[sort]
    starts = None if text is None else exporter_starts(text, crlf, positions)
    s_out, e_out = from_codepoints(spans.start[order], starts), from_codepoints(spans.end[order], starts)
    if span_end == "inclusive":
        e_out = e_out - 1
    out: list[ET.Element] = []
    last = None
    for k, i in enumerate(order):
        key = (int(coder[k]), int(spans.start[i]), int(spans.end[i]))
        user = users[key[0]]
        if key != last:
            attrs = {"guid": _new_guid(), "startPosition": str(int(s_out[k])), "endPosition": str(int(e_out[k])),
                     "creatingUser": user}
            if text is not None:
                piece = text[key[1]:key[2]]
                attrs["name"] = piece if len(piece) <= NAME_LENGTH else piece[:NAME_LENGTH - 1] + "…"
            out.append(ET.Element(q("PlainTextSelection"), attrs))
            last = key
        coding = ET.SubElement(out[-1], q("Coding"), {"guid": _new_guid(), "creatingUser": user})
        ET.SubElement(coding, q("CodeRef"), {"targetGUID": codes[int(spans.code[i])]})
    return out


def _insert_selections(el: ET.Element, selections: list[ET.Element]) -> None:
    children = list(el)
    at = next((k for k, c in enumerate(children) if _local(c) in _AFTER_SELECTIONS), len(children))
    for k, sel in enumerate(selections):
        el.insert(at + k, sel)


def _check_options(span_end: str, crlf: str, positions: str, path: Path, spans: SpanData) -> None:
    check_choice(span_end, SPAN_ENDS, "span_end")
    check_choice(crlf, CRLF_CHOICES, "crlf")
    check_choice(positions, POSITION_CHOICES, "positions")
    if path.suffix.lower() != ".qdpx":
        raise AgreeError(f"a project package is written as .qdpx, not '{path.suffix or '(none)'}'", where=str(path),
                         hint="name the output file <name>.qdpx", code="format")
    if spans.unit != "character":
        raise AgreeError("spans with token offsets cannot be written to a project: its positions count characters",
                         hint="read the spans with unit='character'", code="unit")


def write_project(spans: SpanData | pd.DataFrame, path: str | os.PathLike, *, project: str | os.PathLike | None = None,
                  coder: str = CONSENSUS_USER, span_end: str = "exclusive", crlf: str = "two",
                  positions: str = "codepoints", name: str | None = None, force: bool = False,
                  inputs: Sequence[str | os.PathLike] = (), max_bytes: int = MAX_BYTES,
                  max_entries: int = MAX_ENTRIES) -> Path:
    """Write spans as a REFI-QDA project package (``.qdpx``).

    Parameters
    ----------
    spans : with `project`, the consensus: the spans of one coder (whatever their name), written
        as the added user's codings; either `SpanData` or a table with columns document, coder,
        code, start, end (such as the consensus spans of a reconciliation), matched to the
        project's sources and codes by name. Without `project`, every coder's spans (`SpanData`).
    path : the ``.qdpx`` to write; never one of the inputs; an existing file only with `force`.
    project : the original project (``.qdpx`` or ``.qde``): copied untouched, plus one user.
    coder : the name of the added user.
    span_end, crlf, positions : how positions are written (see `agree.io.refi.read_project`); by
        default code points, end exclusive, as the standard's example reads.
    name : the project's name (a new project only; by default the file's stem).
    max_bytes, max_entries : safety limits when reading the original package.

    Returns
    -------
    Path
        the file written.
    """
    out = Path(path)
    if isinstance(spans, pd.DataFrame):
        if project is None:
            raise AgreeError("a table of spans is written into its project: give project=", code="no-project",
                             hint="or turn it into SpanData with agree.io.spans.spans_from_table(table, like=...)")
        spans = spans_from_table(spans, like=read_project(project, span_end=span_end, crlf=crlf,
                                                          positions=positions, max_bytes=max_bytes,
                                                          max_entries=max_entries))
    _check_options(span_end, crlf, positions, out, spans)
    check_output(out, [project, *inputs] if project is not None else list(inputs), force=force)
    if project is None:
        files = _new_project(spans, name or out.stem, span_end=span_end, crlf=crlf, positions=positions)
    else:
        files = _added_user(spans, Path(project), coder, span_end=span_end, crlf=crlf, positions=positions,
                            max_bytes=max_bytes, max_entries=max_entries)

    def write(tmp: str) -> None:
        with zipfile.ZipFile(tmp, "w", zipfile.ZIP_DEFLATED, compresslevel=1) as z:  # fast; the XML still shrinks ~8x
            for entry, data in files:
                info = zipfile.ZipInfo(entry, date_time=(2019, 3, 18, 0, 0, 0))
                info.compress_type = zipfile.ZIP_DEFLATED
                z.writestr(info, data)

    return atomic_write(out, write)


def _serialise(root: ET.Element, ns: str) -> bytes:
    """The project as UTF-8 XML with its namespace as the default one (no prefixes)."""
    if ns:
        prefix = f"{{{ns}}}"
        for el in root.iter():
            if isinstance(el.tag, str) and el.tag.startswith(prefix):
                el.tag = el.tag[len(prefix):]
        root.set("xmlns", ns)
    body = ET.tostring(root, encoding="unicode")
    return ('<?xml version="1.0" encoding="utf-8"?>\n' + body).encode("utf-8")


def _new_project(spans: SpanData, name: str, *, span_end: str, crlf: str, positions: str) -> list[tuple[str, bytes]]:
    ns = PROJECT_NAMESPACE
    q = lambda local: f"{{{ns}}}{local}"  # noqa: E731
    missing = [spans.documents[d] for d in np.unique(spans.doc) if spans.texts[d] is None]
    if missing:
        raise AgreeError(f"{len(missing)} document(s) have no text (first: '{missing[0]}'): a project needs the "
                         "plain text of every source", hint="read the spans with their texts (documents_dir= or a "
                         "text column), or give the original project (project=)", code="no-text")
    users = list(spans.coder_guids or ())
    users = [g or _new_guid() for g in users] if users else [_new_guid() for _ in spans.coders]
    codes = [g or _new_guid() for g in (spans.code_guids or [""] * len(spans.codes))]
    docs = [g or _new_guid() for g in (spans.document_guids or [""] * spans.n_documents)]
    root = ET.Element(q("Project"), {"name": name, "origin": "agree"})
    if spans.coders:
        users_el = ET.SubElement(root, q("Users"))
        for g, n in zip(users, spans.coders):
            ET.SubElement(users_el, q("User"), {"guid": g, "name": n})
    if spans.codes:
        book = ET.SubElement(ET.SubElement(root, q("CodeBook")), q("Codes"))
        elements: dict[int, ET.Element] = {}
        for c in range(len(spans.codes)):  # parents come before children in SpanData
            parent = int(spans.parents[c])
            holder = book if parent < 0 else elements[parent]
            label = spans.codes[c].rsplit("/", 1)[-1] if parent >= 0 else spans.codes[c]
            elements[c] = ET.SubElement(holder, q("Code"), {"guid": codes[c], "name": label, "isCodable": "true"})
    files: list[tuple[str, bytes]] = []
    sources = ET.SubElement(root, q("Sources")) if spans.n_documents else root
    for d, doc in enumerate(spans.documents):
        text = spans.texts[d]
        attrs = {"guid": docs[d], "name": doc}
        if text is not None:
            attrs["plainTextPath"] = f"internal://{docs[d]}.txt"
            files.append((f"sources/{docs[d]}.txt", text.encode("utf-8")))
        el = ET.SubElement(sources, q("TextSource"), attrs)
        if text is None:
            ET.SubElement(el, q("PlainTextContent")).text = ""
        _insert_selections(el, _selections(spans, d, text, codes, users, q, span_end=span_end, crlf=crlf,
                                           positions=positions))
    return [("project.qde", _serialise(root, ns)), *files]


def _added_user(spans: SpanData, project: Path, coder: str, *, span_end: str, crlf: str, positions: str,
                max_bytes: int, max_entries: int) -> list[tuple[str, bytes]]:
    if spans.n_coders != 1:
        raise AgreeError(f"the consensus must be one coder's spans; got {spans.n_coders} coders "
                         f"({', '.join(spans.coders[:5])})", code="consensus-coders",
                         hint="keep one coder with spans.subset_coders([name])")
    original = read_project(project, span_end=span_end, crlf=crlf, positions=positions, max_bytes=max_bytes,
                            max_entries=max_entries)
    doc_map = _match(spans.documents, spans.document_guids, original.documents, original.document_guids,
                     "document", project)
    code_map = _match(spans.codes, spans.code_guids, original.codes, original.code_guids, "code", project)
    for d in np.unique(spans.doc):
        mine, theirs = spans.texts[d], original.texts[doc_map[d]]
        if mine is not None and theirs is not None and mine != theirs:
            raise AgreeError(f"the text of document '{spans.documents[d]}' differs from the project's source",
                             where=str(project), code="text-differs",
                             hint="positions are only meaningful over the same text; use the project the spans "
                                  "were read from")
    with open_package(project, max_bytes=max_bytes, max_entries=max_entries) as package:
        data = package.project_bytes()
        root, ns = parse_project(data, str(project))
        entries = [(n, data) for n, data in package.iter_entries() if n.lower() != package.qde.lower()]
        qde_name = package.qde if package.zip is not None else "project.qde"
    q = (lambda local: f"{{{ns}}}{local}") if ns else (lambda local: local)
    users_el = root.find(q("Users"))
    if users_el is None:
        users_el = ET.Element(q("Users"))
        root.insert(0, users_el)
    taken = {(u.get("name") or "").strip() for u in users_el.iterfind(q("User"))}
    if coder in taken:
        raise AgreeError(f"the project already has a user named '{coder}'", where=str(project),
                         hint="name the added user with coder=", code="user-exists")
    user_guid = _new_guid()
    user = ET.Element(q("User"), {"guid": user_guid, "name": coder})
    holders = _selection_holders(root, q)
    codes = [original.code_guids[code_map[c]] for c in range(len(spans.codes))]
    added: dict[str, list[ET.Element]] = {}
    for d in np.unique(spans.doc):
        guid = original.document_guids[doc_map[d]]
        added[guid] = _selections(spans, int(d), original.texts[doc_map[d]], codes, [user_guid], q,
                                  span_end=span_end, crlf=crlf, positions=positions)
    qde = _spliced(data, ns, user, added)
    if qde is None:  # a layout the splice does not handle: rebuild the whole XML from the tree
        users_el.append(user)
        for guid, sels in added.items():
            _insert_selections(holders[guid], sels)
        qde = _serialise(root, ns)
    return [(qde_name, qde), *entries]


def _fragment(elements: Sequence[ET.Element], ns: str) -> bytes:
    """Elements serialised as they sit in the project: unprefixed, in its default namespace (their
    tags lose the namespace; the document declares it)."""
    if not elements:
        return b""
    wrapper = ET.Element("w")
    wrapper.extend(elements)
    prefix = f"{{{ns}}}"
    for el in wrapper.iter():
        if ns and el.tag.startswith(prefix):
            el.tag = el.tag[len(prefix):]
    text = ET.tostring(wrapper, encoding="unicode")
    return text[len("<w>"):-len("</w>")].encode("utf-8")


_UTF8_DECLARATION = re.compile(rb"^(?:\xef\xbb\xbf)?\s*(?:<\?xml[^>]*?encoding\s*=\s*[\"']\s*(?P<enc>[^\"']*)[\"'])?")


def _spliced(data: bytes, ns: str, user: ET.Element, added: dict[str, list[ET.Element]]) -> bytes | None:
    """The original project XML with the added user and selections written into it at their places
    (the rest of the file byte for byte), or None when its layout is one this does not handle (not
    UTF-8, a prefixed namespace, an element written as an empty tag where something must go): then
    the caller rebuilds the XML from the parsed tree. One pass of the C parser finds the places;
    only the added elements are serialised, not the whole project again."""
    import xml.parsers.expat as expat

    declared = _UTF8_DECLARATION.match(data)
    if declared.group("enc") is not None and declared.group("enc").strip().lower() not in (b"utf-8", b"utf8"):
        return None
    parser = expat.ParserCreate()  # no namespace processing: names as written (unprefixed expected)
    depth, holder, holder_depth = 0, "", -1
    pdf, places, users_end, first_child, root_name = "", {}, None, None, None

    def start(name: str, attrs: dict) -> None:
        nonlocal depth, holder, holder_depth, pdf, first_child, root_name
        if depth == 0:
            root_name = name
        elif depth == 1 and first_child is None:
            first_child = parser.CurrentByteIndex
        if holder and depth == holder_depth + 1 and name in _AFTER_SELECTIONS and holder not in places:
            places[holder] = parser.CurrentByteIndex
        if depth == 2 and name in ("TextSource", "Note"):
            holder, holder_depth = normalise_guid(attrs.get("guid")), depth
        elif depth == 2 and name == "PDFSource":
            pdf = normalise_guid(attrs.get("guid"))
        elif depth == 3 and name == "Representation" and pdf:
            holder, holder_depth = pdf, depth
        depth += 1

    def end(name: str) -> None:
        nonlocal depth, holder, users_end
        depth -= 1
        at = parser.CurrentByteIndex
        if depth == holder_depth and holder:
            if holder not in places:
                places[holder] = at if data[at:at + 2] == b"</" else -1
            holder = ""
        elif depth == 1 and name == "Users":
            users_end = at if data[at:at + 2] == b"</" else -1

    parser.StartElementHandler, parser.EndElementHandler = start, end
    parser.buffer_text = True
    parser.Parse(data, True)
    if root_name != "Project" or users_end == -1 or any(places.get(g, -1) < 0 for g in added):
        return None
    if users_end is not None:
        inserts = [(users_end, _fragment([user], ns))]
    elif first_child is not None:
        users = ET.Element(user.tag.replace("User", "Users"))
        users.append(user)
        inserts = [(first_child, _fragment([users], ns))]
    else:
        return None
    inserts += [(places[g], _fragment(sels, ns)) for g, sels in added.items()]
    inserts.sort(key=lambda x: x[0])
    out, at = [], 0
    for pos, piece in inserts:
        out += [data[at:pos], piece]
        at = pos
    out.append(data[at:])
    return b"".join(out)


def _selection_holders(root: ET.Element, q) -> dict[str, ET.Element]:
    """Source GUID (normalised) -> the element that holds its text selections."""
    out = {}
    sources = root.find(q("Sources"))
    for el in ([] if sources is None else list(sources)):
        kind = _local(el)
        if kind == "TextSource":
            out[normalise_guid(el.get("guid"))] = el
        elif kind == "PDFSource" and el.find(q("Representation")) is not None:
            out[normalise_guid(el.get("guid"))] = el.find(q("Representation"))
    notes = root.find(q("Notes"))
    for el in ([] if notes is None else notes.iterfind(q("Note"))):
        out.setdefault(normalise_guid(el.get("guid")), el)
    return out


def _match(names: Sequence[str], guids: Sequence[str] | None, their_names: Sequence[str],
           their_guids: Sequence[str] | None, what: str, project: Path) -> list[int]:
    """Index in the project of each of ours: by GUID, else by name."""
    by_guid = {g: i for i, g in enumerate(their_guids or ()) if g}
    by_name = {n: i for i, n in enumerate(their_names)}
    out = []
    for k, n in enumerate(names):
        g = guids[k] if guids is not None else ""
        i = by_guid.get(g, by_name.get(n))
        if i is None:
            raise AgreeError(f"the {what} '{n}' is not in the project", where=str(project), code=f"unknown-{what}",
                             hint=f"the spans must come from this project (its {what}s: "
                                  f"{', '.join(repr(x) for x in list(their_names)[:5])})")
        out.append(i)
    return out
