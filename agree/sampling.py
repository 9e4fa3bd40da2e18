"""Drawing the reliability subsample and writing one blank coding workbook per coder.

`draw_sample` draws n units from the full list of units, simply at random or stratified by a
grouping column (largest-remainder allocation: every stratum gets its proportional share
rounded down, and the units left over go to the strata with the largest remainders, so each
stratum's count is within one unit of proportional). The draw is reproducible from the seed
and never takes a unit twice.

`write_coding_sheets` writes `<coder>.xlsx` for every coder, a single sheet with the header
``unit_id, text, code, notes`` (the codebook as a drop-down list on `code`), plus
`manifest.csv` (unit id, stratum, draw order, corpus row) and `manifest.json` (seed, n, corpus
checksum, date). The per-coder files read straight back with `agree.read([...])`: the coder
name is the file stem.
"""

from __future__ import annotations

import csv
import datetime as _dt
import hashlib
import io
import json
import os
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np
import pandas as pd

from agree.files import atomic_write_bytes
from agree.model import AgreeError, cell_location, normalise_value

ID_COLUMN_NAMES = ("unit_id", "unit", "id", "unit id", "unitid", "segment_id", "excerpt_id",
                   "item_id", "case_id", "answer_id", "response_id")
TEXT_COLUMN_NAMES = ("text", "excerpt", "content", "segment", "answer", "response", "quote",
                     "passage", "statement")
SHEET_COLUMNS = ("unit_id", "text", "code", "notes")
_BAD_NAME = re.compile(r'[\\/:*?"<>|\x00-\x1f]')


# ---------------------------------------------------------------------------------------
# Reading the corpus
# ---------------------------------------------------------------------------------------

def read_corpus(path: str | os.PathLike, *, sheet: str | int | None = None) -> pd.DataFrame:
    """Read the full list of units from CSV or XLSX (all columns as text, nothing dropped).

    The file's path and SHA-256 are kept in ``frame.attrs`` ("source", "checksum") so the
    manifest can name them.
    """
    path = Path(path)
    if not path.is_file():
        raise AgreeError(f"no such file: {path}", code="no-file")
    data = path.read_bytes()
    suffix = path.suffix.lower()
    try:
        if suffix in (".xlsx", ".xlsm"):
            frame = pd.read_excel(io.BytesIO(data), sheet_name=0 if sheet is None else sheet,
                                  dtype=object, engine="openpyxl")
        elif suffix in (".csv", ".txt", ".tsv"):
            frame = pd.read_csv(io.BytesIO(data), dtype=str, keep_default_na=False,
                                sep="\t" if suffix == ".tsv" else None, engine="python",
                                encoding="utf-8-sig")
        else:
            raise AgreeError(f"cannot read '{path.name}': the list of units must be CSV or XLSX",
                             code="corpus-format")
    except AgreeError:
        raise
    except Exception as exc:  # pandas/openpyxl parse errors become one line
        raise AgreeError(f"could not read {path.name}: {exc}", code="corpus-unreadable") from exc
    frame.attrs["source"] = str(path)
    frame.attrs["sheet"] = None if sheet is None else str(sheet)
    frame.attrs["checksum"] = hashlib.sha256(data).hexdigest()
    return frame


def detect_id_column(corpus: pd.DataFrame, id_col: str | None = None) -> str:
    """The unit-id column: `id_col` if given, else the first column whose name is a usual id
    name (unit_id, unit, id, ...; case and spaces ignored)."""
    columns = [str(c) for c in corpus.columns]
    if id_col is not None:
        if id_col not in columns:
            raise AgreeError(f"no column '{id_col}' in the list of units",
                             hint=f"columns are: {', '.join(columns)}", code="no-id-column")
        return id_col
    norm = {c.strip().lower().replace(" ", "_"): c for c in columns}
    for name in ID_COLUMN_NAMES:
        key = name.replace(" ", "_")
        if key in norm:
            return norm[key]
    raise AgreeError("could not find the unit-id column",
                     hint=f"name it unit_id or pass --unit-col; columns are: {', '.join(columns)}",
                     code="no-id-column")


def detect_text_column(corpus: pd.DataFrame, text_col: str | None = None) -> str | None:
    """The text column: `text_col` if given, else the first usual text name; None if none."""
    columns = [str(c) for c in corpus.columns]
    if text_col is not None:
        if text_col not in columns:
            raise AgreeError(f"no column '{text_col}' in the list of units",
                             hint=f"columns are: {', '.join(columns)}", code="no-text-column")
        return text_col
    norm = {c.strip().lower(): c for c in columns}
    for name in TEXT_COLUMN_NAMES:
        if name in norm:
            return norm[name]
    return None


def _row_where(corpus: pd.DataFrame, position: int, column: str) -> str:
    """Cell location of a corpus row as a spreadsheet counts it (header = row 1)."""
    return cell_location(corpus.attrs.get("source"), corpus.attrs.get("sheet"), position + 2, column)


def _unit_keys(corpus: pd.DataFrame, id_col: str) -> list[str]:
    """Normalised unit ids (1 and 1.0 are the same id); errors for blank and duplicate ids."""
    problems: list[AgreeError] = []
    keys: list[str] = []
    first_seen: dict[str, int] = {}
    for pos, raw in enumerate(corpus[id_col].tolist()):
        value = normalise_value(raw.strip() if isinstance(raw, str) else raw)
        if value is None:
            problems.append(AgreeError("blank unit id", where=_row_where(corpus, pos, id_col),
                                       hint="every unit needs an id", code="blank-unit-id"))
            keys.append("")
            continue
        key = str(value)
        if key in first_seen:
            problems.append(AgreeError(
                f"duplicate unit id '{key}' (first at row {first_seen[key] + 2})",
                where=_row_where(corpus, pos, id_col), hint="unit ids must be unique",
                code="duplicate-unit-id"))
        else:
            first_seen[key] = pos
        keys.append(key)
    if problems:
        first = problems[0]
        raise AgreeError(first.message, where=first.where, hint=first.hint, code=first.code,
                         problems=problems)
    return keys


# ---------------------------------------------------------------------------------------
# Drawing the sample
# ---------------------------------------------------------------------------------------

def largest_remainder_allocation(sizes: Sequence[int], n: int) -> np.ndarray:
    """Split n draws over strata of the given sizes in proportion (largest remainder).

    Notes
    -----
    quota_s = n N_s / N; each stratum gets floor(quota_s), and the n - sum floor(quota_s) units
    left over go one each to the strata with the largest fractional parts (ties to the
    earlier stratum). So |n_s - quota_s| < 1 for every stratum, and n_s <= N_s.
    """
    sizes = np.asarray(sizes, dtype=np.int64)
    total = int(sizes.sum())
    quota = n * sizes / total
    alloc = np.floor(quota).astype(np.int64)
    left = n - int(alloc.sum())
    order = np.lexsort((np.arange(len(sizes)), -(quota - alloc)))
    alloc[order[:left]] += 1
    return alloc


def draw_sample(corpus: pd.DataFrame, n: int, *, stratify: str | None = None,
                seed: int | None = None, id_col: str | None = None) -> pd.DataFrame:
    """Draw the reliability subsample from the full list of units.

    Parameters
    ----------
    corpus : one row per unit, with a unit-id column (detected by name, or `id_col`) and any
        other columns (text, document, participant, ...).
    n : number of units to draw (at most the number of units).
    stratify : a grouping column; each group then gets its proportional share (within one
        unit; blank group values form their own group "(blank)").
    seed : makes the draw reproducible; drawn and recorded when None.
    id_col : the unit-id column, when its name is not a usual one.

    Returns
    -------
    DataFrame
        The drawn rows (all corpus columns) in draw order, with two added columns:
        ``draw_order`` (1..n) and ``corpus_row`` (the row in the corpus sheet, header = 1).
        ``attrs`` records seed, id column, stratify column, allocation, corpus size and checksum.
    """
    if not isinstance(corpus, pd.DataFrame):
        raise AgreeError("the list of units must be a table (DataFrame)", code="corpus-format")
    id_col = detect_id_column(corpus, id_col)
    for added in ("draw_order", "corpus_row"):
        if added in corpus.columns:
            raise AgreeError(f"the list of units already has a column '{added}'",
                             hint="rename it; the sample adds this column", code="column-clash")
    _unit_keys(corpus, id_col)
    total = len(corpus)
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 1:
        raise AgreeError(f"the number of units to draw must be a positive whole number; got {n}",
                         code="sample-size")
    if n > total:
        raise AgreeError(f"cannot draw {n} units from a list of {total}", code="sample-too-large",
                         hint=f"draw at most {total}")
    if seed is None:
        seed = int(np.random.SeedSequence().generate_state(1)[0])
    seed = int(seed)
    rng = np.random.default_rng(seed)

    allocation: dict[str, int] | None = None
    strata_labels = None
    if stratify is None:
        chosen = rng.choice(total, size=n, replace=False)
    else:
        if stratify not in corpus.columns:
            raise AgreeError(f"no column '{stratify}' to stratify by",
                             hint=f"columns are: {', '.join(map(str, corpus.columns))}",
                             code="no-stratify-column")
        strata_labels = np.array([_stratum_label(v) for v in corpus[stratify].tolist()], dtype=object)
        names = list(dict.fromkeys(strata_labels.tolist()))     # first-appearance order
        members = [np.flatnonzero(strata_labels == s) for s in names]
        alloc = largest_remainder_allocation([len(m) for m in members], n)
        parts = [rng.choice(m, size=k, replace=False) for m, k in zip(members, alloc)]
        chosen = rng.permutation(np.concatenate(parts))
        allocation = {s: int(k) for s, k in zip(names, alloc)}

    sample = corpus.iloc[chosen].copy()
    sample["draw_order"] = np.arange(1, n + 1)
    sample["corpus_row"] = chosen + 2
    sample = sample.reset_index(drop=True)
    checksum = corpus.attrs.get("checksum")
    checksum_of = "file"
    if checksum is None:
        checksum = hashlib.sha256(corpus.to_csv(index=False).encode("utf-8")).hexdigest()
        checksum_of = "table (CSV form)"
    sample.attrs = {
        "seed": seed, "n": int(n), "id_col": id_col, "stratify": stratify,
        "allocation": allocation, "strata_sizes": None if strata_labels is None else {
            s: int(np.sum(strata_labels == s)) for s in allocation},
        "corpus_size": total, "corpus_checksum": checksum, "checksum_of": checksum_of,
        "source": corpus.attrs.get("source"),
    }
    return sample


def _stratum_label(value: Any) -> str:
    v = normalise_value(value.strip() if isinstance(value, str) else value)
    return "(blank)" if v is None else str(v)


# ---------------------------------------------------------------------------------------
# Writing the coding workbooks
# ---------------------------------------------------------------------------------------

@dataclass(frozen=True)
class CodingSheets:
    """What `write_coding_sheets` wrote."""

    folder: str
    files: tuple[str, ...]
    manifest_csv: str
    manifest_json: str
    coders: tuple[str, ...]
    n: int
    seed: int
    shuffled: bool
    drop_down: str | None       # "inline list", or None (no codebook, or too long for one)

    def to_dict(self) -> dict[str, Any]:
        return {"folder": self.folder, "files": list(self.files), "manifest_csv": self.manifest_csv,
                "manifest_json": self.manifest_json, "coders": list(self.coders), "n": self.n,
                "seed": self.seed, "shuffled": self.shuffled, "drop_down": self.drop_down}


def load_codebook_categories(path: str | os.PathLike) -> dict[str, str]:
    """Categories (and descriptions where given) from a codebook file.

    .txt: one category per line. .csv/.xlsx: the column named code/category/label (else the
    first column), and description/definition (else none).
    """
    path = Path(path)
    if not path.is_file():
        raise AgreeError(f"no such file: {path}", code="no-file")
    suffix = path.suffix.lower()
    if suffix in (".txt", ".md"):
        lines = [ln.strip() for ln in path.read_text(encoding="utf-8-sig").splitlines()]
        return {ln: "" for ln in lines if ln}
    if suffix in (".csv", ".tsv"):
        frame = pd.read_csv(path, dtype=str, keep_default_na=False, sep=None, engine="python",
                            encoding="utf-8-sig")
    elif suffix in (".xlsx", ".xlsm"):
        frame = pd.read_excel(path, dtype=object, engine="openpyxl")
    else:
        raise AgreeError(f"cannot read the codebook '{path.name}': use TXT, CSV or XLSX",
                         code="codebook-format")
    lower = {str(c).strip().lower(): c for c in frame.columns}
    code_col = next((lower[k] for k in ("code", "category", "label", "name") if k in lower),
                    frame.columns[0])
    desc_col = next((lower[k] for k in ("description", "definition", "meaning") if k in lower), None)
    out: dict[str, str] = {}
    for i, row in frame.iterrows():
        value = normalise_value(row[code_col])
        if value is None:
            continue
        out[str(value).strip()] = "" if desc_col is None or row[desc_col] is None else str(row[desc_col])
    if not out:
        raise AgreeError(f"the codebook '{path.name}' lists no categories", code="codebook-empty")
    return out


def _check_coders(coders: Sequence[str]) -> tuple[str, ...]:
    names = tuple(str(c).strip() for c in coders)
    problems = []
    if len(names) < 2:
        problems.append(AgreeError("at least two coders are needed", hint="--coders A,B",
                                   code="too-few-coders"))
    for name in names:
        if not name or _BAD_NAME.search(name) or name.startswith(".") or \
                name.lower() in ("manifest", "con", "nul", "prn", "aux"):
            problems.append(AgreeError(f"'{name}' cannot be used as a coder name and file name",
                                       hint="use letters, digits, spaces, - or _",
                                       code="bad-coder-name"))
    folded = [n.casefold() for n in names]
    if len(set(folded)) != len(folded):
        problems.append(AgreeError("coder names must differ (ignoring case)", code="duplicate-coder"))
    if problems:
        raise AgreeError(problems[0].message, hint=problems[0].hint, code=problems[0].code,
                         problems=problems)
    return names


def _cell(value: Any) -> Any:
    """A value openpyxl can store: numpy scalars become Python, missing becomes blank."""
    if value is None:
        return None
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and np.isnan(value):
        return None
    return value


def _workbook_bytes(ids: Sequence[Any], texts: Sequence[Any], categories: Sequence[str] | None,
                    coder: str) -> tuple[bytes, str | None]:
    from openpyxl import Workbook
    from openpyxl.styles import Alignment, Font
    from openpyxl.worksheet.datavalidation import DataValidation

    wb = Workbook()
    ws = wb.active
    ws.title = "coding"
    ws.append(list(SHEET_COLUMNS))
    for cell in ws[1]:
        cell.font = Font(bold=True)
    for uid, text in zip(ids, texts):
        ws.append([_cell(uid), _cell(text), None, None])
    last = len(ids) + 1
    ws.column_dimensions["A"].width = 14
    ws.column_dimensions["B"].width = 80
    ws.column_dimensions["C"].width = 18
    ws.column_dimensions["D"].width = 30
    for row in ws.iter_rows(min_row=2, max_row=last, min_col=2, max_col=2):
        row[0].alignment = Alignment(wrap_text=True, vertical="top")
    ws.freeze_panes = "A2"
    mode = None
    inline = ",".join(categories or ())
    # Excel caps an inline list at 255 characters and splits it on commas. A longer list would
    # need a second sheet, which would stop the sheet reading back as a plain per-coder file.
    if categories and len(inline) <= 250 and not any(("," in c) or ('"' in c) for c in categories):
        dv = DataValidation(type="list", formula1=f'"{inline}"', allow_blank=True)
        dv.error = "Pick a code from the codebook list."
        dv.errorTitle = "Not a codebook code"
        dv.showErrorMessage = True
        ws.add_data_validation(dv)
        dv.add(f"C2:C{max(last, 2)}")
        mode = "inline list"
    wb.properties.title = f"Coding sheet for {coder}"
    buffer = io.BytesIO()
    wb.save(buffer)
    return buffer.getvalue(), mode


def write_coding_sheets(sample: pd.DataFrame, outdir: str | os.PathLike, *, coders: Sequence[str],
                        codebook: Sequence[Any] | Mapping[Any, str] | None = None,
                        shuffle: bool = False, seed: int | None = None, id_col: str | None = None,
                        text_col: str | None = None, force: bool = False,
                        corpus_path: str | os.PathLike | None = None) -> CodingSheets:
    """Write one blank coding workbook per coder, and the manifest.

    Parameters
    ----------
    sample : the output of `draw_sample` (or any table of units with an id column).
    outdir : folder to write into; created if missing. An existing non-empty folder is refused
        unless `force`.
    coders : coder names; each gets ``<coder>.xlsx``.
    codebook : categories (or {category: description}); they become the drop-down list of the
        `code` column.
    shuffle : give each coder the units in their own random order (seeded); otherwise every
        coder gets the corpus order.
    seed : seed for the shuffles; defaults to the sample's seed.
    id_col, text_col : columns of `sample`; detected by name when None.
    force : write into a non-empty folder (files of the same name are replaced; the corpus
        never is).
    corpus_path : the corpus file, protected from being overwritten (defaults to the
        sample's recorded source).

    Returns
    -------
    CodingSheets
    """
    names = _check_coders(coders)
    id_col = id_col or sample.attrs.get("id_col") or detect_id_column(sample)
    id_col = detect_id_column(sample, id_col)
    text_col = detect_text_column(sample, text_col)
    _unit_keys(sample, id_col)
    if len(sample) == 0:
        raise AgreeError("the sample has no units", code="sample-size")
    categories = None
    if codebook is not None:
        items = list(codebook.keys()) if isinstance(codebook, Mapping) else list(codebook)
        categories = [str(normalise_value(c)) for c in items if normalise_value(c) is not None]
        if len(categories) != len(set(categories)):
            raise AgreeError("the codebook lists a category twice", code="codebook-duplicate")
        if not categories:
            raise AgreeError("the codebook lists no categories", code="codebook-empty")

    folder = Path(outdir)
    if folder.exists() and not folder.is_dir():
        raise AgreeError(f"'{folder}' exists and is not a folder", code="output-exists")
    if folder.is_dir() and any(folder.iterdir()) and not force:
        raise AgreeError(f"the folder '{folder}' is not empty",
                         hint="choose a new folder, or use --force to write into it",
                         code="output-exists")
    folder.mkdir(parents=True, exist_ok=True)
    targets = [folder / f"{name}.xlsx" for name in names] + [folder / "manifest.csv",
                                                             folder / "manifest.json"]
    protected = corpus_path or sample.attrs.get("source")
    if protected is not None:
        corpus_real = Path(protected).resolve()
        for target in targets:
            if target.resolve() == corpus_real:
                raise AgreeError(f"writing '{target.name}' would overwrite the list of units",
                                 hint="write the sheets to another folder", code="would-overwrite-corpus")

    seed = sample.attrs.get("seed") if seed is None else seed
    if seed is None:
        seed = int(np.random.SeedSequence().generate_state(1)[0])
    seed = int(seed)
    if "corpus_row" in sample.columns:
        base_order = np.argsort(sample["corpus_row"].to_numpy(), kind="stable")
    else:
        base_order = np.arange(len(sample))
    ids = sample[id_col].to_numpy(dtype=object)
    texts = sample[text_col].to_numpy(dtype=object) if text_col else np.full(len(sample), None, object)

    drop_down = None
    for i, (name, target) in enumerate(zip(names, targets)):
        order = np.random.default_rng([seed, 101, i]).permutation(len(sample)) if shuffle else base_order
        data, drop_down = _workbook_bytes(ids[order], texts[order], categories, name)
        atomic_write_bytes(target, data)

    stratify = sample.attrs.get("stratify")
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(["unit_id", "stratum", "draw_order", "corpus_row"])
    draw = sample["draw_order"].tolist() if "draw_order" in sample.columns else list(range(1, len(sample) + 1))
    rows = sample["corpus_row"].tolist() if "corpus_row" in sample.columns else [""] * len(sample)
    strata = ([_stratum_label(v) for v in sample[stratify].tolist()]
              if stratify and stratify in sample.columns else [""] * len(sample))
    for uid, stratum, d, r in sorted(zip(ids.tolist(), strata, draw, rows), key=lambda t: t[2]):
        writer.writerow([_cell(uid), stratum, d, r])
    atomic_write_bytes(targets[-2], buffer.getvalue().encode("utf-8"))

    meta = {
        "seed": seed,
        "sample_seed": sample.attrs.get("seed"),
        "n": int(len(sample)),
        "corpus": sample.attrs.get("source"),
        "corpus_size": sample.attrs.get("corpus_size"),
        "corpus_checksum": sample.attrs.get("corpus_checksum"),
        "checksum_of": sample.attrs.get("checksum_of"),
        "checksum_algorithm": "sha256",
        "date": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        "id_column": id_col,
        "text_column": text_col,
        "stratify": stratify,
        "allocation": sample.attrs.get("allocation"),
        "strata_sizes": sample.attrs.get("strata_sizes"),
        "coders": list(names),
        "shuffled": bool(shuffle),
        "codebook": categories,
        "files": [t.name for t in targets[:-2]],
    }
    atomic_write_bytes(targets[-1], (json.dumps(meta, indent=2, ensure_ascii=False) + "\n").encode("utf-8"))
    return CodingSheets(folder=str(folder), files=tuple(str(t) for t in targets[:-2]),
                        manifest_csv=str(targets[-2]), manifest_json=str(targets[-1]), coders=names,
                        n=int(len(sample)), seed=seed, shuffled=bool(shuffle), drop_down=drop_down)
