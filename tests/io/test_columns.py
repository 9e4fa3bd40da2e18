"""The columns people really name: unit, text, round and group columns found by name and by content,
in coding tables and in lists of units. Synthetic tables of an invented support-chat study."""

from __future__ import annotations

import pandas as pd
import pytest

from agree.core.model import AgreeError
from agree.io.columns import list_text_column, list_unit_column, pick_unit_column, text_column
from agree.io.readers import read

LONG = pd.DataFrame({"round": [1, 1, 1, 1, 2, 2, 2, 2], "msg_id": ["m1", "m1", "m2", "m2", "m3", "m3", "m4", "m4"],
                     "coder": ["ann", "bo"] * 4, "code": ["A", "A", "B", "A", "B", "B", "A", "B"]})


def test_a_round_column_first_is_not_the_unit_id(tmp_path):
    path = tmp_path / "chats.csv"
    LONG.to_csv(path, index=False)
    data = read(path)
    assert list(data.unit_ids) == ["m1", "m2", "m3", "m4"]
    assert "unit column 'msg_id'" in data.report.detected and "kept column(s) 'round'" in data.report.detected
    assert list(data.columns["round"]) == ["1", "1", "2", "2"]


@pytest.mark.parametrize("name", ["msg_id", "id_message", "ticket_no", "post_id", "message_id"])
def test_id_shaped_names(name):
    frame = pd.DataFrame({"wave": [1, 1, 2], "thread": ["t1", "t1", "t2"], name: ["a", "b", "c"], "ann": [1, 2, 1]})
    assert pick_unit_column(frame) == (name, "")


def test_unique_values_when_no_name_says_so():
    frame = pd.DataFrame({"session": [1, 1, 2, 2], "reference": ["r1", "r2", "r3", "r4"],
                          "ann": ["x", "x", "y", "y"], "bo": ["x", "y", "y", "y"]})
    assert pick_unit_column(frame) == ("reference", "unique values")
    long = pd.DataFrame({"batch": [1, 1, 1, 1], "key": ["k1", "k1", "k2", "k2"], "coder": ["a", "b", "a", "b"],
                         "code": ["x", "y", "x", "x"]})
    assert pick_unit_column(long, "coder") == ("key", "unique values")      # unique per coder


def test_the_duplicate_error_names_the_unit_flag_and_other_candidates(tmp_path):
    path = tmp_path / "chats.csv"
    LONG.rename(columns={"msg_id": "which"}).assign(which=["m1", "m1", "m1", "m1", "m2", "m2", "m2", "m2"]) \
        .to_csv(path, index=False)
    with pytest.raises(AgreeError) as err:
        read(path)
    assert "--unit-col" in err.value.hint and "round" in err.value.hint


@pytest.mark.parametrize("name", ["message", "utterance", "answer", "excerpt", "post", "chat_text"])
def test_text_columns_by_name(name):
    frame = pd.DataFrame({"msg_id": ["m1", "m2"], name: ["hi", "ok"], "ann": ["a", "b"]})
    assert text_column(frame) == name
    assert list_text_column(frame) == name


def test_ambiguous_text_names_need_sentences():
    codes = pd.DataFrame({"msg_id": ["m1", "m2"], "response": ["yes", "no"]})
    assert text_column(codes) is None
    sentences = ["The courier never rang the bell and left the parcel outside",
                 "I was charged twice for one order and nobody answered my mail",
                 "Could you tell me when the new opening hours start next month"]
    texts = pd.DataFrame({"msg_id": ["m1", "m2", "m3"], "comment": sentences})
    assert text_column(texts) == "comment"


def test_a_list_of_units_without_text_stops_with_the_candidates():
    frame = pd.DataFrame({"msg_id": ["m1", "m2"], "channel": ["mail", "chat"], "blurb": ["short one", "other one"]})
    with pytest.raises(AgreeError) as err:
        list_text_column(frame, where="corpus.csv")
    assert err.value.code == "no-text-column" and "--text-col" in err.value.hint
    assert "'blurb'" in err.value.hint and "corpus.csv" in str(err.value)
    assert list_unit_column(frame) == "msg_id"


def test_several_multi_coder_files_are_not_one_coder_each(tmp_path):
    for i in (1, 2):
        pd.DataFrame({"unit": [f"u{i}1", f"u{i}2"], "ann": ["a", "b"], "bo": ["a", "a"]}).to_csv(
            tmp_path / f"r{i}.csv", index=False)
    with pytest.raises(AgreeError) as err:
        read([tmp_path / "r1.csv", tmp_path / "r2.csv"])
    assert err.value.code == "files-are-rounds" and "--round-files" in err.value.hint
