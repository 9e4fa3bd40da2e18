"""One report for the whole study, the coder section, resamples below the minimum without a
bootstrap, and consensus files of other units.

External checks: the coders' pairwise and leave-one-out α against the `krippendorff` package
(reference library), the pairwise κ against scikit-learn's `cohen_kappa_score` (test-only
reference), each variable's figures against the one-variable report of the same data.
"""

from __future__ import annotations

import json
from pathlib import Path

import krippendorff
import numpy as np
import pandas as pd
import pytest

from agree.core.model import AgreeError, from_table
from agree.io.readers import read
from agree.output.report import (
    Variable,
    p_min_column_note,
    build_report,
    build_study_report,
    plain,
    report_tables,
    summarise_consensus,
)

SAMPLES = Path(__file__).resolve().parents[2] / "samples"


def _topics():
    return read(SAMPLES / "multicode.xlsx")


def _ratings():
    return read(SAMPLES / "ratings.csv", codebook=SAMPLES / "ratings_codebook.csv")


@pytest.fixture(scope="module")
def study():
    return build_study_report({"topics": _topics(), "commitment": Variable(_ratings(), level="ordinal")},
                              n_resamples=300, seed=11, corpus_size=600)


# -- one report, several variables ------------------------------------------------------------------

def test_each_variable_gets_the_figures_of_its_own_report(study):
    assert study.variables == ("topics", "commitment")
    alone = build_report(_ratings(), level="ordinal", n_resamples=300, seed=11, corpus_size=600)
    section = study.section("commitment")
    assert section.variable == "commitment" and section.level == "ordinal"
    assert [r.to_dict() for r in section.coefficients] == [r.to_dict() for r in alone.coefficients]
    assert study.section("topics").set_valued and not section.set_valued
    ref = krippendorff.alpha(reliability_data=np.where(_ratings().codes.T >= 0, _ratings().codes.T + 1, np.nan),
                             level_of_measurement="ordinal", value_domain=[1, 2, 3, 4, 5])
    assert section.primary_result.estimate == pytest.approx(ref, abs=1e-12)


def test_one_methods_paragraph_covers_every_variable(study):
    text = plain(study.methods)
    assert text.startswith("Two variables were coded: ‘topics’ (sets of codes per unit) and ‘commitment’ "
                           "(ordinal data).")
    assert "For ‘topics’, two coders coded N = 60 units" in text
    assert "For ‘commitment’, three coders coded N = 80 units" in text
    assert "with the MASI distance between sets of codes (Passonneau, 2006) for ‘topics’ and the ordinal " \
           "metric for ‘commitment’" in text
    from agree.core.format import format_interval, format_value
    for name in study.variables:
        prim = study.section(name).primary_result
        assert (f"or ‘{name}’, α = {format_value(prim.estimate)}, 95% CI "            # For / for
                f"{format_interval(prim.ci_low, prim.ci_high)}") in text
    # shared settings said once
    assert text.count("Confidence intervals (95%)") == 1 and text.count("The minimum acceptable value") == 1
    for placeholder in ("[who the coders were and how they were trained]", "[why this coefficient]",
                        "[why this minimum]", "[how disagreements were resolved]"):
        assert placeholder in text


def test_study_to_dict_is_json_safe_and_names_the_variables(study):
    out = json.loads(json.dumps(study.to_dict(), allow_nan=False))
    assert out["variables"] == ["topics", "commitment"]
    assert [s["variable"] for s in out["sections"]] == ["topics", "commitment"]
    assert out["settings"]["seed"] == 11


def test_study_cautions_name_the_coefficients_any_section_shows(study):
    text = " ".join(plain(c) for c in study.cautions)
    assert "Gwet's AC1" in text                      # shown for the rating, not for the sets of codes
    assert text.count("Gwet's AC1") == 1


def test_several_code_columns_of_one_sheet(tmp_path):
    rng = np.random.default_rng(3)
    rows = []
    for u in range(40):
        topic, severity = rng.choice(["a", "b", "c"]), int(rng.integers(1, 6))
        for coder in ("ann", "ben"):
            rows.append({"unit": f"u{u}", "coder": coder,
                         "topic": topic if rng.random() < 0.8 else rng.choice(["a", "b", "c"]),
                         "severity": min(5, max(1, severity + int(rng.integers(-1, 2))))})
    path = tmp_path / "study.csv"
    pd.DataFrame(rows).to_csv(path, index=False)
    topic, severity = read(path, code="topic"), read(path, code="severity", level="ordinal")
    study = build_study_report({"topic": topic, "severity": severity}, n_resamples=0, seed=1)
    assert [s.level for s in study.sections] == ["nominal", "ordinal"]
    ref = krippendorff.alpha(reliability_data=severity.codes.T.astype(float), level_of_measurement="ordinal",
                             value_domain=list(range(len(severity.values))))
    assert study.section("severity").primary_result.estimate == pytest.approx(ref, abs=1e-12)


def test_study_errors_name_the_variable():
    with pytest.raises(AgreeError) as err:
        build_study_report({}, n_resamples=0)
    assert err.value.code == "no-input"
    with pytest.raises(AgreeError) as err:
        build_study_report({"empty": np.empty((0, 2))}, n_resamples=0)
    assert err.value.code == "empty" and "variable 'empty'" in err.value.message
    with pytest.raises(AgreeError) as err:
        build_study_report({" ": _ratings()}, n_resamples=0)
    assert err.value.code == "variable"
    one = build_study_report({"commitment": _ratings()}, n_resamples=0)
    assert plain(one.methods).startswith("One variable was coded: ‘commitment’ (ordinal data).")


# -- the coders compared ----------------------------------------------------------------------------

def test_coder_section_matches_reference_libraries():
    from sklearn.metrics import cohen_kappa_score

    data = _ratings()
    report = build_report(data, level="ordinal", n_resamples=200, seed=4)
    codes = data.codes
    tables = {t.key: t for t in report_tables(report)}
    pairs = report.coders.pairs
    assert [(p["coder_a"], p["coder_b"]) for p in pairs] == [("amara", "bastien"), ("amara", "chen"),
                                                             ("bastien", "chen")]
    index = {c: i for i, c in enumerate(data.coders)}
    for rec in pairs:
        i, j = index[rec["coder_a"]], index[rec["coder_b"]]
        both = (codes[:, i] >= 0) & (codes[:, j] >= 0)
        matrix = np.where(codes[:, [i, j]].T >= 0, codes[:, [i, j]].T, np.nan).astype(float)
        assert rec["alpha"] == pytest.approx(krippendorff.alpha(
            reliability_data=matrix, level_of_measurement="ordinal", value_domain=[0, 1, 2, 3, 4]), abs=1e-12)
        assert rec["kappa"] == pytest.approx(cohen_kappa_score(codes[both, i], codes[both, j]), abs=1e-12)
        assert rec["n_units"] == int(both.sum())
    # α with each coder left out: with three coders, the α of the other two
    for rec in report.coders.leave_one_out:
        rest = [k for k in range(3) if k != index[rec["coder"]]]
        matrix = np.where(codes[:, rest].T >= 0, codes[:, rest].T, np.nan).astype(float)
        assert rec["alpha_without"] == pytest.approx(krippendorff.alpha(
            reliability_data=matrix, level_of_measurement="ordinal", value_domain=[0, 1, 2, 3, 4]), abs=1e-12)
        assert rec["delta_ci_low"] <= rec["delta"] <= rec["delta_ci_high"]
    loo = tables["leave_one_out"]
    assert loo.header[:3] == ("Coder left out", "α without the coder", "Change")
    shown = [plain(r[2].text) for r in loo.rows]
    assert shown == sorted(shown, key=lambda s: -float(s.replace("−", "-").replace("+", "")))   # largest first
    assert all(s[0] in "+−" for s in shown if s.strip(".0"))
    assert "coder_pairs" in tables


def test_two_coders_have_pairs_but_no_leave_one_out():
    data = read(SAMPLES / "multicode.xlsx")
    report = build_report(data, n_resamples=0, seed=1)
    keys = {t.key for t in report_tables(report)}
    assert "coder_pairs" in keys and "leave_one_out" not in keys
    assert not any(w.code == "leave-one-out-needs-three" for w in report.warnings)


# -- resamples below the minimum without a bootstrap ------------------------------------------------

def test_without_resamples_the_p_value_column_is_called_a_normal_approximation():
    x = np.array([[0, 0], [1, 1], [0, 1], [1, 1], [0, 0], [1, 0], [1, 1], [0, 0], [1, 1], [0, 0]] * 4)
    report = build_report(x, n_resamples=0, seed=1)
    normal = [r for r in report.coefficients if r.p_value_min is not None]
    assert normal and all(r.bootstrap is None for r in normal)
    note = plain(report_tables(report)[0].note)
    assert "from the normal or t approximation with the analytic SE" in note
    assert "same draws" not in note
    boot = build_report(x, n_resamples=200, seed=1)
    assert "read off the same draws as the one-sided lower bound" in plain(report_tables(boot)[0].note)
    mixed = p_min_column_note([boot.coefficients[0], normal[0]], 0.8, 0.95, "nominal")
    assert "read off the same draws" in plain(mixed)
    assert "no resamples were drawn: there it is from the normal or t approximation" in plain(mixed)


# -- a consensus file of other units ----------------------------------------------------------------

def test_a_consensus_file_of_another_round_is_refused(tmp_path):
    round1, round2 = read(SAMPLES / "round1.csv"), read(SAMPLES / "round2.csv")
    path = tmp_path / "consensus-round1.csv"
    pd.DataFrame({"unit": list(map(str, round1.unit_ids)), "final code": "Belonging",
                  "source": "agreed"}).to_csv(path, index=False)
    with pytest.raises(AgreeError) as err:
        build_report(round2, n_resamples=0, consensus=path)
    assert err.value.code == "consensus-units"
    message = err.value.message
    assert str(path) in message and "round2.csv" in message
    assert f"{round1.n_units} of its {round1.n_units} units are not in the data" in message
    assert f"{round2.n_units} of the {round2.n_units} units analysed have no row in it" in message
    # its own round is accepted
    own = tmp_path / "consensus-round2.csv"
    pd.DataFrame({"unit": list(map(str, round2.unit_ids)), "final code": "Belonging",
                  "source": "agreed"}).to_csv(own, index=False)
    assert summarise_consensus(own, round2).n_units == round2.n_units


def test_a_consensus_missing_some_units_is_refused():
    data = from_table([["a", "a"], ["b", "b"], ["a", "b"]], unit_ids=["1", "2", "3"])
    frame = pd.DataFrame({"unit": ["1", "2"], "source": ["agreed", "agreed"]})
    with pytest.raises(AgreeError) as err:
        summarise_consensus(frame, data, round_name="2")
    assert "1 of the 3 units analysed have no row in it" in err.value.message
    assert "round 2" in err.value.message
