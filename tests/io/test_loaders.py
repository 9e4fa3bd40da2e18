"""Loaders: workbooks are read by what their sheets hold, not what they declare; the cell limit;
formula cells without a stored result; text files with many columns. All files synthetic, made here."""

from __future__ import annotations

import tracemalloc

import numpy as np
import pytest

from agree.core.model import AgreeError
from agree.io.loaders import cell_limit, load, load_tables
from agree.io.readers import read
from tests.io.xlsx import STYLED_EMPTY, Formula, raw_xlsx, sheet_xml, table_rows

HEADER = ["unit", "ann", "bo"]
RECORDS = [["u1", "alpha", "alpha"], ["u2", "beta", "alpha"], ["u3", "beta", "beta"]]


def _write(tmp_path, xml, name="coding.xlsx"):
    path = tmp_path / name
    path.write_bytes(raw_xlsx(xml))
    return path


def _peak(fn):
    tracemalloc.start()
    try:
        out = fn()
        return out, tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


def test_a_row_numbered_twenty_million_costs_nothing(tmp_path):
    rows = table_rows(HEADER, RECORDS) + [(20_000_000, [(2, "alpha")])]
    path = _write(tmp_path, sheet_xml(rows, dimension="A1:C20000000"))
    assert path.stat().st_size < 4096
    loaded, peak = _peak(lambda: load(path))
    grid = loaded.grids[0]
    assert len(grid.frame) == 4 and list(grid.rows) == [2, 3, 4, 20_000_000]   # row numbers kept
    assert peak < 20e6        # bytes: the declared size would need gigabytes
    with pytest.raises(AgreeError) as err:
        read(path)
    assert "row 20000000" in str(err.value) and "no unit id" in str(err.value)


def test_styled_cells_in_the_last_column_and_a_huge_dimension_are_ignored(tmp_path):
    rows = [(r, cells + [(16384, STYLED_EMPTY)]) for r, cells in table_rows(HEADER, RECORDS)]
    path = _write(tmp_path, sheet_xml(rows, dimension="A1:XFD1048576"))
    (grid,), peak = _peak(lambda: load(path).grids)
    assert grid.frame.shape == (3, 3) and grid.positions == (1, 2, 3)
    assert peak < 20e6
    data = read(path)
    assert data.coders == ("ann", "bo") and len(data.unit_ids) == 3


def test_rows_without_values_are_left_out_but_counted(tmp_path):
    rows = table_rows(HEADER, RECORDS[:1]) + [(r, []) for r in range(3, 50_003)] + [(50_003, [(1, "u9"), (2, "x"), (3, "y")])]
    path = _write(tmp_path, sheet_xml(rows))
    grid = load(path).grids[0]
    assert list(grid.rows) == [2, 50_003] and len(grid.frame) == 2
    data = read(path)
    assert data.provenance.row.max() == 50_003


def test_a_value_far_to_the_right_is_named_by_its_column(tmp_path):
    rows = table_rows(HEADER, RECORDS)
    rows[1][1].append((16384, "stray"))
    path = _write(tmp_path, sheet_xml(rows))
    with pytest.raises(AgreeError) as err:
        load_tables(path)
    assert "column 16384 (XFD) has a blank header but holds data" in str(err.value)


def test_the_cell_limit_stops_before_the_block_is_built(tmp_path):
    path = _write(tmp_path, sheet_xml(table_rows(HEADER, RECORDS)))
    with cell_limit(11):
        with pytest.raises(AgreeError) as err:
            load(path)
    message = str(err.value)
    assert err.value.code == "sheet-too-large" and "coding.xlsx, sheet 'coding'" in message
    assert "more than the limit of 11 cells" in message and "--max-cells" in message
    with cell_limit(12):
        assert len(load(path).grids[0].frame) == 3
    assert read(path, max_cells=12).coders == ("ann", "bo")
    with pytest.raises(AgreeError):
        read(path, max_cells=11)
    # a diagonal of stray cells: a few values, a block far past the limit
    diagonal = table_rows(HEADER, RECORDS) + [(10 + i, [(4 + i, "x")]) for i in range(200)]
    path = _write(tmp_path, sheet_xml(diagonal), "diagonal.xlsx")
    with cell_limit(10_000):
        with pytest.raises(AgreeError) as err:
            load(path)
    assert "values reach column" in str(err.value)
    with pytest.raises(AgreeError) as err:
        read(path, max_cells=0)
    assert err.value.code == "bad-option"


def test_formulas_without_a_stored_result_are_named(tmp_path):
    records = [["u1", "alpha", Formula("B2")], ["u2", "beta", Formula("B3", "beta")],
               ["u3", Formula("C4"), "beta"], ["u4", "alpha", "alpha"]]
    path = _write(tmp_path, sheet_xml(table_rows(HEADER, records)))
    data = read(path)
    notes = [n for n in data.report.notes if "formula" in n]
    assert len(notes) == 1
    assert notes[0].startswith("warning: ") and "sheet 'coding'" in notes[0]
    assert "2 formula cells without a stored result read as empty (C2, B4)" in notes[0]
    assert data.values == ("alpha", "beta")          # the stored result is read


def test_an_all_empty_workbook_names_the_file(tmp_path):
    path = _write(tmp_path, {"one": sheet_xml([(1, [(1, " ")])]), "two": sheet_xml([])}, "blank.xlsx")
    with pytest.raises(AgreeError) as err:
        read(path)
    assert "blank.xlsx" in str(err.value) and err.value.code == "empty-sheet"


def test_a_csv_with_many_thousand_columns(tmp_path):
    k = 12_000
    names = [f"coder_number_{i:05d}" for i in range(k)]          # a header line of ~230 KB
    rng = np.random.default_rng(3)
    lines = ["unit," + ",".join(names)]
    lines += [f"u{u}," + ",".join(rng.choice(["alpha", "beta"], k)) for u in range(6)]
    path = tmp_path / "many.csv"
    path.write_text("\n".join(lines) + "\n")
    table = load_tables(path)[0][0]
    assert table.frame.shape == (6, k + 1)
    data = read(path)
    assert len(data.coders) == k and data.codes.shape == (6, k)


def test_parquet_lists_of_codes_are_sets(tmp_path):
    import pyarrow as pa
    import pyarrow.parquet as pq

    path = tmp_path / "sets.parquet"
    pq.write_table(pa.table({"unit": ["u1", "u2", "u3", "u4"],
                             "ann": [["praise", "blame"], ["praise"], [], None],
                             "bo": [["blame", "praise", "praise"], ["blame"], [], ["praise"]]}), path)
    data = read(path)
    assert data.set_valued
    as_sets = {u: tuple(None if c < 0 else data.values[c] for c in row) for u, row in zip(data.unit_ids, data.codes)}
    assert as_sets == {"u1": (frozenset({"praise", "blame"}),) * 2, "u2": (frozenset({"praise"}), frozenset({"blame"})),
                       "u3": (frozenset(),) * 2, "u4": (None, frozenset({"praise"}))}
    assert any("list column(s) 'ann', 'bo' read as sets of codes" in n for n in data.report.notes)
    # the same sets written as "a; b" text read the same
    text = tmp_path / "sets.csv"
    text.write_text("unit,ann,bo\nu1,praise; blame,blame;praise\nu2,praise,blame\n")
    assert set(read(text).values) == {frozenset({"praise", "blame"}), frozenset({"praise"}), frozenset({"blame"})}


@pytest.mark.parametrize("column, words", [
    ({"type": "struct"}, "structs"), ({"type": "binary"}, "binary values"), ({"type": "list_struct"}, "lists of structs")])
def test_parquet_structs_and_binary_are_refused_naming_the_column(tmp_path, column, words):
    import pyarrow as pa
    import pyarrow.parquet as pq

    values = {"struct": [{"a": 1}, {"a": 2}], "binary": [b"\x00\x01", b"x"],
              "list_struct": [[{"a": 1}], [{"a": 2}]]}[column["type"]]
    path = tmp_path / "nested.parquet"
    pq.write_table(pa.table({"unit": ["u1", "u2"], "ann": values, "bo": ["x", "y"]}), path)
    with pytest.raises(AgreeError) as err:
        read(path)
    assert err.value.code == "nested-column" and "column 'ann' holds " + words in str(err.value)
    assert "nested.parquet" in str(err.value)


def test_header_rows_read_only_the_header_where_the_format_allows(tmp_path):
    import pandas as pd

    from agree.io.loaders import header_rows

    frame = pd.DataFrame({"document": ["d1"], "Start ": [0], "end": [3]})
    csv = tmp_path / "semi.csv"
    csv.write_bytes(("\ufeffdocument;Start ;end\n" + "d1;0;3\n" * 200_000).encode("utf-8"))
    frame.to_parquet(tmp_path / "t.parquet", index=False)
    frame.to_excel(tmp_path / "t.xlsx", index=False)
    assert header_rows(csv) == [["document", "Start", "end"]]      # BOM removed, ';' detected, cells stripped
    assert header_rows(tmp_path / "t.parquet") == [["document", "Start ", "end"]]
    assert header_rows(tmp_path / "t.xlsx") == [["document", "Start ", "end"]]
    with pytest.raises(AgreeError, match="file not found"):
        header_rows(tmp_path / "missing.csv")
