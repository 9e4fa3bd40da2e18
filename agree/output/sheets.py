"""One blank coding workbook per coder, and the manifest of the draw.

`write_coding_sheets` writes `<coder>.xlsx` for every coder, a single sheet with the header
``unit_id, [stratify and kept columns], text, code, notes`` (the context columns shaded, the
codebook as a drop-down list on `code`), plus `manifest.csv` (unit id, stratum, draw order,
corpus row) and `manifest.json` (seed, n, corpus checksum, date). The per-coder files read
straight back with `agree.read([...])`: the coder name is the file stem.

Every cell copied from the list of units (unit ids, texts, kept columns and their names) is
stored as text, never as a formula or a number (`agree.core.cells.put_cell`), and the manifest
is written by the one CSV writer (`agree.core.cells.csv_text`), so both read back exactly.
Nothing is written over a file the run reads (the list of units, the codebook, the files of
units to exclude), even with ``force``; every file is checked before the first is written.
"""

from __future__ import annotations

import datetime as _dt
import io
import json
import os
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np
import pandas as pd

from agree.analysis.sampling import detect_id_column, detect_text_column, stratum_label, unit_keys
from agree.core.cells import cell_text, csv_text, put_cell, xml_safe
from agree.core.files import atomic_write_bytes, atomic_write_text, check_output, make_folder
from agree.core.model import AgreeError, normalise_value
from agree.core.seeds import resolve_seed

SHEET_COLUMNS = ("unit_id", "text", "code", "notes")
_BAD_NAME = re.compile(r'[\\/:*?"<>|\x00-\x1f]')


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
    context_columns: tuple[str, ...] = ()   # corpus columns copied into the sheets
    excluded: int = 0                        # corpus units not drawn: already coded
    exclude_not_in_corpus: int = 0           # ids to exclude that the corpus does not have

    def to_dict(self) -> dict[str, Any]:
        return {"folder": self.folder, "files": list(self.files), "manifest_csv": self.manifest_csv,
                "manifest_json": self.manifest_json, "coders": list(self.coders), "n": self.n,
                "seed": self.seed, "shuffled": self.shuffled, "drop_down": self.drop_down,
                "context_columns": list(self.context_columns), "excluded": self.excluded,
                "exclude_not_in_corpus": self.exclude_not_in_corpus}


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


def _workbook_bytes(ids: Sequence[Any], context: Mapping[str, Sequence[Any]], texts: Sequence[Any],
                    categories: Sequence[str] | None, coder: str, several: bool = True) -> tuple[bytes, str | None]:
    """One coder's workbook: unit_id, the context columns (shaded: to read, not to edit),
    text, code, notes."""
    from openpyxl import Workbook
    from openpyxl.comments import Comment
    from openpyxl.styles import Alignment, Font, PatternFill
    from openpyxl.utils import get_column_letter
    from openpyxl.worksheet.datavalidation import DataValidation

    wb = Workbook()
    ws = wb.active
    ws.title = "coding"
    header = ["unit_id", *context, "text", "code", "notes"]
    for j, name in enumerate(header, start=1):
        cell = ws.cell(row=1, column=j)
        put_cell(cell, name)
        cell.font = Font(bold=True)
    columns = [ids, *context.values(), texts]
    for i, values in enumerate(zip(*columns), start=2):      # copied from the list: text, never formulas
        for j, value in enumerate(values, start=1):
            put_cell(ws.cell(row=i, column=j), cell_text(value))
    last = len(ids) + 1
    shade = PatternFill("solid", start_color="EDEDED", end_color="EDEDED")
    muted = Font(color="595959")
    n_fixed = 1 + len(context)                  # unit_id and context: to read, not to edit
    for row in ws.iter_rows(min_row=2, max_row=last, min_col=1, max_col=n_fixed):
        for cell in row:
            cell.fill = shade
            cell.font = muted
    for j in range(1, n_fixed + 1):
        ws.cell(row=1, column=j).fill = shade
    for j, name in enumerate(context, start=2):
        ws.cell(row=1, column=j).comment = Comment(xml_safe(
            f"'{name}' from the list of units, for context (and for scoring with --keep {name}). "
            "Leave it as it is."), "agree", width=260, height=80)
        ws.column_dimensions[get_column_letter(j)].width = max(12, min(30, len(str(name)) + 4))
    text_col = get_column_letter(n_fixed + 1)
    code_col = get_column_letter(n_fixed + 2)
    notes_col = get_column_letter(n_fixed + 3)
    ws.column_dimensions["A"].width = 14
    ws.column_dimensions[text_col].width = 80
    ws.column_dimensions[code_col].width = 18
    ws.column_dimensions[notes_col].width = 30
    for row in ws.iter_rows(min_row=2, max_row=last, min_col=n_fixed + 1, max_col=n_fixed + 1):
        row[0].alignment = Alignment(wrap_text=True, vertical="top")
    ws.freeze_panes = ws.cell(row=2, column=n_fixed + 1).coordinate
    mode = None
    inline = ",".join(categories or ())
    # Excel caps an inline list at 255 characters and splits it on commas. A longer list would
    # need a second sheet, which would stop the sheet reading back as a plain per-coder file.
    if categories and len(inline) <= 250 and not any("," in c or '"' in c or xml_safe(c) != c for c in categories):
        dv = DataValidation(type="list", formula1=f'"{inline}"', allow_blank=True)
        dv.showErrorMessage = True
        if several:   # a warning, not a stop: "a; b" (several codes of the list) can be kept
            dv.errorStyle = "warning"
            dv.errorTitle = "Not one codebook code"
            dv.error = ("Pick a code from the codebook list. For several codes, write them in one cell "
                        "separated by '; ' (each from the list) and choose Yes.")
        else:
            dv.errorTitle = "Not a codebook code"
            dv.error = "Pick a code from the codebook list."
        ws.add_data_validation(dv)
        dv.add(f"{code_col}2:{code_col}{max(last, 2)}")
        mode = "inline list"
    wb.properties.title = f"Coding sheet for {coder}"
    buffer = io.BytesIO()
    wb.save(buffer)
    return buffer.getvalue(), mode


def _context_columns(sample: pd.DataFrame, keep: Sequence[str], id_col: str,
                     text_col: str | None) -> list[str]:
    """The corpus columns copied into every coder's sheet: the stratify column, then `keep`."""
    stratify = sample.attrs.get("stratify")
    wanted = ([stratify] if stratify else []) + [str(k) for k in keep]
    columns = [str(c) for c in sample.columns]
    out: list[str] = []
    problems = []
    for name in wanted:
        if name in (id_col, text_col) or name in out:
            continue
        if name not in columns:
            problems.append(AgreeError(f"no column '{name}' in the list of units to copy into the sheets",
                                       hint=f"columns are: {', '.join(columns)}", code="no-keep-column"))
        elif name.strip().lower() in SHEET_COLUMNS or name in ("draw_order", "corpus_row"):
            problems.append(AgreeError(f"the column '{name}' cannot be copied into the sheets: the "
                                       "sheets have a column of that name",
                                       hint="rename it in the list of units", code="column-clash"))
        else:
            out.append(name)
    if problems:
        raise AgreeError(problems[0].message, hint=problems[0].hint, code=problems[0].code,
                         problems=problems)
    return out


def write_coding_sheets(sample: pd.DataFrame, outdir: str | os.PathLike, *, coders: Sequence[str],
                        codebook: Sequence[Any] | Mapping[Any, str] | None = None,
                        shuffle: bool = False, seed: int | None = None, id_col: str | None = None,
                        text_col: str | None = None, force: bool = False,
                        corpus_path: str | os.PathLike | None = None,
                        keep: Sequence[str] = (), several_codes: bool = True) -> CodingSheets:
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
    force : write into a non-empty folder (earlier outputs of the same name are replaced; the
        corpus and any other file the run reads never are).
    corpus_path : the corpus file, protected from being overwritten (defaults to the
        sample's recorded source).
    keep : other corpus columns to copy into every sheet, after the unit id, for context.
        The stratify column of a stratified draw is always copied, so the filled sheets can
        be scored with ``--keep <column>`` (a stratum is not a cluster: do not resample it).
    several_codes : a code cell may hold several codes of the list separated by "; " (read back
        as a set of codes): the drop-down warns about a value not in the list but lets the coder
        keep it. False: one code a cell, anything else is stopped.

    Returns
    -------
    CodingSheets
    """
    names = _check_coders(coders)
    id_col = detect_id_column(sample, id_col or sample.attrs.get("id_col"))
    text_col = detect_text_column(sample, text_col)
    unit_keys(sample, id_col)
    context_cols = _context_columns(sample, keep, id_col, text_col)
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
        raise AgreeError(f"'{folder}' exists and is not a folder", hint="choose another output folder",
                         code="output-exists")
    if folder.is_dir() and any(folder.iterdir()) and not force:
        raise AgreeError(f"the folder '{folder}' is not empty",
                         hint="choose a new folder, or use --force to write into it",
                         code="output-exists")
    targets = [folder / f"{name}.xlsx" for name in names] + [folder / "manifest.csv",
                                                             folder / "manifest.json"]
    protected = corpus_path or sample.attrs.get("source")
    if folder.is_dir():   # every file before the first is written: none may be an input of the run
        for target in targets:
            check_output(target, [protected], force=True)
    make_folder(folder)

    seed = sample.attrs.get("seed") if seed is None else seed
    seed = resolve_seed(seed)
    if "corpus_row" in sample.columns:
        base_order = np.argsort(sample["corpus_row"].to_numpy(), kind="stable")
    else:
        base_order = np.arange(len(sample))
    ids = sample[id_col].to_numpy(dtype=object)
    texts = sample[text_col].to_numpy(dtype=object) if text_col else np.full(len(sample), None, object)

    drop_down = None
    for i, (name, target) in enumerate(zip(names, targets)):
        order = np.random.default_rng([seed, 101, i]).permutation(len(sample)) if shuffle else base_order
        context = {c: sample[c].to_numpy(dtype=object)[order] for c in context_cols}
        data, drop_down = _workbook_bytes(ids[order], context, texts[order], categories, name, several_codes)
        atomic_write_bytes(target, data)

    stratify = sample.attrs.get("stratify")
    draw = sample["draw_order"].tolist() if "draw_order" in sample.columns else list(range(1, len(sample) + 1))
    rows = sample["corpus_row"].tolist() if "corpus_row" in sample.columns else [None] * len(sample)
    strata = ([stratum_label(v) for v in sample[stratify].tolist()]
              if stratify and stratify in sample.columns else [None] * len(sample))
    manifest = sorted(([cell_text(uid), stratum, d, r] for uid, stratum, d, r
                       in zip(ids.tolist(), strata, draw, rows)), key=lambda t: t[2])
    atomic_write_text(targets[-2], csv_text(["unit_id", "stratum", "draw_order", "corpus_row"], manifest))

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
        "context_columns": context_cols,
        "excluded": sample.attrs.get("excluded", 0),
        "exclude_not_in_corpus": sample.attrs.get("exclude_not_in_corpus", 0),
        "allocation": sample.attrs.get("allocation"),
        "strata_sizes": sample.attrs.get("strata_sizes"),
        "coders": list(names),
        "shuffled": bool(shuffle),
        "codebook": categories,
        "files": [t.name for t in targets[:-2]],
    }
    atomic_write_text(targets[-1], json.dumps(meta, indent=2, ensure_ascii=False) + "\n")
    return CodingSheets(folder=str(folder), files=tuple(str(t) for t in targets[:-2]),
                        manifest_csv=str(targets[-2]), manifest_json=str(targets[-1]), coders=names,
                        n=int(len(sample)), seed=seed, shuffled=bool(shuffle), drop_down=drop_down,
                        context_columns=tuple(context_cols),
                        excluded=int(sample.attrs.get("excluded", 0) or 0),
                        exclude_not_in_corpus=int(sample.attrs.get("exclude_not_in_corpus", 0) or 0))
