"""Small REFI-QDA projects written by hand for the tests (XML as text, zipped with the standard
library), independent of `agree`'s own writer.

Invented scenario (synthetic): interviews with bakers on a night-shift bakery cooperative. Two
coders, "Iris" and "Tomás", code with a nested code book (Work/Night shift, Work/Craft, Feelings/
Pride, Feelings/Fatigue, and the folder Feelings, not codable). Texts mix non-ASCII letters, an
emoji outside the Basic Multilingual Plane and Windows line ends.
"""

from __future__ import annotations

import uuid
import zipfile
from dataclasses import dataclass, field
from pathlib import Path
from xml.sax.saxutils import quoteattr

NS = "urn:QDA-XML:project:1.0"

TEXTS = {
    "Baker A": "Iris: We start at 2 a.m., when the street is asleep.\r\n"
               "Baker A: The dough doesn't wait 🥐 — you learn its rhythm.\r\n"
               "Baker A: I'm proud when the crème brûlée sells out by seven.\r\n",
    "Baker B": "Tomás: How do nights feel after a year?\n"
               "Baker B: Tiring. Zoë and I swap shifts so nobody burns out.\n"
               "Baker B: Still, shaping loaves by hand is a craft I love.\n",
}
CODERS = {"Iris": "7f0c1a52-0d4b-4c6e-9d2a-1b3c4d5e6f70", "Tomás": "{8A1D2B63-1E5C-4D7F-8E3B-2C4D5E6F7081}"}
CODES = {  # path -> guid
    "Work": "a0000000-0000-4000-8000-000000000001",
    "Work/Night shift": "a0000000-0000-4000-8000-000000000002",
    "Work/Craft": "a0000000-0000-4000-8000-000000000003",
    "Feelings": "a0000000-0000-4000-8000-000000000004",
    "Feelings/Pride": "a0000000-0000-4000-8000-000000000005",
    "Feelings/Fatigue": "a0000000-0000-4000-8000-000000000006",
}
NOT_CODABLE = {"Feelings"}
DOCS = {"Baker A": "b0000000-0000-4000-8000-00000000000a", "Baker B": "b0000000-0000-4000-8000-00000000000b"}


def at(doc: str, phrase: str) -> tuple[int, int]:
    """Code-point offsets [start, end) of `phrase` in the document's text, by str.find."""
    start = TEXTS[doc].find(phrase)
    assert start >= 0, phrase
    return start, start + len(phrase)


# (document, coder, code, phrase): the coding, as the coders did it. Overlaps: Iris and Tomás mark
# different stretches around "start at 2 a.m."; only Iris coded "dough ... rhythm" (Craft).
CODINGS = [
    ("Baker A", "Iris", "Work/Night shift", "We start at 2 a.m., when the street is asleep."),
    ("Baker A", "Tomás", "Work/Night shift", "start at 2 a.m."),
    ("Baker A", "Iris", "Work/Craft", "The dough doesn't wait 🥐 — you learn its rhythm."),
    ("Baker A", "Iris", "Feelings/Pride", "I'm proud when the crème brûlée sells out by seven."),
    ("Baker A", "Tomás", "Feelings/Pride", "I'm proud when the crème brûlée sells out"),
    ("Baker B", "Iris", "Feelings/Fatigue", "Tiring."),
    ("Baker B", "Tomás", "Feelings/Fatigue", "Tiring. Zoë and I swap shifts so nobody burns out."),
    ("Baker B", "Tomás", "Work/Night shift", "Zoë and I swap shifts"),
    ("Baker B", "Iris", "Work/Craft", "shaping loaves by hand is a craft I love."),
    ("Baker B", "Tomás", "Work/Craft", "shaping loaves by hand is a craft"),
]


def expected_rows(codings=CODINGS) -> list[tuple[str, str, str, int, int]]:
    """(document, coder, code, start, end), sorted, from str.find on the texts."""
    return sorted((d, c, k, *at(d, p)) for d, c, k, p in codings)


def guid(n: int, prefix: str = "c") -> str:
    return f"{prefix * 8}-0000-4000-8000-{n:012d}"


@dataclass
class Selection:
    start: int
    end: int
    codings: list[tuple[str | None, str]]  # (creatingUser guid or None, code guid)
    user: str | None = None
    name: str | None = None
    guid: str = field(default_factory=lambda: str(uuid.uuid4()))


def codebook_xml(codes: dict[str, str] = CODES, not_codable=NOT_CODABLE) -> str:
    def children(prefix: str) -> str:
        out = []
        for path, g in codes.items():
            parent, _, name = path.rpartition("/")
            if parent == prefix:
                codable = "false" if path in not_codable else "true"
                out.append(f'<Code guid="{g}" name={quoteattr(name)} isCodable="{codable}">{children(path)}</Code>')
        return "".join(out)

    return f"<CodeBook><Codes>{children('')}</Codes></CodeBook>"


def project_xml(sources: str, *, users: dict[str, str] = CODERS, codebook: str | None = None,
                namespace: str | None = NS, extra: str = "", name: str = "Night bakery") -> str:
    ns = f' xmlns="{namespace}"' if namespace else ""
    user_xml = "".join(f'<User guid="{g}" name={quoteattr(n)}/>' for n, g in users.items())
    return (f'<?xml version="1.0" encoding="utf-8"?>\n<Project{ns} name={quoteattr(name)} origin="hand-written test">'
            f'<Users>{user_xml}</Users>{codebook_xml() if codebook is None else codebook}'
            f'<Sources>{sources}</Sources>{extra}</Project>')


def text_source(doc_guid: str, name: str, selections: list[Selection], *, path: str | None = None,
                inline: str | None = None, whole: list[tuple[str | None, str]] = ()) -> str:
    attrs = f'guid="{doc_guid}" name={quoteattr(name)}'
    if path is not None:
        attrs += f' plainTextPath="{path}"'
    body = ""
    if inline is not None:
        body += f"<PlainTextContent>{_escape(inline)}</PlainTextContent>"
    for sel in selections:
        sel_attrs = f'guid="{sel.guid}" startPosition="{sel.start}" endPosition="{sel.end}"'
        if sel.user:
            sel_attrs += f' creatingUser="{sel.user}"'
        if sel.name is not None:
            sel_attrs += f" name={quoteattr(sel.name)}"
        body += f"<PlainTextSelection {sel_attrs}>{_codings(sel.codings)}</PlainTextSelection>"
    body += _codings(whole)
    return f"<TextSource {attrs}>{body}</TextSource>"


def _codings(codings) -> str:
    out = ""
    for user, code in codings:
        u = f' creatingUser="{user}"' if user else ""
        out += f'<Coding guid="{uuid.uuid4()}"{u}><CodeRef targetGUID="{code}"/></Coding>'
    return out


def _escape(text: str) -> str:
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;").replace("\r", "&#13;")


def standard_sources(*, end_offset: int = 0, names: bool = True, file_name=lambda g: f"{g}.txt",
                     count=None) -> str:
    """The two interviews with the codings of CODINGS, one selection per coding, the user on the
    coding. `end_offset` -1 writes inclusive ends; `count` maps (doc, start, end) to the exporter's count."""
    out = []
    for doc, doc_guid in DOCS.items():
        sels = []
        for d, coder, code, phrase in CODINGS:
            if d != doc:
                continue
            s, e = at(d, phrase)
            if count is not None:
                s, e = count(doc, s), count(doc, e)
            sels.append(Selection(s, e + end_offset, [(CODERS[coder], CODES[code])], name=phrase if names else None))
        out.append(text_source(doc_guid, doc, sels, path=f"internal://{file_name(doc_guid)}"))
    return "".join(out)


def write_qdpx(path: Path, xml: str, files: dict[str, bytes] | None = None, *, qde_name: str = "project.qde",
               folder: str = "sources") -> Path:
    if files is None:
        files = {f"{g}.txt": TEXTS[d].encode("utf-8") for d, g in DOCS.items()}
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as z:
        z.writestr(qde_name, xml.encode("utf-8"))
        for name, data in files.items():
            z.writestr(f"{folder}/{name}", data)
    return path


def standard_qdpx(path: Path, **kw) -> Path:
    return write_qdpx(path, project_xml(standard_sources(**kw)))


def span_rows(codings=CODINGS) -> list[dict]:
    return [dict(document=d, coder=c, code=k, start=s, end=e) for d, c, k, s, e in expected_rows(codings)]


def text_folder(folder: Path) -> Path:
    """The interviews as plain-text files named by document (UTF-8 bytes, line ends as written)."""
    folder.mkdir(exist_ok=True)
    for name, text in TEXTS.items():
        (folder / f"{name}.txt").write_bytes(text.encode("utf-8"))
    return folder
