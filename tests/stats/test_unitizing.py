"""Krippendorff's alpha for unitizing (EXPERIMENTAL; synthetic continua only).

No published worked example could be reconstructed with certainty, so none is tested: the checks
are (1) the one-position limit, where uα must equal binary nominal alpha over positions, computed
by the `krippendorff` package (reference library); (2) a small continuum worked by hand from the
formulas in `agree.stats.unitizing` (our reconstruction, see its module notes; this checks the
arithmetic of the code against the written formulas, not the formulas against the literature);
(3) identities: identical codings give 1, translating the continuum and every unit changes
nothing, relabelling coders changes nothing, the result is flagged experimental everywhere.
"""

from __future__ import annotations

from dataclasses import replace

import krippendorff
import numpy as np
import pytest

from agree.core.model import AgreeError
from agree.core.spans import SpanData
from agree.stats.unitizing import NAME, u_alpha, unitizing_alpha


def spans_of(units_by_coder_doc, lengths, codes=("x",)):
    """units_by_coder_doc: list of (doc, coder, code, start, end)."""
    rows = np.array(units_by_coder_doc, dtype=np.int64).reshape(-1, 5)
    m = int(rows[:, 1].max()) + 1 if len(rows) else 2
    return SpanData(documents=tuple(f"d{i}" for i in range(len(lengths))), texts=(None,) * len(lengths),
                    lengths=lengths, coders=tuple(f"c{i}" for i in range(m)), codes=codes,
                    parents=[-1] * len(codes), doc=rows[:, 0], coder=rows[:, 1], code=rows[:, 2], start=rows[:, 3],
                    end=rows[:, 4], coded=np.ones((len(lengths), m), bool))


def test_hand_computed_two_coders_one_unit_each():
    """Continuum [0, 12); coder 1 marks [2, 5), coder 2 marks [3, 6) (m = 2, L = 12).

    Observed: the units overlap, δ² = (2 - 3)² + (5 - 6)² = 2, counted for the ordered pairs
    (1, 2) and (2, 1): Σ = 4; D_o = 4 / (m (m - 1) L) = 4 / 24 = 1/6.
    Expected: N = 2 units of length l = 3. Unit-against-unit term (N - 1)/3 (2·27 - 3·9 + 3) = 10 per
    unit, 20 in all. Gaps: coder 1 [0, 2) and [5, 12) (lengths 2, 7), coder 2 [0, 3) and [6, 12)
    (3, 6); those of length >= 3 hold a unit of length 3 in 7-3+1 + 3-3+1 + 6-3+1 = 10 placements,
    each costing l² = 9: 90 per unit, 180 in all. Normaliser m L (m L - 1) - Σ l (l - 1) =
    24·23 - 12 = 540. D_e = 2 (20 + 180) / 540 = 20/27. uα = 1 - (1/6) / (20/27) = 1 - 27/120 = 0.775.
    """
    assert u_alpha([[(2, 5)], [(3, 6)]], continuum=(0, 12)) == pytest.approx(0.775, abs=1e-12)


def test_unit_inside_a_gap_costs_its_squared_length():
    """Continuum [0, 10); coder 1 marks [1, 3) and [6, 8), coder 2 only [1, 3).

    Observed: [1, 3) against [1, 3): δ² = 0. Coder 1's [6, 8) lies inside coder 2's gap [3, 10):
    l² = 4 for (1, 2) and again for (2, 1): Σ = 8; D_o = 8 / (2·1·10) = 0.4.
    Expected: N = 3 units of length 2: (N - 1)/3 (16 - 12 + 2) = 4 per unit, 12 in all. Gaps:
    coder 1 [0,1), [3,6), [8,10) (1, 3, 2); coder 2 [0,1), [3,10) (1, 7). A unit of length 2 fits
    in the gaps of length 3, 2, 7 in 2 + 1 + 6 = 9 placements at l² = 4: 36 per unit, 108 in all.
    Normaliser 20·19 - 3·2 = 374. D_e = 2 (12 + 108) / 374 = 240/374. uα = 1 - 0.4·374/240 = 0.37666...
    """
    assert u_alpha([[(1, 3), (6, 8)], [(1, 3)]], continuum=(0, 10)) == pytest.approx(1 - 0.4 * 374 / 240, abs=1e-12)


@pytest.mark.parametrize("seed", range(6))
def test_one_position_units_equal_binary_nominal_alpha_of_the_krippendorff_package(seed):
    """When every unit is one position long, uα is binary nominal α over positions (marked or not)."""
    rng = np.random.default_rng(seed)
    m = int(rng.integers(2, 5))
    lengths = rng.integers(5, 30, size=int(rng.integers(1, 4)))
    rows, columns = [], []
    for d, L in enumerate(lengths):
        x = rng.random((m, L)) < rng.uniform(0.1, 0.5)
        x[1:] |= x[0] & (rng.random((m - 1, L)) < 0.6)
        for i in range(m):
            rows += [(d, i, 0, p, p + 1) for p in np.flatnonzero(x[i])]
        columns.append(x)
    x = np.concatenate(columns, axis=1).astype(float)
    expected = krippendorff.alpha(reliability_data=x, level_of_measurement="nominal")
    res = unitizing_alpha(spans_of(rows, lengths), n_resamples=0)
    assert res["x"].estimate == pytest.approx(expected, abs=1e-12)


def test_identical_codings_give_one_and_no_units_is_undefined():
    rows = [(0, i, k, s, e) for i in range(3) for k, s, e in ((0, 2, 9), (0, 12, 15), (1, 4, 20))]
    res = unitizing_alpha(spans_of(rows, [30], codes=("x", "y")), n_resamples=0)
    assert res["x"].estimate == 1.0 and res["y"].estimate == 1.0 and res["(all codes)"].estimate == 1.0
    empty = unitizing_alpha(spans_of([(0, 0, 0, 1, 2), (0, 1, 0, 1, 2)], [10], codes=("x", "y")), n_resamples=0)
    assert np.isnan(empty["y"].estimate) and "undefined" in [n.code for n in empty["y"].warnings]


def test_translating_the_continuum_and_every_unit_changes_nothing():
    units = [[(2, 5), (9, 14)], [(3, 6), (10, 12), (17, 19)], [(2, 6)]]
    base = u_alpha(units, continuum=(0, 25))
    moved = [[(s + 1000, e + 1000) for s, e in u] for u in units]
    assert u_alpha(moved, continuum=(1000, 1025)) == pytest.approx(base, abs=1e-12)


def test_relabelling_coders_changes_nothing():
    units = [[(2, 5), (9, 14)], [(3, 6), (10, 12), (17, 19)], [(2, 6)]]
    base = u_alpha(units, continuum=(0, 25))
    assert u_alpha([units[2], units[0], units[1]], continuum=(0, 25)) == pytest.approx(base, abs=1e-12)


def test_overlapping_spans_of_one_coder_are_one_unit_and_touching_spans_two():
    merged = u_alpha([[(2, 6), (4, 9)], [(2, 9)]], continuum=(0, 20))
    assert merged == 1.0
    touching = u_alpha([[(2, 6), (6, 9)], [(2, 9)]], continuum=(0, 20))
    assert touching < 1.0


def test_result_is_flagged_experimental_and_resamples_documents():
    rows = [(d, i, 0, s + i, e) for d in range(4) for i in range(2) for s, e in ((1, 6), (10, 18))]
    res = unitizing_alpha(spans_of(rows, [25] * 4), n_resamples=300, seed=4, ci_method="percentile")["x"]
    assert res.name == NAME and "EXPERIMENTAL" in res.details["method"]
    assert "experimental" in [n.code for n in res.warnings]
    assert res.bootstrap.unit == "cluster:document" and res.ci_low <= res.estimate <= res.ci_high
    again = unitizing_alpha(spans_of(rows, [25] * 4), n_resamples=300, seed=4, ci_method="percentile")["x"]
    np.testing.assert_array_equal(res.replicates, again.replicates)
    assert res.to_dict()["warnings"][0]["code"] == "experimental"


def test_every_coder_must_have_coded_every_document():
    sp = spans_of([(0, 0, 0, 1, 3), (0, 1, 0, 1, 3)], [10, 10])
    sp = replace(sp, coded=np.array([[True, True], [True, False]]))
    with pytest.raises(AgreeError) as err:
        unitizing_alpha(sp)
    assert err.value.code == "documents"


def test_docstring_lists_the_registry_sources():
    from agree.core.registry import BY_NAME

    doc = unitizing_alpha.__doc__
    assert "Parameters\n" in doc and "Returns\n" in doc and "References\n" in doc
    row = BY_NAME[NAME]
    assert row.function == "unitizing_alpha" and all(source in doc for source in row.references)
