"""Read REFI-QDA projects (the open exchange standard for qualitative data projects) into `SpanData`.

Two forms are read: the ``.qdpx`` package (a zip holding ``project.qde`` and a ``sources/`` folder
of plain-text and other files) and a bare ``.qde`` with its ``sources`` folder beside it. Entry,
folder and file names are matched without regard to letter case.

What is read
------------
- Users are the coders: named by the user's ``name``, else its ``id``, else its GUID. A coding is
  attributed, in this order, to its own ``creatingUser``, to the ``creatingUser`` of the selection
  that holds it, to the coder given for the whole file (``coder=``), else to "unknown". The report
  counts how many codings each rule attributed. A creating user missing from the user list is kept
  as "unknown user <guid>".
- Codes come from the project's code book, nested as it nests them; a code is shown as its path from
  the top, joined by "/". Codes are identified by GUID (names need not be unique). Codings of codes
  marked not codable are kept and counted; codings of GUIDs missing from the code book are left out
  and reported with their identifiers.
- Text sources (``TextSource``) and the plain-text representation of PDF sources give the documents;
  their ``PlainTextSelection`` codings give the spans. Codings of a whole source cover its whole text
  and are flagged in the report. With ``notes=True`` the project's notes (memos) are read as
  documents too.
- The text is the source's plain-text file (``plainTextPath``, ``internal://`` in the package),
  else its inline ``PlainTextContent``; where both exist and differ, the file is used and the
  difference reported. Files are decoded as UTF-8 from their bytes.

Positions (the standard's section 10.2, and where it is silent)
----------------------------------------------------------------
Positions count Unicode code points of the plain text from 0. The standard does not say whether the
end position is inclusive; its own example points to an exclusive end, the default here
(``span_end="inclusive"`` for the other reading). A name check compares selection names that spell
out the selected text with the text under each reading and warns when another reading fits better.
A Windows line end (CRLF) in a text file counts as two code points (``crlf="one"`` reads positions
of software that counted it as one). A byte-order mark is removed before counting. Characters
outside the Basic Multilingual Plane count once (``positions="utf-16"`` reads positions of
software that counted UTF-16 units). Each choice is stated in the report. Negative starts, ends
before starts and ends past the text are left out and counted; so are empty selections.

Not read (listed and counted in the report)
--------------------------------------------
Pictures, audio and video (their selections are regions and times), PDF region selections, PDFs
without a text representation, transcripts (their selections are tied to sync points), external
text files (``relative://``, ``absolute://``: never opened), and selections without codings.

Safety
------
The XML is parsed with `defusedxml`: entity declarations and external references are refused.
Package entries are read into memory, never extracted; only the project XML and the plain-text
files it names are decompressed, at most `max_bytes` (1 GiB) in total and from a package of at
most `max_entries` (100,000) entries (both overridable). Entry names that would escape a folder
(absolute, with '..', with a drive letter) are ignored and reported. A file that is not what it
claims to be is refused with a one-line error.
"""

from __future__ import annotations

import os
import re
import zipfile
import zlib
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, Iterator
from xml.etree.ElementTree import Element, ParseError

import numpy as np
import pandas as pd

from agree.core.errors import AgreeError
from agree.core.files import record_input
from agree.core.model import ReadReport
from agree.core.spans import CODE_PATH_SEPARATOR, SpanData
from agree.io.spans import (
    COVERAGES,
    SPAN_ENDS,
    assemble_spans,
    check_choice,
    decode_text,
    has_astral,
    text_notes,
)

__all__ = ["read_project", "open_package", "parse_project", "normalise_guid", "Package", "MAX_BYTES",
           "MAX_ENTRIES", "PROJECT_NAMESPACE"]

PROJECT_NAMESPACE = "urn:QDA-XML:project:1.0"
CODEBOOK_NAMESPACE = "urn:QDA-XML:codebook:1.0"
MAX_BYTES = 1 << 30  # decompressed bytes read from one package (project XML + plain texts)
MAX_ENTRIES = 100_000  # entries in one package
CRLF_CHOICES = ("two", "one")
POSITION_CHOICES = ("codepoints", "utf-16")
NAME_CHECK_SAMPLE = 2000  # named selections compared with the text
SHOWN = 5

_DRIVE = re.compile(r"^[A-Za-z]:")


def normalise_guid(guid: str | None) -> str:
    """A GUID as compared: braces removed, lower case ("" for none)."""
    if not guid:
        return ""
    return guid.strip().strip("{}").lower()


def normalise_guids(guids: list[str | None]) -> np.ndarray:
    """`normalise_guid` over a list: an object array ("" for none); each distinct value once."""
    index, uniques = pd.factorize(pd.Series(guids, dtype=object), use_na_sentinel=True)
    done = np.array([normalise_guid(g) for g in uniques] + [""], dtype=object)
    return done[index]


def _listed(items: list[str], shown: int = SHOWN) -> str:
    out = ", ".join(f"'{x}'" for x in items[:shown])
    return out + (f" and {len(items) - shown} more" if len(items) > shown else "")


def _size(n: int) -> str:
    for unit in ("bytes", "KiB", "MiB", "GiB"):
        if n < 1024 or unit == "GiB":
            return f"{n:,} {unit}" if unit == "bytes" else f"{n:.4g} {unit}"
        n /= 1024
    return str(n)


# -- the package ---------------------------------------------------------------------------------
def safe_entry_name(name: str) -> str | None:
    """The entry name with '/' separators, or None when it would escape the package's folder
    (absolute, a drive letter, a '..' part, a NUL)."""
    n = name.replace("\\", "/")
    if not n or n.startswith("/") or _DRIVE.match(n) or "\x00" in n:
        return None
    if any(part == ".." for part in n.split("/")):
        return None
    return n


@dataclass(eq=False)
class Package:
    """A REFI-QDA project opened for reading: the project XML and, on request, the files of its
    `sources` folder, read into memory within the size limit. Use as a context manager."""

    path: Path
    qde: str  # the project XML's name in the package (or the .qde file)
    max_bytes: int
    entries: dict[str, Any]  # lower-cased safe name -> ZipInfo (package) or Path (folder)
    names: dict[str, str]  # lower-cased safe name -> name as stored
    folder: str = ""  # the folder of project.qde inside the package ("" at the root)
    zip: zipfile.ZipFile | None = None
    read_bytes: int = 0
    notes: list[str] = field(default_factory=list)
    left_out: list[str] = field(default_factory=list)

    def __enter__(self) -> "Package":
        return self

    def __exit__(self, *exc: Any) -> None:
        self.close()

    def close(self) -> None:
        if self.zip is not None:
            self.zip.close()
            self.zip = None

    @property
    def where(self) -> str:
        return str(self.path)

    def project_bytes(self) -> bytes:
        return self.read_entry(self.qde.lower())

    def source_key(self, internal: str) -> str | None:
        """The entry key of ``internal://<name>`` (None when the name is unsafe)."""
        name = safe_entry_name(internal)
        if name is None or "/" in name.strip("/"):
            return None
        return f"{self.folder}sources/{name}".lower()

    def read_entry(self, key: str) -> bytes:
        entry = self.entries[key]
        label = f"{self.path}, entry '{self.names[key]}'" if self.zip is not None else str(entry)
        remaining = self.max_bytes - self.read_bytes
        declared = entry.file_size if self.zip is not None else entry.stat().st_size
        if declared > remaining:
            raise _too_large(label, self.max_bytes)
        if self.zip is None:
            record_input(entry)
            with open(entry, "rb") as fh:
                data = fh.read(remaining + 1)
        else:
            if entry.flag_bits & 0x1:
                raise AgreeError("the entry is encrypted", where=label, code="not-a-project",
                                 hint="export the project again without a password")
            try:
                with self.zip.open(entry) as fh:
                    data = fh.read(remaining + 1)
            except (zipfile.BadZipFile, zlib.error, EOFError, NotImplementedError, RuntimeError, OSError) as exc:
                raise AgreeError(f"the package is damaged: the entry cannot be unpacked ({exc})", where=label,
                                 code="corrupt-package", hint="export the project again") from None
        if len(data) > remaining:
            raise _too_large(label, self.max_bytes)
        self.read_bytes += len(data)
        return data

    def iter_entries(self) -> Iterator[tuple[str, bytes]]:
        """Every safe entry (name as stored, bytes), within the size limit."""
        for key, name in self.names.items():
            yield name, self.read_entry(key)


def _too_large(label: str, limit: int) -> AgreeError:
    return AgreeError(f"refused: unpacking would exceed the limit of {_size(limit)} (max_bytes)", where=label,
                      code="too-large", hint="a package that unpacks to this much is not a usual text project; "
                                             "if you trust it, raise max_bytes")


def _content_kind(head: bytes) -> str:
    if head.startswith(b"PK"):
        return "a zip archive"
    if head.startswith(b"PAR1"):
        return "a Parquet file"
    if head.startswith(b"\xd0\xcf\x11\xe0"):
        return "an old-format Office file"
    if head.startswith(b"%PDF"):
        return "a PDF document"
    text = head.lstrip(b"\xef\xbb\xbf \t\r\n")
    if text.startswith(b"<"):
        return "XML or HTML text"
    try:
        decoded = head.decode("utf-8")
    except UnicodeDecodeError:
        return "binary data"
    return "plain text (a CSV or similar table)" if any(c in decoded for c in ",;\t\n") else "plain text"


def open_package(path: str | os.PathLike, *, max_bytes: int = MAX_BYTES,
                 max_entries: int = MAX_ENTRIES) -> Package:
    """Open a ``.qdpx`` package or a bare ``.qde`` (with its ``sources`` folder beside it) safely.

    Nothing is extracted: entries are read into memory on request, within `max_bytes` decompressed
    bytes in total; a package with more than `max_entries` entries is refused; entry names that
    would escape a folder are ignored and reported in ``package.left_out``."""
    p = Path(path)
    where = str(p)
    if not p.exists():
        raise AgreeError("file not found", where=where, hint="check the path and the file name",
                         code="file-not-found")
    if p.is_dir():
        raise AgreeError("this is a folder, not a project file", where=where, code="file-not-found",
                         hint="give the .qdpx package, or the project's .qde file")
    ext = p.suffix.lower()
    record_input(p)
    with open(p, "rb") as fh:
        head = fh.read(512)
    if not head:
        raise AgreeError("the file is empty", where=where, hint="check that the project was saved",
                         code="empty-file")
    if ext == ".qde" or (ext != ".qdpx" and not head.startswith(b"PK")):
        if ext not in (".qde", ".xml"):
            raise AgreeError(f"not a REFI-QDA project: the file type is '{ext or '(none)'}'", where=where,
                             code="not-a-project", hint="give the .qdpx package or the project's .qde file")
        if not head.lstrip(b"\xef\xbb\xbf \t\r\n").startswith(b"<"):
            raise AgreeError(f"not a REFI-QDA project file: the content is {_content_kind(head)}, not XML",
                             where=where, code="not-a-project", hint="check that this is the file you meant")
        return _open_folder(p, max_bytes)
    if not head.startswith(b"PK\x03\x04") and not head.startswith(b"PK\x05\x06"):
        hint = ("read a span table with read_spans()" if "CSV" in _content_kind(head)
                else "a .qdpx package is a zip file; check that this is the file you meant")
        raise AgreeError(f"not a REFI-QDA project package: the content is {_content_kind(head)}, not a zip "
                         f"archive", where=where, code="not-a-project", hint=hint)
    try:
        zf = zipfile.ZipFile(p)
    except (zipfile.BadZipFile, zipfile.LargeZipFile, OSError, ValueError, EOFError) as exc:
        raise AgreeError(f"the package is not a readable zip archive ({exc})", where=where,
                         code="corrupt-package", hint="the file may be damaged or incomplete; export it again"
                         ) from None
    try:
        return _index_zip(p, zf, max_bytes, max_entries)
    except BaseException:
        zf.close()
        raise


def _index_zip(p: Path, zf: zipfile.ZipFile, max_bytes: int, max_entries: int) -> Package:
    where = str(p)
    infos = zf.infolist()
    if len(infos) > max_entries:
        raise AgreeError(f"refused: the package has {len(infos):,} entries, more than the limit of "
                         f"{max_entries:,} (max_entries)", where=where, code="too-many-entries",
                         hint="if you trust the file, raise max_entries")
    entries: dict[str, Any] = {}
    names: dict[str, str] = {}
    unsafe, repeated = [], []
    for info in infos:
        if info.is_dir():
            continue
        name = safe_entry_name(info.filename)
        if name is None:
            unsafe.append(info.filename)
            continue
        key = name.lower()
        if key in entries:
            repeated.append(info.filename)
            continue
        entries[key], names[key] = info, name
    package = Package(path=p, qde="", max_bytes=max_bytes, entries=entries, names=names, zip=zf)
    if unsafe:
        package.left_out.append(f"{len(unsafe)} package entr{'y' if len(unsafe) == 1 else 'ies'} ignored: the "
                                f"name would escape the package's folder ({_listed(unsafe)})")
    if repeated:
        package.left_out.append(f"{len(repeated)} package entr{'y' if len(repeated) == 1 else 'ies'} ignored: "
                                f"the name repeats another one, ignoring letter case ({_listed(repeated)})")
    qdes = [k for k in entries if k.endswith(".qde")]
    root = [k for k in qdes if "/" not in k]
    if "project.qde" in entries:
        qde = "project.qde"
    elif len(root) == 1:
        qde = root[0]
        package.notes.append(f"the project XML is '{names[qde]}' (the standard names it project.qde)")
    elif len(qdes) == 1:
        qde = qdes[0]
        package.folder = qde.rsplit("/", 1)[0] + "/"
        package.notes.append(f"warning: the project XML '{names[qde]}' is inside a folder, not at the package "
                             "root; read from there")
    else:
        held = sorted(names.values())
        what = "no project.qde" if not qdes else f"{len(qdes)} .qde files and no project.qde"
        raise AgreeError(f"not a REFI-QDA project package: the zip holds {what} "
                         f"({len(held)} entries: {_listed(held, 3) or 'none'})", where=where,
                         code="not-a-project", hint="a .qdpx package holds project.qde and a sources folder; "
                                                    "check that this is the project export")
    package.qde = names[qde]
    return package


def _open_folder(p: Path, max_bytes: int) -> Package:
    entries: dict[str, Any] = {p.name.lower(): p}
    names = {p.name.lower(): p.name}
    package = Package(path=p, qde=p.name, max_bytes=max_bytes, entries=entries, names=names)
    folders = [d for d in p.parent.iterdir() if d.is_dir() and d.name.lower() == "sources"]
    skipped = []
    if folders:
        for f in sorted(folders[0].iterdir()):
            if f.is_symlink() or not f.is_file():
                skipped.append(f.name)
                continue
            entries.setdefault(f"sources/{f.name.lower()}", f)
            names.setdefault(f"sources/{f.name.lower()}", f"sources/{f.name}")
    if skipped:
        package.left_out.append(f"{len(skipped)} item(s) in the sources folder are links or folders: not read "
                                f"({_listed(skipped)})")
    return package


# -- the XML ----------------------------------------------------------------------------------------
def _may_declare(data: bytes) -> bool:
    """Whether XML bytes may hold a document type declaration (where entities are declared): any
    '<!DOCTYPE', or an encoding that is not ASCII-compatible (then the bytes cannot be searched)."""
    head = data[:4]
    return head.startswith((b"\xff\xfe", b"\xfe\xff")) or b"\x00" in head or b"<!DOCTYPE" in data


def parse_project(data: bytes, where: str) -> tuple[Element, str]:
    """Parse project XML safely (no entity expansion, no external references); returns the root
    element and the namespace it uses. Refuses XML whose root is not a REFI-QDA ``Project``.

    XML with a document type declaration goes through `defusedxml`, which refuses entity
    declarations and external references; XML without one cannot declare entities or reference
    anything outside itself, and is parsed by the standard library's C parser (a project export
    never has one, and this parser is several times faster)."""
    from xml.etree.ElementTree import XMLParser

    from defusedxml import DefusedXmlException
    from defusedxml.ElementTree import fromstring

    try:
        if _may_declare(data):
            root = fromstring(data, forbid_dtd=False, forbid_entities=True, forbid_external=True)
        else:  # no document type declaration: no entity can be declared, nothing external is referenced
            parser = XMLParser()
            parser.feed(data)
            root = parser.close()
    except DefusedXmlException as exc:
        raise AgreeError(f"refused: the project XML declares entities or external references "
                         f"({type(exc).__name__}), which a project never needs and which can be used to attack "
                         f"the reader", where=where, code="unsafe-xml",
                         hint="export the project again from its software") from None
    except ParseError as exc:
        raise AgreeError(f"the project XML is not well-formed ({exc})", where=where, code="bad-xml",
                         hint="the file is damaged or is not a REFI-QDA project") from None
    tag = root.tag if isinstance(root.tag, str) else ""
    ns, local = (tag[1:].split("}", 1) if tag.startswith("{") else ("", tag))
    if local == "CodeBook":
        raise AgreeError("this is a code book exchange file (.qdc), not a project: it holds no codings",
                         where=where, code="not-a-project", hint="give the project export (.qdpx)")
    if local != "Project":
        raise AgreeError(f"not a REFI-QDA project: the XML's root element is <{local}>, not <Project>",
                         where=where, code="not-a-project", hint="check that this is the project export")
    if ns and not ns.startswith("urn:QDA-XML:project:"):
        raise AgreeError(f"not a REFI-QDA project: the root element is in the namespace '{ns}'", where=where,
                         code="not-a-project", hint=f"a project uses the namespace {PROJECT_NAMESPACE}")
    return root, ns


@dataclass
class _Doc:
    guid: str
    name: str
    kind: str
    text: str | None
    bom: bool = False
    inline: bool = False


@dataclass
class _Collected:
    """Selections and codings as flat lists (converted to arrays in one step)."""

    sel_doc: list[int] = field(default_factory=list)
    sel_start: list[Any] = field(default_factory=list)
    sel_end: list[Any] = field(default_factory=list)
    sel_user: list[str] = field(default_factory=list)
    sel_guid: list[str] = field(default_factory=list)
    sel_whole: list[bool] = field(default_factory=list)
    named: list[tuple[int, str]] = field(default_factory=list)  # (selection, name) for the name check
    cod_sel: list[int] = field(default_factory=list)
    cod_user: list[str] = field(default_factory=list)
    cod_code: list[str] = field(default_factory=list)
    empty_selections: int = 0


class _Reader:
    def __init__(self, package: Package, root: Element, ns: str, *, include_notes: bool):
        self.package = package
        self.root = root
        self.q = (lambda local: f"{{{ns}}}{local}") if ns else (lambda local: local)
        self.docs: list[_Doc] = []
        self.c = _Collected()
        self.notes: list[str] = []
        self.left_out: list[str] = []
        self.skipped_sources: list[str] = []
        self.skipped_codings = 0
        self.skipped_selections: dict[str, int] = {}
        self.include_notes = include_notes
        self.missing_files: list[str] = []
        self.external: list[str] = []
        self.differ: list[str] = []

    # users and codes
    def users(self) -> dict[str, tuple[str, str]]:
        out = {}
        users = self.root.find(self.q("Users"))
        for u in ([] if users is None else users.iterfind(self.q("User"))):
            guid = normalise_guid(u.get("guid"))
            name = (u.get("name") or "").strip()
            ident = (u.get("id") or "").strip()
            out[guid] = (name or ident or guid, "name" if name else "id" if ident else "guid")
        return out

    def codes(self) -> tuple[list[str], list[str], list[int], list[bool]]:
        guids, paths, parents, codable = [], [], [], []
        book = self.root.find(self.q("CodeBook"))
        codes = None if book is None else book.find(self.q("Codes"))

        def walk(el: Element, parent: int, prefix: str) -> None:
            for code in el.iterfind(self.q("Code")):
                index = len(guids)
                name = (code.get("name") or "").strip() or normalise_guid(code.get("guid"))
                guids.append(normalise_guid(code.get("guid")))
                paths.append(prefix + name)
                parents.append(parent)
                codable.append((code.get("isCodable") or "true").strip().lower() not in ("false", "0"))
                walk(code, index, prefix + name + CODE_PATH_SEPARATOR)

        if codes is not None:
            walk(codes, -1, "")
        return guids, paths, parents, codable

    # sources
    def sources(self) -> None:
        q = self.q
        sources = self.root.find(q("Sources"))
        for el in ([] if sources is None else list(sources)):
            kind = el.tag.rsplit("}", 1)[-1] if isinstance(el.tag, str) else ""
            label = el.get("name") or normalise_guid(el.get("guid"))
            if kind == "TextSource":
                self.text_element(el, el, kind="text source")
            elif kind == "PDFSource":
                rep = el.find(q("Representation"))
                self.count_skipped(el.iterfind(q("PDFSelection")), "PDF region selections")
                if rep is None:
                    self.skip_source(el, f"{label} (PDF without a text representation)")
                else:
                    self.text_element(rep, el, kind="PDF text representation", extra_codings=el.iterfind(q("Coding")))
            elif kind in ("PictureSource", "AudioSource", "VideoSource"):
                self.skip_source(el, f"{label} ({kind[:-6].lower()})")
            else:
                self.skip_source(el, f"{label} (unknown element <{kind}>)")
        notes = self.root.find(q("Notes"))
        for el in ([] if notes is None else notes.iterfind(q("Note"))):
            if self.include_notes:
                self.text_element(el, el, kind="note")
            else:
                n = sum(1 for _ in el.iter(q("Coding")))
                if n:
                    self.skipped_selections["codings in notes (memos; notes=True reads them)"] = \
                        self.skipped_selections.get("codings in notes (memos; notes=True reads them)", 0) + n

    def count_skipped(self, selections: Iterator[Element], what: str) -> None:
        n = sum(1 for sel in selections for _ in sel.iterfind(self.q("Coding")))
        if n:
            self.skipped_selections[what] = self.skipped_selections.get(what, 0) + n

    def skip_source(self, el: Element, label: str) -> None:
        self.skipped_sources.append(label)
        self.skipped_codings += sum(1 for _ in el.iter(self.q("Coding")))

    def text_element(self, el: Element, owner: Element, *, kind: str,
                     extra_codings: Iterator[Element] = iter(())) -> None:
        q, c = self.q, self.c
        d = len(self.docs)
        guid = normalise_guid(owner.get("guid"))
        name = (owner.get("name") or "").strip() or guid
        text, bom, inline = self.text_of(el, name)
        self.docs.append(_Doc(guid=guid, name=name, kind=kind, text=text, bom=bom, inline=inline))
        selection, coding_tag, ref_tag = q("PlainTextSelection"), q("Coding"), q("CodeRef")
        sel_doc, sel_start, sel_end, sel_user, sel_guid, sel_whole = (
            c.sel_doc, c.sel_start, c.sel_end, c.sel_user, c.sel_guid, c.sel_whole)
        cod_sel, cod_user, cod_code = c.cod_sel, c.cod_user, c.cod_code
        whole = []
        for child in el:
            tag = child.tag
            if tag == coding_tag:
                whole.append(child)
                continue
            if tag != selection:
                continue
            s = len(sel_doc)
            n = 0
            for coding in child:
                if coding.tag != coding_tag:
                    continue
                ref = coding.find(ref_tag)
                cod_sel.append(s)
                cod_user.append(coding.get("creatingUser"))
                cod_code.append(None if ref is None else ref.get("targetGUID"))
                n += 1
            if not n:
                c.empty_selections += 1
                continue
            get = child.get
            sel_doc.append(d)
            sel_start.append(get("startPosition"))
            sel_end.append(get("endPosition"))
            sel_user.append(get("creatingUser"))
            sel_guid.append(get("guid"))
            sel_whole.append(False)
            label = get("name")
            if label and len(c.named) < NAME_CHECK_SAMPLE:
                c.named.append((s, label))
        whole += list(extra_codings)
        if whole:
            s = len(c.sel_doc)
            c.sel_doc.append(d)
            c.sel_start.append("0")
            c.sel_end.append("0")
            c.sel_user.append(None)
            c.sel_guid.append(guid)
            c.sel_whole.append(True)
            for coding in whole:
                ref = coding.find(ref_tag)
                cod_sel.append(s)
                cod_user.append(coding.get("creatingUser"))
                cod_code.append(None if ref is None else ref.get("targetGUID"))

    def text_of(self, el: Element, name: str) -> tuple[str | None, bool, bool]:
        content = el.find(self.q("PlainTextContent"))
        inline = content.text or "" if content is not None else None
        path = (el.get("plainTextPath") or "").strip()
        from_file, bom = None, False
        if path:
            scheme, _, rest = path.partition("://")
            if scheme.lower() == "internal" and rest:
                key = self.package.source_key(rest)
                if key is None:
                    self.missing_files.append(f"{name} ({path}: unsafe name, not read)")
                elif key not in self.package.entries:
                    self.missing_files.append(f"{name} ({path})")
                else:
                    from_file, bom = decode_text(self.package.read_entry(key),
                                                 f"{self.package.where}, entry '{self.package.names[key]}'")
            else:
                self.external.append(f"{name} ({path})")
        if from_file is not None:
            if inline is not None and inline != from_file and inline.replace("\n", "") != from_file.replace(
                    "\r\n", "").replace("\n", ""):
                self.differ.append(name)
            return from_file, bom, False
        return inline, False, inline is not None


# -- positions ---------------------------------------------------------------------------------------
def exporter_starts(text: str, crlf: str, positions: str) -> np.ndarray | None:
    """Where each code point of `text` starts when counted as the exporting software counted
    (CRLF as one position, UTF-16 units), with the text's end last: (len(text) + 1,) ints.
    None when that count equals the code points."""
    crlf_one = crlf == "one" and "\r\n" in text
    wide = positions == "utf-16" and has_astral(text)
    if not crlf_one and not wide:
        return None
    cp = np.frombuffer(text.encode("utf-32-le"), dtype=np.uint32)
    width = np.ones(len(cp), np.int64)
    if wide:
        width[cp > 0xFFFF] = 2
    if crlf_one:
        width[:-1][(cp[:-1] == 13) & (cp[1:] == 10)] = 0
    return np.concatenate(([0], np.cumsum(width)))


def to_codepoints(values: np.ndarray, starts: np.ndarray | None) -> np.ndarray:
    """Exporter positions to code-point positions (a position inside a character moves to its end)."""
    return values if starts is None else np.searchsorted(starts, values, side="left").astype(np.int64)


def from_codepoints(values: np.ndarray, starts: np.ndarray | None) -> np.ndarray:
    """Code-point positions to the exporter's count (inverse of `to_codepoints`)."""
    return values if starts is None else starts[np.clip(values, 0, len(starts) - 1)]


# -- read_project ----------------------------------------------------------------------------------
def read_project(path: str | os.PathLike, *, coder: str | None = None, span_end: str = "exclusive",
                 code_depth: int | None = None, crlf: str = "two", positions: str = "codepoints",
                 coverage: str = "inferred", notes: bool = False, max_bytes: int = MAX_BYTES,
                 max_entries: int = MAX_ENTRIES) -> SpanData:
    """Read a REFI-QDA project (``.qdpx`` package or bare ``.qde``) into `SpanData`.

    Parameters
    ----------
    path : the ``.qdpx`` package, or the project's ``.qde`` with its ``sources`` folder beside it.
    coder : the coder of the whole file, for codings that name no creating user (one project file
        per coder); by default such codings belong to "unknown".
    span_end : "exclusive" (``endPosition`` is the first position after the selection, the
        reading the standard's own example supports) or "inclusive" (its last position).
    code_depth : roll nested codes up to this depth (1: top-level codes); by default every coding
        keeps the code it applied (leaf codes stay leaves).
    crlf : "two" (a CRLF line end counts as two positions, as in the file) or "one".
    positions : "codepoints" (the standard) or "utf-16" (software that counts UTF-16 units).
    coverage : "inferred" (a coder coded a source where they coded something in it) or
        "declared" (every coder coded every text source in full).
    notes : also read codings in the project's notes (memos) as documents.
    max_bytes, max_entries : safety limits: decompressed bytes read, entries in the package.

    Returns
    -------
    SpanData
        positions in code points of each source's plain text, end exclusive; ``span_ids`` are the
        selection GUIDs; ``document_guids``, ``coder_guids`` and ``code_guids`` the project's GUIDs;
        ``report`` says what was read, used and left out, and which choices were made.

    Raises
    ------
    AgreeError
        for a file that is not a project, a damaged or oversized package, unsafe XML.
    """
    check_choice(span_end, SPAN_ENDS, "span_end")
    check_choice(crlf, CRLF_CHOICES, "crlf")
    check_choice(positions, POSITION_CHOICES, "positions")
    check_choice(coverage, COVERAGES, "coverage")
    if code_depth is not None and code_depth < 1:
        raise AgreeError(f"the code depth must be 1 or more; got {code_depth}", code="code-depth")
    with open_package(path, max_bytes=max_bytes, max_entries=max_entries) as package:
        where = f"{package.where}, {package.qde}" if package.zip is not None else package.where
        root, ns = parse_project(package.project_bytes(), where)
        reader = _Reader(package, root, ns, include_notes=notes)
        users = reader.users()
        code_guids, code_paths, code_parents, codable = reader.codes()
        reader.sources()
        notes_out = list(package.notes)
        left_out = list(package.left_out)
    if ns != PROJECT_NAMESPACE:
        notes_out.append(f"warning: the project uses the namespace '{ns}'" if ns else
                         "warning: the project XML has no namespace")
    return _assemble(reader, root, users, code_guids, code_paths, code_parents, codable, notes_out, left_out,
                     name=str(path), coder=coder, span_end=span_end, crlf=crlf, positions=positions,
                     coverage=coverage, code_depth=code_depth)


def _unique_names(names: list[str], guids: list[str]) -> list[str]:
    counts = pd.Series(names).value_counts()
    return [f"{n} [{g[:8]}]" if counts[n] > 1 else n for n, g in zip(names, guids)]


def _assemble(reader: _Reader, root: Element, users: dict, code_guids: list[str], code_paths: list[str],
              code_parents: list[int], codable: list[bool], notes: list[str], left_out: list[str], *, name: str,
              coder: str | None, span_end: str, crlf: str, positions: str, coverage: str,
              code_depth: int | None) -> SpanData:
    c, docs = reader.c, reader.docs
    S = len(c.sel_doc)
    sel_doc = np.array(c.sel_doc, np.int64)
    whole = np.array(c.sel_whole, bool)
    start_f = pd.to_numeric(pd.Series(c.sel_start, dtype=object), errors="coerce").to_numpy(float)
    end_f = pd.to_numeric(pd.Series(c.sel_end, dtype=object), errors="coerce").to_numpy(float)
    bad_number = ~np.isfinite(start_f) | ~np.isfinite(end_f) | (np.round(start_f) != start_f) | \
        (np.round(end_f) != end_f)
    start = np.where(bad_number, 0, start_f).astype(np.int64)
    end = np.where(bad_number, 0, end_f).astype(np.int64)
    if span_end == "inclusive":
        end = end + 1
    texts = [d.text for d in docs]
    lengths = np.array([len(t) if t is not None else -1 for t in texts], np.int64)
    # exporter counts -> code points, per document that needs it
    converted = []
    for d, t in enumerate(texts):
        starts = None if t is None else exporter_starts(t, crlf, positions)
        if starts is not None:
            on = (sel_doc == d) & ~whole
            start[on], end[on] = to_codepoints(start[on], starts), to_codepoints(end[on], starts)
            converted.append(docs[d].name)
    start[whole] = 0
    end[whole] = np.maximum(lengths[sel_doc[whole]], 0)
    dlen = lengths[sel_doc]
    problems = {
        "positions that are not whole numbers": bad_number,
        "a negative start": ~bad_number & (start < 0),
        "an end before the start": ~bad_number & (start >= 0) & (end < start),
        "an end past the end of the text": ~bad_number & (start >= 0) & (end >= start) & (dlen >= 0) & (end > dlen),
    }
    ok = ~np.logical_or.reduce(list(problems.values())) if S else np.ones(0, bool)
    empty = ok & (end == start) & ~whole
    whole_unknown = whole & (dlen < 0)
    sel_guid = normalise_guids(c.sel_guid)
    for what, mask in problems.items():
        if mask.any():
            hint = ""
            if what.startswith("an end past") and span_end == "inclusive":
                hint = " (ends read as inclusive: try span_end='exclusive')"
            elif what.startswith("an end past") and any(d.inline for d in docs):
                hint = (" (inline texts: XML reads CRLF as LF, so positions counted over CRLF run past the text; "
                        "try crlf='one')")
            left_out.append(f"{int(mask.sum())} selection(s) with {what} left out{hint}: "
                            f"{_listed(list(sel_guid[mask]))}")
    if empty.any():
        left_out.append(f"{int(empty.sum())} empty selection(s) (start equal to the end) left out: "
                        f"{_listed(list(sel_guid[empty]))}")
    if whole_unknown.any():
        left_out.append(f"{int(whole_unknown.sum())} source(s) coded as a whole have no text: their whole-source "
                        "codings are left out")
    sel_ok = ok & ~empty & ~whole_unknown

    # codings
    cod_sel = np.array(c.cod_sel, np.int64)
    n_codings = len(cod_sel)
    code_lookup = {g: i for i, g in enumerate(code_guids)}
    cod_code = normalise_guids(c.cod_code)
    code_index = pd.Series(cod_code, dtype=object).map(code_lookup).to_numpy(dtype=float) if n_codings else \
        np.zeros(0)
    dangling = ~np.isfinite(code_index)
    code_index = np.where(dangling, -1, code_index).astype(np.int64)
    cod_user = normalise_guids(c.cod_user)
    sel_user = normalise_guids(c.sel_user)[cod_sel] if n_codings else np.zeros(0, object)
    by_coding = cod_user != ""
    by_selection = ~by_coding & (sel_user != "")
    by_file = ~by_coding & ~by_selection & (coder is not None)
    user = np.where(by_coding, cod_user, np.where(by_selection, sel_user, "" if coder is None else "\x00file"))
    if dangling.any():
        missing = list(dict.fromkeys(cod_code[dangling]))
        left_out.append(f"{int(dangling.sum())} coding(s) refer to codes missing from the code book, left out: "
                        f"code GUIDs {_listed(missing)}")
    keep = sel_ok[cod_sel] & ~dangling if n_codings else np.zeros(0, bool)
    unusable = (~sel_ok[cod_sel] & ~dangling).sum() if n_codings else 0
    if unusable:
        left_out.append(f"{int(unusable)} coding(s) on the selections above left out")
    not_codable = keep & ~np.array(codable + [True], bool)[code_index]
    if not_codable.any():
        names = sorted({code_paths[i] for i in code_index[not_codable]})
        notes.append(f"warning: {int(not_codable.sum())} coding(s) apply codes marked not codable (folders), kept: "
                     f"{_listed(names)}")

    # coders
    keys, user_index = np.unique(user[keep].astype(str), return_inverse=True) if keep.any() else \
        (np.array([], dtype=str), np.zeros(0, np.int64))
    listed = list(users)
    order = sorted(range(len(keys)), key=lambda i: (listed.index(keys[i]) if keys[i] in users else len(listed), i))
    rank = np.empty(len(keys), np.int64)
    rank[order] = np.arange(len(keys))
    coder_keys = [str(keys[i]) for i in order]
    coder_names = []
    for k in coder_keys:
        if k == "\x00file":
            coder_names.append(coder)
        elif k == "":
            coder_names.append("unknown")
        elif k in users:
            coder_names.append(users[k][0])
        else:
            coder_names.append(f"unknown user {k}")
    coder_names = _unique_names(coder_names, [k if k not in ("", "\x00file") else "file" for k in coder_keys])
    unused_users = [users[g][0] for g in users if g not in coder_keys]

    doc_names = _unique_names([d.name for d in docs], [d.guid for d in docs])
    code_names = _unique_names(code_paths, code_guids)
    ks = cod_sel[keep]
    texts_out = texts
    lengths_out = lengths.copy()
    if (lengths < 0).any():
        longest = np.zeros(len(docs), np.int64)
        np.maximum.at(longest, sel_doc[ks], end[ks])
        lengths_out = np.where(lengths < 0, longest, lengths)
    data, repeats = assemble_spans(
        documents=doc_names, texts=texts_out, lengths=lengths_out, coders=coder_names, codes=code_names,
        parents=np.array(code_parents, np.int64), doc=sel_doc[ks], coder=rank[user_index], code=code_index[keep],
        start=start[ks], end=end[ks], unit="character", coverage=coverage, span_ids=sel_guid[ks],
        document_guids=tuple(d.guid for d in docs), coder_guids=tuple(k if k != "\x00file" else "" for k in coder_keys),
        code_guids=tuple(code_guids))
    if len(repeats):
        left_out.append(f"{len(repeats)} repeated coding(s) (same coder, code, source, start and end) counted once")

    # report
    if reader.skipped_sources:
        left_out.append(f"{len(reader.skipped_sources)} source(s) that are not text skipped "
                        f"({reader.skipped_codings} coding(s) in them): {_listed(reader.skipped_sources)}")
    for what, n in reader.skipped_selections.items():
        left_out.append(f"{n} {what} skipped")
    if reader.missing_files:
        left_out.append(f"{len(reader.missing_files)} text source(s) name a plain-text file missing from the "
                        f"package: their spans are compared without the text ({_listed(reader.missing_files)})")
    if reader.external:
        left_out.append(f"{len(reader.external)} text source(s) keep their text outside the package (never opened): "
                        f"{_listed(reader.external)}")
    if reader.differ:
        notes.append(f"warning: {len(reader.differ)} source(s) have inline text that differs from their plain-text "
                     f"file; the file was used ({_listed(reader.differ)})")
    if c.empty_selections:
        notes.append(f"{c.empty_selections} selection(s) carry no coding (not spans)")
    if unused_users:
        notes.append(f"{len(unused_users)} user(s) with no codings read: {_listed(unused_users)}")
    n_whole = int((whole[cod_sel] & keep).sum()) if n_codings else 0
    if n_whole:
        notes.append(f"flag: {n_whole} coding(s) apply to a whole source and were read as covering its whole text")
    notes += text_notes([d.name for d in docs], texts, [d.bom for d in docs])
    if converted:
        notes.append(f"positions converted to code points of the file text (crlf='{crlf}', positions='{positions}') "
                     f"in {len(converted)} text(s): {_listed(converted)}")
    no_text = [d.name for d in docs if d.text is None]
    if no_text:
        notes.append(f"{len(no_text)} source(s) without text: their length is their largest span end "
                     f"({_listed(no_text)})")
    notes += _name_check(reader, texts, docs, span_end=span_end, crlf=crlf, positions=positions)
    rules = [(int((by_coding & keep).sum()), "the coding's creatingUser"),
             (int((by_selection & keep).sum()), "the selection's creatingUser"),
             (int((by_file & keep).sum()), f"the file's coder ('{coder}')"),
             (int((keep & ~by_coding & ~by_selection & ~by_file).sum()), "none (coder 'unknown')")]
    notes.append("coder of each coding (the coding's creatingUser, else the selection's, else the file's coder): "
                 + "; ".join(f"{n:,} by {what}" for n, what in rules if n))
    named_by = sorted({users[k][1] for k in coder_keys if k in users})
    if named_by and named_by != ["name"]:
        notes.append("coders named by the user's " + " or ".join(named_by) + " where the user has no name")
    if coverage == "declared":
        notes.append("coverage declared: every coder coded every text source in full")
    else:
        notes.append("which coder coded which source is inferred from the spans (coverage='inferred')")
    if code_depth is not None:
        before = len(data.codes)
        data = data.roll_up(code_depth)
        notes.append(f"codes rolled up to depth {code_depth}: {before} codes became {len(data.codes)}")
    project = root.get("name") or ""
    origin = root.get("origin")
    depth = int(data.depth().max(initial=0))
    coder_list = ", ".join(data.coders[:8]) + (", ..." if data.n_coders > 8 else "")
    detected = (f"REFI-QDA project '{project}'" + (f" (from {origin})" if origin else "") +
                f": {data.n_spans:,} span{'s' * (data.n_spans != 1)} by {data.n_coders} coder"
                f"{'s' * (data.n_coders != 1)} ({coder_list}) over {data.n_documents} text source"
                f"{'s' * (data.n_documents != 1)}, {len(data.codes)} codes ({depth} level{'s' * (depth != 1)}); "
                f"positions: code points of the plain text from 0, end {span_end}"
                + (", read as exclusive" if span_end == "inclusive" else "")
                + (f", CRLF counted as {crlf}" if crlf != "two" else "")
                + (", UTF-16 units" if positions == "utf-16" else ""))
    report = ReadReport(detected=detected, files=(name,), units_read=len(docs), values_read=n_codings,
                        values_missing=0, notes=tuple(notes), left_out=tuple(left_out),
                        checksums={})
    return replace(data, report=report)


def _name_check(reader: _Reader, texts: list, docs: list, *, span_end: str, crlf: str, positions: str) -> list[str]:
    """Selections whose name spells out their text (not truncated): which reading of the
    positions reproduces the most of them."""
    c = reader.c
    sample = [(s, n) for s, n in c.named if not n.endswith(("…", "...")) and texts[c.sel_doc[s]] is not None]
    if len(sample) < 3:
        return []
    readings = {(span_end, crlf, positions, 0)}
    readings.add(("inclusive" if span_end == "exclusive" else "exclusive", crlf, positions, 0))
    if any(t is not None and "\r\n" in t for t in texts):
        readings.add((span_end, "one" if crlf == "two" else "two", positions, 0))
    if any(t is not None and has_astral(t) for t in texts):
        readings.add((span_end, crlf, "utf-16" if positions == "codepoints" else "codepoints", 0))
    if any(d.bom for d in docs):
        readings.add((span_end, crlf, positions, 1))

    def fits(reading) -> int:
        end_rule, crlf_rule, pos_rule, shift = reading
        hits = 0
        cache: dict[int, Any] = {}
        for s, name in sample:
            d = c.sel_doc[s]
            try:
                a, b = int(c.sel_start[s]) - shift, int(c.sel_end[s]) - shift + (end_rule == "inclusive")
            except (TypeError, ValueError):
                continue
            if d not in cache:
                cache[d] = exporter_starts(texts[d], crlf_rule, pos_rule)
            a, b = (int(x) for x in to_codepoints(np.array([a, b]), cache[d]))
            hits += texts[d][a:b] == name if a >= 0 else 0
        return hits

    scores = {r: fits(r) for r in readings}
    used = (span_end, crlf, positions, 0)
    best = max(scores, key=lambda r: (scores[r], r == used))
    out = [f"name check: {scores[used]} of {len(sample)} selections whose name spells out their text match it "
           f"under the reading used"]
    if best != used and scores[best] > scores[used]:
        end_rule, crlf_rule, pos_rule, shift = best
        change = []
        if end_rule != span_end:
            change.append(f"span_end='{end_rule}'")
        if crlf_rule != crlf:
            change.append(f"crlf='{crlf_rule}'")
        if pos_rule != positions:
            change.append(f"positions='{pos_rule}'")
        if shift:
            change.append("positions that count the byte-order mark")
        out.append(f"warning: {scores[best]} of {len(sample)} match with {' and '.join(change)}: the exporter may "
                   f"count positions that way")
    return out
