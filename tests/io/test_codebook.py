"""Codebook files: order, descriptions, numeric codes and errors (synthetic fixtures in tmp_path)."""

from __future__ import annotations

import openpyxl
import pandas as pd
import pytest

from agree.core.model import AgreeError
from agree.io.codebook import Codebook, read_codebook


def test_csv_codebook_keeps_file_order(tmp_path):
    path = tmp_path / "cb.csv"
    pd.DataFrame({"code": ["praise", "complaint", "idea"],
                  "description": ["something good", "something bad", None]}).to_csv(path, index=False)
    book = read_codebook(path)
    assert book.categories == ("praise", "complaint", "idea")
    assert book.descriptions == {"praise": "something good", "complaint": "something bad"}
    assert not book.ordered
    assert book.source == str(path)
    assert book.to_dict()["categories"] == ["praise", "complaint", "idea"]


def test_xlsx_codebook_with_order_column(tmp_path):
    path = tmp_path / "scale.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["Category", "Order", "Definition"])
    ws.append(["often", 3, "most weeks"])
    ws.append(["never", 1, None])
    ws.append(["sometimes", 2, "now and then"])
    wb.save(path)
    book = read_codebook(path)
    assert book.categories == ("never", "sometimes", "often")
    assert book.ordered
    assert book.descriptions["often"] == "most weeks"


def test_numeric_codes_are_numbers(tmp_path):
    path = tmp_path / "n.csv"
    path.write_text("code,description\n1,low\n2.0,middle\n3,high\n")
    book = read_codebook(path)
    assert book.categories == (1, 2, 3)
    assert book.descriptions[2] == "middle"


def test_first_column_is_the_code_without_a_known_header(tmp_path):
    path = tmp_path / "cb.csv"
    path.write_text("theme,notes\nwork,about the job\nhome,about family\n")
    assert read_codebook(path).categories == ("work", "home")


def test_trim_option(tmp_path):
    path = tmp_path / "cb.csv"
    path.write_text('code\n"work "\nhome\n')
    assert read_codebook(path).categories == ("work ", "home")
    assert read_codebook(path, trim=True).categories == ("work", "home")


def test_duplicated_code_names_rows(tmp_path):
    path = tmp_path / "cb.csv"
    path.write_text("code\nwork\nhome\nwork\n")
    with pytest.raises(AgreeError, match=r"row 4, column 'code': code 'work' is listed twice \(rows 2 and 4\)"):
        read_codebook(path)


def test_bad_order_values(tmp_path):
    path = tmp_path / "cb.csv"
    path.write_text("code,order\nlow,1\nmid,second\nhigh,1\n")
    with pytest.raises(AgreeError) as e:
        read_codebook(path)
    assert e.value.code == "bad-codebook"
    lines = [p.one_line() for p in e.value.problems]
    assert any("row 3, column 'order'" in x and "not a number" in x for x in lines)
    assert any("row 4, column 'order'" in x and "order 1 is given to two codes" in x for x in lines)


def test_blank_code_with_description(tmp_path):
    path = tmp_path / "cb.csv"
    path.write_text("code,description\nwork,job\n,orphan description\n")
    with pytest.raises(AgreeError, match="row 3, column 'code': the code is empty"):
        read_codebook(path)


def test_empty_codebook_and_missing_file(tmp_path):
    path = tmp_path / "cb.csv"
    path.write_text("code,description\n")
    with pytest.raises(AgreeError, match="no data rows"):
        read_codebook(path)
    with pytest.raises(AgreeError, match="file not found"):
        read_codebook(tmp_path / "absent.xlsx")


def test_codebook_object_validates():
    assert Codebook(("a", 1.0, "b")).categories == ("a", 1, "b")
    with pytest.raises(AgreeError, match="more than once"):
        Codebook(("a", "b", "a"))


def test_sheet_for_a_csv_codebook_is_an_error(tmp_path):
    path = tmp_path / "cb.csv"
    pd.DataFrame({"code": ["praise", "complaint"]}).to_csv(path, index=False)
    with pytest.raises(AgreeError) as e:
        read_codebook(path, sheet="codes")
    assert e.value.code == "bad-option" and e.value.where == str(path)
    assert "codebook sheet" in e.value.message
