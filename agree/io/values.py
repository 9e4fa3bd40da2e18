"""Values: from the distinct codes read (the `Encoder`'s vocabulary) to the values of
`CodingData`, their categories, order and level.

Several codes in one cell
-------------------------
When a text cell contains the separator (``sep``, ``;`` by default) every value becomes a set
of codes (``CodingData.set_valued``). Spaces around each code are removed and empty pieces
(``"a;;b"``, a trailing ``;``) are ignored. The notes say how many cells held several codes and
where the first are; when they are under 5% of the coded cells the note is a warning (a slip
in a few cells changes every coefficient). ``sep=None`` (``--sep ''``) never splits.

Checked
-------
A code not in the codebook is an error naming its cells (all such codes collected into one
error). At the ordinal level without a codebook, text among numbers (``NA`` among 1..5) is an
error, as at the interval and ratio levels; at the nominal level text such as ``NA`` among
numbers is read as a code, with a warning. Codes that differ only in case or surrounding spaces
are named in a warning.
"""

from __future__ import annotations

import difflib
from typing import Any, Callable

import numpy as np

from agree.core.model import MISSING, AgreeError, cell_location, value_sort_key
from agree.io.cells import DECIMAL_COMMA, Encoder, as_number, canonical_code, looks_missing
from agree.io.loaders import raise_all

__all__ = ["Values", "CellFinder"]

MAX_METRIC_VALUE = 1e150  # interval/ratio codes beyond this: their squared differences overflow
MULTI_SHOWN = 3  # cells with several codes named in the note
MULTI_WARNING_SHARE = 0.05  # below this share of coded cells, several codes per cell is a warning


class CellFinder:
    """Find the cells holding a given vocab entry (for error messages), vectorised.

    `value`, `rows` and `source` have one entry per cell; `weights`, when given, says how many
    cells each entry stands for (an entry per distinct code with the location of its first cell,
    as the pattern-count readers have), so counts in messages are counts of cells."""

    def __init__(self, value, rows, source, sources, weights=None):
        self.value, self.rows, self.source, self.sources = value, rows, source, sources
        self.weights = None if weights is None else np.asarray(weights, dtype=np.int64)

    def count(self, indices) -> int:
        """How many cells hold any of `indices` (all coded cells when None)."""
        hit = self.value >= 0 if indices is None else np.isin(self.value, indices)
        return int(hit.sum() if self.weights is None else self.weights[hit].sum())

    def _where(self, pos: int) -> str:
        s = self.sources[int(self.source[pos])]
        return cell_location(s[0], s[1], int(self.rows[pos]), s[2])

    def first(self, index: int) -> str:
        hit = np.flatnonzero(self.value == index)
        return self._where(int(hit[0])) if hit.size else ""

    def firsts(self, indices: list[int], k: int) -> list[tuple[str, int]]:
        """The first `k` cells (by source, then row) holding any of `indices`: (where, position)."""
        hit = np.flatnonzero(np.isin(self.value, indices))
        if not hit.size:
            return []
        order = np.lexsort((self.rows[hit], self.source[hit]))[:k]
        return [(self._where(int(hit[o])), int(hit[o])) for o in order]

    def first_of_many(self, indices: list[int]) -> tuple[str, int]:
        hit = np.flatnonzero(np.isin(self.value, indices))
        if not hit.size:
            return "", 0
        # earliest by source then row, as a reader would look for it
        order = np.lexsort((self.source[hit], self.rows[hit]))
        count = hit.size if self.weights is None else self.weights[hit].sum()
        return self._where(int(hit[order[0]])), int(count)


class Values:
    """Decides the values, categories, level and set-valuedness of the codes read; adds its
    notes (level chosen, several codes per cell, look-alike and case/space warnings) to `notes`."""

    def __init__(self, enc: Encoder, *, sep: str | None, presence: bool, notes: list[str]):
        self.enc, self.sep, self.presence, self.notes = enc, sep, presence, notes
        self.trim, self.casefold = enc.trim, enc.casefold

    def resolve(self, book, level, cell_of: CellFinder):
        """Final values, categories, vocab->value remap, set_valued, level."""
        value = cell_of.value
        if self.presence:
            atoms_sets = list(self.enc.presence_sets)
            set_valued = True
            book_atoms = self._presence_codebook_check(book)
        else:
            atoms = list(self.enc.vocab)
            listed = any(isinstance(a, frozenset) for a in atoms)  # list cells (Parquet lists of codes)
            split = self.sep is not None and any(isinstance(a, str) and self.sep in a for a in atoms)
            set_valued = listed or split
            if set_valued:
                atoms_sets = [self._split(a) for a in atoms]
        if set_valued:
            parts = list(dict.fromkeys(x for s in atoms_sets for x in s))
            merged = dict(zip(parts, self._numbers(parts, numeric=False, book=book, cell_of=cell_of,
                                                   owners=lambda a: [i for i, s in enumerate(atoms_sets) if a in s])))
            atoms_sets = [frozenset(merged[x] for x in s) for s in atoms_sets]
            parts = list(dict.fromkeys(merged[x] for x in parts))
            if level in ("interval", "ratio", "ordinal"):
                raise AgreeError(f"several codes per cell (set-valued data) cannot be read at the {level} level",
                                 where=cell_of.first(_first_multi(atoms_sets)), code="set-at-level",
                                 hint="use --level nominal (level='nominal'), or one code per cell")
            if book is not None and not self.presence:
                mapping = self._codebook_map(book, parts, lambda a: [i for i, s in enumerate(atoms_sets) if a in s],
                                             cell_of)
                atoms_sets = [frozenset(mapping[x] for x in s) for s in atoms_sets]
                categories = list(book.categories)
            elif book is not None:
                atoms_sets = [frozenset(book_atoms[x] for x in s) for s in atoms_sets]
                categories = list(book.categories)
            elif self.presence:
                categories = [cat for _, cat, _ in self.enc.presence_columns]
            else:
                categories = sorted(parts, key=value_sort_key)
            if not self.presence and split:   # (lists of codes: the loader's note says so)
                self.notes.append(self._multi_note(atoms, atoms_sets, value, cell_of))
            values = sorted(set(atoms_sets), key=value_sort_key)
            pos = {v: i for i, v in enumerate(values)}
            remap = np.array([pos[s] for s in atoms_sets] + [MISSING], dtype=np.int32)
            self._case_space_hints(parts, lambda a: cell_of.first_of_many(
                [i for i, s in enumerate(atoms_sets) if a in s])[0])
            return values, categories, remap, True, "nominal"

        data_level = level
        numeric = level in ("interval", "ratio") or (level == "ordinal" and book is None)
        spelled = [a for a in atoms]  # as read, for the level note
        atoms = self._numbers(atoms, numeric=numeric, book=book, cell_of=cell_of, owners=lambda a: [atoms.index(a)])
        text_atoms = [i for i, a in enumerate(atoms) if isinstance(a, str)]
        has_numbers = len(text_atoms) < len(atoms)
        if level in ("interval", "ratio"):
            huge = [i for i, a in enumerate(atoms) if not isinstance(a, str) and abs(a) > MAX_METRIC_VALUE]
            if huge:
                where, count = cell_of.first_of_many(huge)
                raise AgreeError(f"{str(spelled[huge[0]])!r} is too large for the {level} metric: squared "
                                 f"differences of codes beyond {MAX_METRIC_VALUE:.0e} overflow"
                                 + (f" ({count} cells)" if count > 1 else ""), where=where, code="non-finite",
                                 hint="rescale the codes (e.g. to thousands), or read them at the nominal or "
                                      "ordinal level")
        # ordinal without a codebook orders values by sorting them: text among numbers would land
        # above the highest scale point (e.g. "NA" among 1..5), so refuse it
        mixed_ordinal = level == "ordinal" and book is None and has_numbers
        if text_atoms and (level in ("interval", "ratio") or mixed_ordinal):
            problems = []
            for i in text_atoms[:50]:
                a = atoms[i]
                if looks_missing(a):
                    hint = (f"'{a}' looks like a missing value: leave such cells empty (an empty cell "
                            "is missing)")
                elif DECIMAL_COMMA.match(a):
                    hint = "write decimals with a point (1.5), not a comma"
                elif level == "ordinal":
                    hint = ("numbers only at this level (leave a cell empty for missing), or give a "
                            "codebook with an order column (--codebook) that places every code on the scale")
                else:
                    hint = "numbers only at this level; leave a cell empty for missing"
                where, count = cell_of.first_of_many([i])
                more = f" (and {count - 1} more cell{'s' * (count != 2)})" if count > 1 else ""
                what = "text among numbers at ordinal level" if level == "ordinal" else f"text at {level} level"
                problems.append(AgreeError(f"{what}: '{a}'{more}", where=where, hint=hint,
                                           code="text-at-ordinal" if level == "ordinal" else "text-at-interval"))
            raise_all(problems, "text values among numbers at ordinal level" if level == "ordinal"
                      else f"text values at {level} level")
        if book is None and has_numbers:
            self._lookalike_warnings(atoms, text_atoms, cell_of)
        if book is not None:
            mapping = self._codebook_map(book, atoms, lambda a: [i for i, x in enumerate(atoms) if x == a], cell_of)
            values = list(book.categories)
            if level in ("interval", "ratio") and all(as_number(c) is not None for c in values):
                # a scale of numbers however the codebook spells them (01, 02, ...): their values
                numbers = {c: as_number(c) for c in values}
                mapping = {a: numbers[c] for a, c in mapping.items()}
                values = [numbers[c] for c in values]
            pos = {v: i for i, v in enumerate(values)}
            remap = np.array([pos[mapping[a]] for a in atoms] + [MISSING], dtype=np.int32)
            if data_level is None:
                data_level = "ordinal" if book.ordered else "nominal"
                self.notes.append(f"level: {data_level} (from the codebook{' order' if book.ordered else ''}; "
                                  "set it with --level (level=...))")
        else:
            values = sorted(dict.fromkeys(atoms), key=value_sort_key)
            pos = {v: i for i, v in enumerate(values)}
            remap = np.array([pos[a] for a in atoms] + [MISSING], dtype=np.int32)
            if data_level is None:
                data_level = "nominal"
                if values and all(as_number(a) is not None for a in spelled):
                    self.notes.append("level: nominal (numbers read as categories; set --level ordinal, "
                                      "interval or ratio (level=...) if the numbers are a scale)")
            elif data_level == "ordinal" and text_atoms:
                self.notes.append("ordinal level without a codebook: categories ordered by sorting their "
                                  "names; give a codebook with an order column to set the order")
        self._case_space_hints(list(dict.fromkeys(atoms)), lambda a: cell_of.first(atoms.index(a)))
        return values, values, remap, False, data_level

    def _numbers(self, atoms: list, *, numeric: bool, book, cell_of, owners) -> list:
        """Each atom as the code it stands for (same length as `atoms`).

        Numbers that are not finite (infinity, or text such as ``1e309`` that overflows) are
        refused, naming their cells. Text written as a number in another spelling (``007``,
        ``+1``, ``1.50``, ``1e300``) is that number at a numeric level (`numeric`); otherwise it
        is the same code as a plain number (or codebook code) of equal value when there is one,
        else the text as read (several spellings of one value: the first read)."""
        number = [as_number(a) if isinstance(a, (str, int, float)) and not isinstance(a, bool) else None
                  for a in atoms]
        bad = [i for i, x in enumerate(number) if isinstance(x, float) and not np.isfinite(x)]
        if bad:
            problems = []
            for i in bad[:50]:
                where, count = cell_of.first_of_many(owners(atoms[i]))
                more = f" (and {count - 1} more cell{'s' * (count != 2)})" if count > 1 else ""
                problems.append(AgreeError(f"{str(atoms[i])!r} is not a finite number{more}", where=where,
                                           code="non-finite",
                                           hint="codes must be finite numbers or text; leave a cell empty for "
                                                "'not coded'"))
            raise_all(problems, "codes are not finite numbers")
        plain = {x for a, x in zip(atoms, number) if x is not None and not isinstance(a, str)}
        if book is not None:
            plain |= {as_number(c) for c in book.categories if not isinstance(c, str) and as_number(c) is not None}
            spelled = {as_number(c): c for c in book.categories if isinstance(c, str) and as_number(c) is not None}
        else:
            spelled = {}
        out, first = [], {}
        for a, x in zip(atoms, number):
            if x is None or not isinstance(a, str):
                out.append(a)
            elif numeric or x in plain:
                out.append(x)
            elif x in spelled:
                out.append(spelled[x])
            else:
                out.append(first.setdefault(x, a))
        return out

    def _multi_note(self, atoms, atoms_sets, value, cell_of) -> str:
        """Where the cells with several codes are, and what splitting them does to the analysis.
        A warning when they are few (under 5% of the coded cells): likely a slip, not a design."""
        multi = [i for i, s in enumerate(atoms_sets) if len(s) > 1]
        n_multi = cell_of.count(multi) if multi else 0
        n_coded = cell_of.count(None)
        share = n_multi / n_coded if n_coded else 0.0
        shown = cell_of.firsts(multi, MULTI_SHOWN)
        places = "; ".join(f"{where}: {atoms[int(cell_of.value[pos])]!r}" for where, pos in shown)
        more = ", ..." if n_multi > len(shown) else ""
        verb = "holds" if n_multi == 1 else "hold"
        what = (f"{n_multi} of {n_coded} coded cells ({share:.1%}) {verb} several codes separated by "
                f"'{self.sep}' (first: {places}{more})")
        stop = "--sep '' (sep=None) keeps each cell as one code"
        if n_multi and share < MULTI_WARNING_SHARE:
            return (f"warning: only {what}; because of {'it' if n_multi == 1 else 'them'} all the data are "
                    "analysed as sets of codes (set-valued), which changes every coefficient. Check "
                    f"{'that cell' if n_multi == 1 else 'those cells'}; {stop}")
        return f"several codes in one cell: {what}; the data are analysed as sets of codes (set-valued); {stop}"

    def _lookalike_warnings(self, atoms, text_atoms, cell_of) -> None:
        """Text such as 'NA' among numeric codes: read as a code of its own, most likely meant as
        missing. One warning per value (replacing the general note on such values)."""
        lookalikes = self.enc.stats.lookalikes
        for i in text_atoms:
            a = atoms[i]
            if not looks_missing(a):
                continue
            for raw in [k for k in lookalikes if k.strip().lower() == a.strip().lower()]:
                del lookalikes[raw]
            where, count = cell_of.first_of_many([i])
            self.notes.append(
                f"warning: '{a}' among numeric codes looks like a missing value but is read as a code of "
                f"its own ({count} cell{'s' * (count != 1)}; first: {where}); if it means 'not coded', "
                "leave those cells empty")

    def _split(self, a):
        if isinstance(a, frozenset):
            parts = (canonical_code(p, trim=True, casefold=self.casefold) for p in a)
            return frozenset(p for p in parts if p is not None)
        if not isinstance(a, str):
            return frozenset([a])
        parts = (canonical_code(p, trim=True, casefold=self.casefold) for p in a.split(self.sep))
        return frozenset(p for p in parts if p is not None)

    def _codebook_map(self, book, atoms, owners: Callable[[Any], list[int]], cell_of) -> dict:
        """Map each data atom to its codebook entry (a number to the entry of equal value however
        the codebook spells it); collect unknown codes into one error."""
        lookup = self._book_lookup(book)
        by_number = {as_number(c): c for c in book.categories if as_number(c) is not None}
        mapping, problems = {}, []
        for a in atoms:
            if a in lookup:
                mapping[a] = lookup[a]
                continue
            if not isinstance(a, str) and as_number(a) in by_number:
                mapping[a] = by_number[as_number(a)]
                continue
            where, count = cell_of.first_of_many(owners(a))
            names = [str(c) for c in book.categories]
            close = difflib.get_close_matches(str(a), names, n=1, cutoff=0.5)
            if not close and isinstance(a, str):
                close = difflib.get_close_matches(a.casefold(), [x.casefold() for x in names], n=1, cutoff=0.5)
                close = [names[[x.casefold() for x in names].index(close[0])]] if close else []
            hint = f"closest codebook entry: '{close[0]}'" if close else "add it to the codebook or fix the cell"
            if looks_missing(a):
                hint = (f"'{a}' looks like a missing value: leave such cells empty (an empty cell is "
                        "missing), or add it to the codebook if it is a code")
            more = f" (and {count - 1} more cell{'s' * (count != 2)})" if count > 1 else ""
            problems.append(AgreeError(f"code '{a}' is not in the codebook{more}", where=where,
                                       hint=hint, code="unknown-code"))
        if problems:
            first = problems[0]
            n = len(problems)
            src = f" ({book.source})" if getattr(book, "source", None) else ""
            summary = first.message if n == 1 else f"{n} codes are not in the codebook{src}; first: {first.message}"
            raise AgreeError(summary, where=first.where, hint=first.hint, code="unknown-code", problems=problems)
        return mapping

    def _book_lookup(self, book) -> dict:
        """Codebook entry by the code as data compare it (case-folded with --casefold). Two entries
        that differ only in case are one code under --casefold: refused, naming both."""
        if not self.casefold:
            return {c: c for c in book.categories}
        lookup: dict = {}
        for c in book.categories:
            key = c.casefold() if isinstance(c, str) else c
            if key in lookup:
                src = f" ({book.source})" if getattr(book, "source", None) else ""
                raise AgreeError(f"the codebook{src} lists '{lookup[key]}' and '{c}', which differ only in "
                                 "upper/lower case: with --casefold they are one code", code="bad-codebook",
                                 where=getattr(book, "source", None),
                                 hint="keep one of them in the codebook, or leave out --casefold (casefold=False) "
                                      "to keep them apart")
            lookup[key] = c
        return lookup

    def _presence_codebook_check(self, book) -> dict:
        if book is None:
            return {}
        lookup = self._book_lookup(book)
        problems, mapping = [], {}
        for t, cat, col in self.enc.presence_columns:
            key = cat
            if key in lookup:
                mapping[cat] = lookup[key]
                continue
            close = difflib.get_close_matches(str(cat), [str(c) for c in book.categories], n=1, cutoff=0.5)
            problems.append(AgreeError(f"code column '{col}' is not in the codebook",
                                       where=t.where(1, col), code="unknown-code",
                                       hint=f"closest codebook entry: '{close[0]}'" if close else
                                       "add it to the codebook or rename the column"))
        raise_all(problems, "code columns are not in the codebook")
        return mapping

    def _case_space_hints(self, atoms, locate):
        """Warn about codes that differ only in surrounding spaces or in case (they count as
        different codes), naming the first cells; `locate(atom)` gives a cell holding it."""
        texts = [a for a in atoms if isinstance(a, str)]

        def shown(group):
            return " / ".join(f"{x!r} ({locate(x)})" for x in group[:3])

        if not self.trim:
            groups: dict[str, list[str]] = {}
            for a in texts:
                groups.setdefault(a.strip(), []).append(a)
            clash = [g for g in groups.values() if len(g) > 1]
            if clash:
                self.notes.append(
                    f"warning: {len(clash)} code(s) differ only in spaces before or after them and count as "
                    f"different codes: {shown(clash[0])}{' ...' if len(clash) > 1 else ''}; "
                    "use --trim (trim=True) to merge them")
        if not self.casefold:
            groups = {}
            for a in texts:
                groups.setdefault(a.strip().casefold(), []).append(a)
            clash = [g for g in groups.values() if len(set(x.strip() for x in g)) > 1]
            if clash:
                self.notes.append(
                    f"warning: {len(clash)} code(s) differ only in upper/lower case and count as different "
                    f"codes: {shown(clash[0])}{' ...' if len(clash) > 1 else ''}; "
                    "use --casefold (casefold=True) to merge them")


def _first_multi(atoms_sets) -> int:
    for i, s in enumerate(atoms_sets):
        if len(s) > 1:
            return i
    return 0
