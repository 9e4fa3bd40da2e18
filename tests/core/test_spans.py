"""The span data model: validation, rolling nested codes up, subsets."""

import numpy as np
import pytest

from agree.core.model import AgreeError
from agree.core.spans import SpanData


def _spans(**kw):
    base = dict(documents=("d1", "d2"), texts=("Hello world.", None), lengths=[12, 40], coders=("ana", "ben"),
                codes=("emotion", "emotion/joy", "emotion/joy/relief", "place"), parents=[-1, 0, 1, -1],
                doc=[0, 0, 1, 1], coder=[0, 1, 0, 1], code=[1, 2, 3, 1], start=[0, 0, 5, 5], end=[5, 5, 40, 30],
                coded=np.ones((2, 2), bool))
    base.update(kw)
    return SpanData(**base)


def test_depth_and_roll_up_to_top_level():
    s = _spans()
    assert s.depth().tolist() == [1, 2, 3, 1]
    top = s.roll_up(1)
    assert top.codes == ("emotion", "place")
    assert top.parents.tolist() == [-1, -1]
    assert [top.codes[c] for c in top.code] == ["emotion", "emotion", "place", "emotion"]
    two = s.roll_up(2)
    assert two.codes == ("emotion", "emotion/joy", "place")
    assert [two.codes[c] for c in two.code] == ["emotion/joy", "emotion/joy", "place", "emotion/joy"]


def test_roll_up_keeps_a_repeated_span_once():
    s = _spans(code=[1, 2, 3, 1], coder=[0, 0, 0, 1], start=[0, 0, 5, 5], end=[5, 5, 40, 30])
    assert s.n_spans == 4 and s.roll_up(1).n_spans == 3


def test_subsets_reindex():
    s = _spans()
    one = s.subset_documents([False, True])
    assert one.documents == ("d2",) and one.doc.tolist() == [0, 0] and one.lengths.tolist() == [40]
    ben = s.subset_coders(["ben"])
    assert ben.coders == ("ben",) and ben.coder.tolist() == [0, 0] and ben.coded.shape == (2, 1)


@pytest.mark.parametrize("change", [dict(end=[5, 5, 41, 30]), dict(start=[0, 5, 5, 5], end=[5, 5, 40, 30]),
                                    dict(code=[1, 2, 3, 4]), dict(coded=np.ones((2, 3), bool)),
                                    dict(unit="byte")])
def test_bad_spans_are_refused(change):
    with pytest.raises(AgreeError):
        _spans(**change)


def test_arrays_are_read_only():
    s = _spans()
    with pytest.raises(ValueError):
        s.start[0] = 3
