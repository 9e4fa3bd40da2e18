"""Coding rounds: per-round agreement, differences between rounds, definitions, drift.

External checks: per-round and per-code α against the `krippendorff` package (reference
library); the spread of the difference against the two rounds' own bootstrap spreads (for
rounds that share no unit, Var(α*_b - α*_a) = Var(α*_a) + Var(α*_b), Efron & Tibshirani 1993,
ch. 8); properties (identical rounds paired give a zero difference, unpaired an interval
around 0; a much better round is detected). The coverage of the paired interval is checked by
simulation in tests/stats/test_slow_se.py.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import krippendorff
import numpy as np
import pytest

import agree
from agree import krippendorff_alpha
from agree.analysis.rounds import compare_rounds, difference_interval, split_rounds
from agree.core.model import AgreeError, from_table
from agree.io.readers import read
from agree.output.report import build_report
from tests.conftest import as_labels, simulate_codes

SAMPLES = Path(__file__).resolve().parents[2] / "samples"
CODES = ["Belonging", "Skills learning", "Time pressure", "Burnout"]


def _round(rng, n, alpha, missing=0.0):
    codes = simulate_codes(rng, n, 3, len(CODES), alpha=alpha, missing=missing)
    return from_table(as_labels(codes, CODES), coders=["a", "b", "c"], categories=CODES)


def _reference_alpha(data):
    matrix = np.where(data.codes.T >= 0, data.codes.T, np.nan).astype(float)
    return krippendorff.alpha(reliability_data=matrix, level_of_measurement="nominal")


@pytest.fixture(scope="module")
def sample_rounds():
    data = read(SAMPLES / "rounds_long.csv", codebook=SAMPLES / "codebook.csv", keep=["round"])
    return data, compare_rounds(data, n_resamples=500, seed=11)


def test_replicates_are_those_behind_the_engine_interval():
    rng = np.random.default_rng(3)
    data = _round(rng, 90, 0.6, missing=0.1)
    res = krippendorff_alpha(data, n_resamples=800, seed=42, ci_method="percentile")
    reps = res.replicates
    low, high = np.quantile(reps[np.isfinite(reps)], [0.025, 0.975])
    assert (low, high) == pytest.approx((res.ci_low, res.ci_high), abs=1e-12)


def test_per_round_alpha_matches_reference_library(sample_rounds):
    data, result = sample_rounds
    parts = split_rounds(data)
    assert [r.round for r in result.rounds] == ["1", "2"]
    assert [r.n_units for r in result.rounds] == [120, 150]
    for r in result.rounds:
        d = parts[r.round]
        assert r.overall.estimate == pytest.approx(_reference_alpha(d), abs=1e-12)
        for code, res in r.per_code.items():
            binary = d.presence(code)
            if res.defined:
                assert res.estimate == pytest.approx(_reference_alpha(binary), abs=1e-12)


def test_round_files_give_the_same_result_as_a_round_column(sample_rounds):
    _, from_column = sample_rounds
    files = {name: read(SAMPLES / f"round{name}.csv", codebook=SAMPLES / "codebook.csv", keep=["interview"])
             for name in ("1", "2")}
    from_files = compare_rounds(files, n_resamples=500, seed=11)
    assert [r.overall.estimate for r in from_files.rounds] == \
        pytest.approx([r.overall.estimate for r in from_column.rounds], abs=1e-12)


def test_difference_of_rounds_sharing_no_unit_is_a_two_sample_bootstrap(sample_rounds):
    # the sample rounds share no unit: the difference replicates are independent draws in each
    # round, so their spread is that of the two rounds' own bootstraps combined
    from agree.analysis.rounds.paired import difference_replicates, round_items
    from agree.stats.coefficients import distance_matrix

    data, result = sample_rounds
    parts = split_rounds(data)
    overall = [c for c in result.changes if c.code is None][0]
    assert overall.pairing == "independent" and overall.n_shared == 0
    assert overall.difference == pytest.approx(result.rounds[1].overall.estimate - result.rounds[0].overall.estimate)
    items = [round_items(parts[n], result.codes, distance_matrix(parts[n], "nominal")[0]) for n in ("1", "2")]
    va, vb, shared = difference_replicates(items[0], items[1], 4000, np.random.default_rng(1))
    assert shared == 0
    sd = [krippendorff_alpha(parts[n], n_resamples=4000, seed=3).replicates.std() for n in ("1", "2")]
    assert np.std(vb[:, 0] - va[:, 0]) == pytest.approx(math.hypot(*sd), rel=0.06)
    # the per-code columns are each code's presence/absence α, as the figures shown
    code = result.codes[0]
    col = 1 + list(result.codes).index(code)
    ref = krippendorff_alpha(parts["1"].presence(code), level="nominal", n_resamples=4000, seed=5).replicates
    assert np.nanstd(va[:, col]) == pytest.approx(np.nanstd(ref), rel=0.06)
    # in the synthetic scenario round 2 used a sharper codebook: the rise is beyond noise
    assert overall.beyond_noise and overall.ci_low > 0
    assert "resample each round on its own (no unit was coded in two compared rounds)" in " ".join(result.summary)


def test_identical_rounds_show_no_change():
    rng = np.random.default_rng(5)
    data = _round(rng, 120, 0.6)
    result = compare_rounds({"r1": data, "r2": data}, n_resamples=1000, seed=2)
    overall = [c for c in result.changes if c.code is None][0]
    # the same units coded alike twice: paired, every replicate difference is exactly 0
    assert overall.difference == 0
    assert (overall.pairing, overall.n_shared) == ("paired", 120)
    assert (overall.ci_low, overall.ci_high) == (0.0, 0.0)
    assert not overall.beyond_noise
    text = " ".join(result.summary)
    assert "within sampling noise" in text and "the 120 units coded in both were resampled jointly" in text
    assert result.to_dict()["changes"][0]["pairing"] == "paired"
    # treated as independent samples the same rounds give an interval around 0
    apart = compare_rounds({"r1": data, "r2": data}, n_resamples=1000, seed=2, pairing="independent")
    overall = [c for c in apart.changes if c.code is None][0]
    assert overall.pairing == "independent" and overall.ci_low < 0 < overall.ci_high
    assert "pairing was switched off" in " ".join(apart.summary)
    assert apart.to_dict()["settings"]["pairing"] == "independent"


def _recoded(rng, n, hard_share=0.4, first=0.55, second=0.8):
    """The same n units coded in two rounds by three coders: a hard unit (random) is coded at
    chance in both rounds, an easy one correctly with probability sqrt(alpha) of the round;
    so the rounds' α are positively correlated through the units."""
    truth = rng.integers(0, 3, n)
    hard = rng.random(n) < hard_share
    rounds = []
    for level in (first, second):
        knows = (rng.random((n, 3)) < math.sqrt(level)) & ~hard[:, None]
        codes = np.where(knows, truth[:, None], rng.integers(0, 3, (n, 3)))
        rounds.append(from_table(as_labels(codes, CODES[:3]), coders=["a", "b", "c"], categories=CODES[:3]))
    return rounds


def test_recoded_units_are_paired_and_the_interval_narrows():
    r1, r2 = _recoded(np.random.default_rng(4), 150)
    paired = compare_rounds({"1": r1, "2": r2}, n_resamples=1500, seed=3)
    apart = compare_rounds({"1": r1, "2": r2}, n_resamples=1500, seed=3, pairing="independent")
    p = next(c for c in paired.changes if c.code is None)
    i = next(c for c in apart.changes if c.code is None)
    assert p.difference == i.difference
    assert (p.pairing, p.n_shared) == ("paired", 150)
    # positively correlated rounds: the paired interval is clearly narrower
    assert (p.ci_high - p.ci_low) < 0.85 * (i.ci_high - i.ci_low)
    assert all(c.pairing == "paired" for c in paired.changes)


def test_partly_shared_units_keep_each_round_size():
    from agree.analysis.rounds.paired import RoundItems, difference_replicates

    rng = np.random.default_rng(9)
    r1, r2 = _recoded(rng, 100)
    # round 2 keeps 60 of round 1's units and adds 40 new ones
    extra = _round(rng, 40, 0.7)
    ids = [f"new{i}" for i in range(40)]
    from dataclasses import replace
    r2 = r2.subset(np.arange(100) < 60)
    r2_codes = np.vstack([r2.codes, extra.codes[:, :3]])
    r2 = replace(from_table(as_labels(r2_codes, CODES), coders=["a", "b", "c"], categories=CODES),
                 unit_ids=tuple(list(r2.unit_ids) + ids))
    result = compare_rounds({"1": r1, "2": r2}, n_resamples=300, seed=1)
    ch = next(c for c in result.changes if c.code is None)
    assert (ch.pairing, ch.n_shared) == ("paired", 60)
    assert "the other units were resampled within their own round" in " ".join(result.summary)
    # the strata directly: features (1, shared?, a random tag of each shared unit): each
    # replicate keeps 100 units and 60 shared ones in each round, and the shared units drawn
    # (their tags summed) are the same in both rounds, replicate by replicate
    keys_a = np.array([f"u{i}" for i in range(100)])
    keys_b = np.array([f"u{i}" for i in range(60)] + ids)
    tag = dict(zip([f"u{i}" for i in range(60)], np.random.default_rng(0).random(60)))

    def items(keys):
        shared_ = np.array([k in tag for k in keys], float)
        feats = np.column_stack([np.ones(len(keys)), shared_, [tag.get(k, 0.0) for k in keys]])
        return RoundItems(keys, feats, np.ones(len(keys)), lambda sums: sums, False)

    va, vb, shared = difference_replicates(items(keys_a), items(keys_b), 200, np.random.default_rng(2))
    assert shared == 60
    assert (va[:, 0] == 100).all() and (vb[:, 0] == 100).all()
    assert (va[:, 1] == 60).all() and (vb[:, 1] == 60).all()
    np.testing.assert_allclose(va[:, 2], vb[:, 2], rtol=1e-12)
    assert va[:, 2].std() > 0


def test_shared_groups_are_resampled_jointly():
    from dataclasses import replace

    r1, r2 = _recoded(np.random.default_rng(12), 120)
    groups = np.repeat([f"doc{g}" for g in range(30)], 4)
    r1 = replace(r1, columns={"doc": groups})
    r2 = replace(r2, columns={"doc": groups})
    result = compare_rounds({"1": r1, "2": r2}, n_resamples=300, seed=1, cluster="doc")
    ch = next(c for c in result.changes if c.code is None)
    assert (ch.pairing, ch.n_shared) == ("paired", 30)
    assert "the 30 groups coded in both" in " ".join(result.summary)


def test_unknown_pairing_is_refused():
    d = _round(np.random.default_rng(1), 30, 0.6)
    with pytest.raises(AgreeError) as err:
        compare_rounds({"1": d, "2": d}, n_resamples=10, pairing="sometimes")
    assert err.value.code == "pairing"


def test_difference_interval_edge_cases():
    assert difference_interval(np.array([np.nan, np.nan]), np.array([0.5, 0.6]), estimate=0.1,
                               confidence_level=0.95) == (None, None, None)


def test_codebook_changes_are_flagged():
    rng = np.random.default_rng(8)
    r1, r2, r3 = (_round(rng, 60, 0.7) for _ in range(3))
    book1 = {c: f"definition of {c}" for c in CODES}
    book2 = dict(book1, Burnout="exhaustion only, not time")
    book3 = dict(book2, Belonging="definition   of Belonging")      # whitespace only: not a change
    result = compare_rounds({"1": r1, "2": r2, "3": r3}, n_resamples=0, seed=1,
                            codebooks={"1": book1, "2": book2, "3": book3})
    changes = [(d.code, d.round, d.since_round, d.kind) for d in result.definition_changes]
    assert changes == [("Burnout", "2", "1", "definition changed")]
    assert result.round("2").changed_codes == ("Burnout",)
    assert result.round("3").changed_codes == ()
    assert any("‘Burnout’: definition changed in round 2 since round 1" in s for s in result.summary)


def test_codebook_files(tmp_path):
    rng = np.random.default_rng(9)
    r1, r2 = _round(rng, 50, 0.7), _round(rng, 50, 0.7)
    (tmp_path / "cb1.csv").write_text("code,description\n" + "".join(f"{c},old {c}\n" for c in CODES))
    (tmp_path / "cb2.csv").write_text("code,description\n" + "".join(
        f"{c},{'new' if c == 'Time pressure' else 'old'} {c}\n" for c in CODES))
    result = compare_rounds({"1": r1, "2": r2}, n_resamples=0, seed=1,
                            codebooks={"1": tmp_path / "cb1.csv", "2": tmp_path / "cb2.csv"})
    assert [d.code for d in result.definition_changes] == ["Time pressure"]


def test_drift_check_detects_a_drop():
    rng = np.random.default_rng(10)
    full1, full2 = _round(rng, 150, 0.85), _round(rng, 150, 0.9)
    drift = _round(rng, 60, 0.3)
    result = compare_rounds({"pilot": full1, "main": full2, "after split": drift}, n_resamples=1000, seed=4,
                            drift_round="after split", minimum=0.8)
    dr = result.drift
    assert dr.reference == "main"
    assert dr.drifted and dr.below_minimum and dr.change.ci_high < 0
    assert result.final_round == "main"
    # the drift round is checked, not compared as a round of its own
    assert {(c.from_round, c.to_round) for c in result.changes} == {("pilot", "main")}
    assert "dropped beyond sampling noise" in dr.verdict
    assert any(s.startswith("Drift check: round after split") for s in result.summary)


def test_summary_names_codes_still_below(sample_rounds):
    _, result = sample_rounds
    text = " ".join(result.summary)
    assert "Round 2 reached α" in text
    assert "still below .800" in text
    for r in result.rounds:
        assert f"α {r.overall.estimate:.3f}".replace("0.", ".") in text


def test_errors():
    rng = np.random.default_rng(1)
    a, b = _round(rng, 30, 0.7), _round(rng, 30, 0.7)
    with pytest.raises(AgreeError) as err:
        compare_rounds({"1": a, "2": b}, drift_round="3", n_resamples=0)
    assert err.value.code == "drift-round"
    with pytest.raises(AgreeError):
        compare_rounds({"1": a, "2": b}, drift_round="1", n_resamples=0)
    with pytest.raises(AgreeError) as err:
        compare_rounds({"1": a, "2": b}, codebooks={"9": {}}, n_resamples=0)
    assert err.value.code == "codebook-round"
    with pytest.raises(AgreeError) as err:
        compare_rounds(a, n_resamples=0)
    assert err.value.code == "round-column"


def test_same_seed_same_result():
    rng = np.random.default_rng(12)
    parts = {"1": _round(rng, 40, 0.6), "2": _round(rng, 40, 0.7)}
    one = compare_rounds(parts, n_resamples=300, seed=9).to_dict()
    two = compare_rounds(parts, n_resamples=300, seed=9).to_dict()
    assert one == two
    json.dumps(one, allow_nan=False)


def test_report_includes_rounds_when_the_data_have_them(sample_rounds):
    data, _ = sample_rounds
    report = build_report(None, rounds=split_rounds(data), n_resamples=300, seed=3, corpus_size=600)
    out = report.to_dict()
    assert out["analysed_round"] == "2"
    assert out["sample"]["units_read"] == 150
    assert out["sample"]["units_double_coded"] == 270
    # all rounds (N) and the round described (n), each with its share of the corpus
    assert ("Over 2 rounds, N = 270 units were double-coded (45.0% of the 600-unit corpus)"
            in out["methods"])
    assert "describe round 2, the last full round, n = 150 units (25.0% of the corpus)" in out["methods"]
    assert "45.0% of the 600 units in the corpus" not in out["methods"]
    # the rounds of the sample coded different units: the paragraph says what that means
    assert report.rounds.shared_units() == 0
    assert "Different rounds coded different units" in out["methods"]
    assert out["rounds"]["final_round"] == "2"
    from agree.output.report import report_tables
    assert {"rounds", "round_changes"} <= {t.key for t in report_tables(report)}
    assert "<table" in report.rounds._repr_html_()


def test_trend_plot_fixed_axis(sample_rounds):
    _, result = sample_rounds
    from agree.output.plots import rounds_trend_figure
    fig = rounds_trend_figure(result)
    visible = [ax for ax in fig.axes if ax.get_visible()]
    assert len(visible) == 1 + len(result.codes)
    for ax in visible:
        assert ax.get_ylim()[0] == pytest.approx(-0.2)
        assert any(line.get_ydata()[0] == 0.8 for line in ax.get_lines() if line.get_linestyle() == "--")


# -- review fixes ----------------------------------------------------------------------------

def _replicated_round(rng, n=50, copies=4):
    base = _round(rng, n, 0.6)
    labels = base.labels().to_numpy()
    big = from_table(np.repeat(labels, copies, axis=0), coders=["a", "b", "c"], categories=CODES)
    from dataclasses import replace
    big = replace(big, columns={"doc": np.repeat([f"d{i}" for i in range(n)], copies)})
    return base, big


def test_rounds_resample_whole_clusters_within_each_round():
    # Each unit copied four times within its group: resampling groups gives about the width
    # of the original round; resampling the copies as if independent about half of it
    # (Efron & Tibshirani 1993: resample the independent units).
    rng = np.random.default_rng(11)
    base1, big1 = _replicated_round(rng)
    base2, big2 = _replicated_round(rng)
    kw = dict(n_resamples=1500, seed=2, ci_method="percentile")
    width = lambda r: r.overall.ci_high - r.overall.ci_low  # noqa: E731
    plain_ = compare_rounds({"1": base1, "2": base2}, **kw)
    units = compare_rounds({"1": big1, "2": big2}, **kw)
    groups = compare_rounds({"1": big1, "2": big2}, cluster="doc", **kw)
    for name in ("1", "2"):
        assert width(groups.round(name)) == pytest.approx(width(plain_.round(name)), rel=0.25)
        assert width(units.round(name)) < 0.75 * width(groups.round(name))
        assert groups.round(name).overall.estimate == pytest.approx(units.round(name).overall.estimate)
        assert groups.round(name).overall.bootstrap.unit == "cluster"
    assert groups.cluster == "doc" and groups.n_clusters == {"1": 50, "2": 50}
    assert groups.to_dict()["settings"]["cluster"] == "doc"
    assert not any(w.code == "few-clusters" for w in groups.warnings)


def test_rounds_warn_about_few_clusters_and_unknown_column():
    parts = {"r1": read(SAMPLES / "round1.csv", keep=["interview"]),
             "r2": read(SAMPLES / "round2.csv", keep=["interview"])}
    result = compare_rounds(parts, cluster="interview", n_resamples=100, seed=1)
    few = [w.message for w in result.warnings if w.code == "few-clusters"]
    assert len(few) == 2 and all("12 interview groups" in m for m in few)
    with pytest.raises(AgreeError) as err:
        compare_rounds(parts, cluster="nope", n_resamples=10)
    assert err.value.code == "cluster"


def test_each_round_shows_the_same_alpha_and_interval_as_score(sample_rounds):
    # one figure per round whichever command prints it: same data, same seed, same interval
    data, result = sample_rounds
    parts = split_rounds(data)
    for name in ("1", "2"):
        scored = agree.score(parts[name], n_resamples=500, seed=11).coefficients["krippendorff_alpha"]
        shown = result.round(name).overall
        assert (shown.estimate, shown.ci_low, shown.ci_high) == (scored.estimate, scored.ci_low, scored.ci_high)


def test_report_on_rounds_prints_the_interval_of_score_for_the_analysed_round(sample_rounds):
    data, _ = sample_rounds
    report = build_report(None, rounds=split_rounds(data), n_resamples=300, seed=4)
    alpha = report.primary_result
    scored = agree.score(split_rounds(data)["2"], n_resamples=300, seed=4).coefficients["krippendorff_alpha"]
    assert (alpha.ci_low, alpha.ci_high) == (scored.ci_low, scored.ci_high)
    assert (report.rounds.round("2").overall.ci_low, report.rounds.round("2").overall.ci_high) == \
        (scored.ci_low, scored.ci_high)


def test_per_code_figures_shown_per_round_equal_diagnose_codes_with_the_seed(sample_rounds):
    from agree.analysis.diagnostics import diagnose_codes
    from agree.analysis.rounds import split_rounds

    data, result = sample_rounds
    for name, part in split_rounds(data).items():
        diag = diagnose_codes(part, minimum=0.8, n_resamples=500, seed=11)
        rows = diag.per_code.set_index(diag.per_code["code"].astype(str))
        shown = result.round(name)
        assert set(shown.per_code) == set(rows.index)
        for code, res in shown.per_code.items():
            row = rows.loc[code]
            assert res.estimate == row.alpha
            assert (res.ci_low, res.ci_high) == (row.ci_low, row.ci_high)
            assert res.lower_bound == row.lower_bound and res.p_value_min == row.p_value_min
            assert shown.code_status[code] == row.status
    # the figure plots the same numbers
    frame = result.to_frame()
    first = frame[(frame["round"] == "1") & frame["code"].notna()].iloc[0]
    assert first.estimate == result.round("1").per_code[first.code].estimate


def test_report_per_code_table_equals_the_rounds_figures_of_that_round(sample_rounds):
    data, _ = sample_rounds
    report = build_report(None, rounds=split_rounds(data), n_resamples=300, seed=4)
    final = report.rounds.round(report.analysed_round)
    for rec in report.per_code:
        res = final.per_code[str(rec["code"])]
        assert res.estimate == pytest.approx(rec["alpha"], abs=0)
        assert (res.ci_low, res.ci_high) == (rec["ci_low"], rec["ci_high"])
        assert final.code_status[str(rec["code"])] == rec["status"]
    # without a seed one is drawn and shared by both
    drawn = build_report(None, rounds=split_rounds(data), n_resamples=100)
    final = drawn.rounds.round(drawn.analysed_round)
    rec = drawn.per_code[0]
    assert final.per_code[str(rec["code"])].ci_low == rec["ci_low"]
    assert drawn.rounds.seed == drawn.seed


def _rare_rounds():
    # code 'Rare' is used on 2 shared units in round 1 and 3 in round 2: too rare (< 5)
    rng = np.random.default_rng(5)
    out = {}
    for name, k in (("1", 2), ("2", 3)):
        a = list(rng.choice(["X", "Y"], 60))
        b = [v if rng.random() < 0.9 else ("Y" if v == "X" else "X") for v in a]
        for u in range(k):
            a[u] = "Rare"
        b[0] = "Rare"
        out[name] = from_table(np.array([a, b], dtype=object).T, coders=["a", "b"], categories=["X", "Y", "Rare"])
    return out


def test_too_rare_codes_are_marked_in_changes_and_below_lists():
    from agree.output.report import rounds_tables

    result = compare_rounds(_rare_rounds(), n_resamples=200, seed=3, minimum=0.8)
    for r in result.rounds:
        assert r.code_status["Rare"] == "too rare"
        assert "Rare" in r.too_rare and "Rare" not in r.codes_below(0.8)
    tables = {t.key: t for t in rounds_tables(result, 2)}
    below = [row[-1].text for row in tables["rounds"].rows]
    assert all("Rare (too rare)" in cell for cell in below)
    change = [row[1].text for row in tables["round_changes"].rows if row[1].text.startswith("Rare")]
    assert change == ["Rare (too rare in round 1 and round 2)"]
    summary = " ".join(result.summary)
    assert "‘Rare’ was used on too few units to judge" in summary
    assert not any("Rare" in line and "below" in line for line in result.summary)
    assert result.to_dict()["rounds"][0]["code_status"]["Rare"] == "too rare"
