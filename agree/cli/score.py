"""`agree score`: every standard coefficient with its interval, from the coders' sheets or from
highlighted passages (a span table or a .qdpx/.qde project, through one of three views)."""

from __future__ import annotations

import math
import sys
from enum import Enum
from typing import TYPE_CHECKING, Annotated

import typer
from rich.table import Table

from agree.cli.app import app, note, percent, print_json, progress_bar, scaled, stdout
from agree.cli.options import (
    DEFAULT_BOOT,
    DEFAULT_SEED,
    BootOption,
    CIOption,
    ClusterOption,
    CodebookOption,
    Files,
    FormatOption,
    LevelOption,
    MinOption,
    SeedOption,
    TableFormat,
    load_data,
    reading_options,
)
from agree.cli.spans import span_options
from agree.core.cells import csv_text, frame_csv
from agree.core.constants import CI_METHODS
from agree.core.errors import AgreeError
from agree.core.registry import display_name, skipped_by_reason

if TYPE_CHECKING:
    from agree.analysis.passages import PassageAgreement
    from agree.core.spans import SpanData
    from agree.stats.scoring import ScoreResult


class CIMethod(str, Enum):
    pseudo_unit = "pseudo-unit"
    bca = "bca"
    percentile = "percentile"


CIMethodOption = Annotated[CIMethod, typer.Option(
    "--ci-method", help="How intervals and bounds are made: pseudo-unit (Bayesian bootstrap with a "
                        "least-favourable unit; keeps its level with few units and high agreement), "
                        "or the ordinary bootstrap's bca or percentile, for comparison.")]



@app.command()
@reading_options
@span_options
def score(
    files: Files,
    level: LevelOption = None,
    codebook: CodebookOption = None,
    minimum: MinOption = None,
    boot: BootOption = DEFAULT_BOOT,
    seed: SeedOption = DEFAULT_SEED,
    ci: CIOption = 0.95,
    ci_method: CIMethodOption = CIMethod.pseudo_unit,
    output_format: FormatOption = TableFormat.table,
    cluster: ClusterOption = None,
    *,
    reading: dict,
    span_reading: dict,
):
    """Agreement between coders: every standard coefficient with a bootstrap interval.

    Highlighted passages (a span table or a .qdpx/.qde project) are scored through a view
    (--view): positions as units (the default: per code alpha and kappa, all codes as set-valued
    alpha, Dice and span matching; intervals resample whole documents), segments as units (the
    usual coefficients on paragraphs, sentences, turns or listed segments), or unitizing
    (Krippendorff's u-alpha, experimental).

    Example: agree score samples/round2.csv --codebook samples/codebook.csv --keep interview --min 0.8

    Example: agree score samples/passages.qdpx --min 0.667

    Example: agree score samples/passages_spans.csv --texts samples/passages --view segments --segments turn
    """
    from agree.cli.spans import load_spans
    from agree.stats.scoring import score as run_score

    spans = load_spans(files, codebook=codebook, reading=reading, **span_reading)
    if spans is not None:
        score_spans(spans, span_reading, level=level, minimum=minimum, boot=boot, seed=seed, ci=ci,
                    ci_method=ci_method.value, output_format=output_format, cluster=cluster)
        return
    with progress_bar("score") as tick:
        tick("reading", 0.0)
        data = load_data(files, codebook=codebook, level=level, cluster=cluster, weighted_ok=True,
                         progress=scaled(tick, 0.0, 0.3), **reading)
        result = run_score(data, level=level.value if level else None, minimum=minimum, n_resamples=boot,
                           seed=seed, confidence_level=ci, ci_method=ci_method.value, cluster=cluster,
                           progress=scaled(tick, 0.3, 1.0))
    if result.units_used == 0:
        raise AgreeError(f"no unit was coded by two or more coders ({result.units_read} units, "
                         f"{result.values_read} values read, {result.values_missing} empty cells)",
                         hint="fill in the coding sheets, or check the layout detected (--layout)",
                         code="no-pairable-units")
    if output_format is TableFormat.json:
        print_json(result.to_dict())
    elif output_format is TableFormat.csv:
        sys.stdout.write(score_csv(result))
    else:
        print_score(result)


def score_spans(spans: "SpanData", span_reading: dict, *, level, minimum, boot, seed, ci, ci_method,
                output_format: TableFormat, cluster: str | None) -> None:
    """Score highlighted passages through the view asked for (`agree.cli.spans.view_choice`)."""
    from agree.analysis import passages
    from agree.cli.spans import compared, view_choice, view_data
    from agree.stats.scoring import score as run_score

    view = view_choice(span_reading, command="score")
    options = dict(minimum=minimum, n_resamples=boot, seed=seed, confidence_level=ci, ci_method=ci_method)
    if view == "segments":
        data, group, named = view_data(spans, span_reading, command="score", cluster=cluster, level=level)
        with progress_bar("score") as tick:
            result = run_score(data, cluster=group, progress=scaled(tick, 0.0, 1.0), **options)
        if boot:
            named += f", whole {group} groups resampled"
        if output_format is TableFormat.json:
            print_json({"view": named, **result.to_dict()})
        elif output_format is TableFormat.csv:
            sys.stdout.write(score_csv(result, view=named))
        else:
            stdout.print(f"View: {named}.", highlight=False)
            print_score(result)
        return
    if level is not None and level.value != "nominal":
        raise AgreeError(f"--level {level.value}: codes of highlighted passages are nominal", code="bad-option",
                         hint="leave --level out for span data")
    if cluster is not None:
        raise AgreeError(f"--cluster {cluster}: the {view} view resamples whole documents", code="bad-option",
                         hint="leave --cluster out (or use --view segments)")
    if view == "positions":
        result = passages.position_agreement(spans, **compared(span_reading), **options)
    else:
        if span_reading.get("documents") == "pairable":
            raise AgreeError("--documents pairable: unitizing compares only documents every compared coder coded",
                             hint="leave --documents out with --view unitizing", code="bad-option")
        result = passages.unitizing_agreement(spans, coders=span_reading.get("coders"), **options)
    if output_format is TableFormat.json:
        print_json(result.to_dict())
    elif output_format is TableFormat.csv:
        sys.stdout.write(frame_csv(result.to_frame()))
    else:
        print_passages(result, minimum)


def print_passages(result: "PassageAgreement", minimum: float | None) -> None:
    """Agreement on passages: the view, the overall and per-code table, then Dice and span matching."""
    from agree.core.format import decision_sentence, format_bound, format_interval, format_value, result_label

    first = result.overall or next((r for v in result.per_code.values() for r in v.values()), None)
    pct = percent(first.confidence_level if first is not None else 0.95, None)
    stdout.print(f"View: {result.view}.", highlight=False)
    stdout.print(f"Units: {result.units}.", highlight=False)
    bound = (lambda r: f", bound† {format_bound(r.lower_bound, minimum)}") if minimum is not None else (lambda r: "")
    if result.overall is not None:
        r = result.overall
        distance = f" ({r.details['distance']} distance)" if r.details.get("distance") else ""
        label = display_name(r.name) if result.kind == "unitizing" else result_label(r)
        for w in r.warnings:
            if w.code == "few-clusters":
                note(f"warning [{w.code}]: {w.message}")
        stdout.print(f"{label}{distance}, all codes: {format_value(r.estimate, digits=3)} "
                     f"{format_interval(r.ci_low, r.ci_high, 3)}{bound(r)}", highlight=False)
    names = list(dict.fromkeys(name for results in result.per_code.values() for name in results))
    table = Table(title="Per code" + (" (1 = marked, 0 = not marked, per position)" if result.kind == "positions"
                                      else ""), title_justify="left")
    width = min(32, max((len(w) for c in result.per_code for w in c.split()), default=4))
    table.add_column("Code", overflow="fold", min_width=width)
    for k, name in enumerate(names):    # the first coefficient with its interval; the others' in json/csv
        table.add_column(display_name(name).replace("Krippendorff's alpha", "α").replace(" kappa", " κ"),
                         justify="right")
        if k == 0:
            table.add_column(f"{pct} CI", justify="right")
            if minimum is not None:
                table.add_column("bound†", justify="right")
    for code, results in result.per_code.items():
        cells = [code]
        for k, name in enumerate(names):
            r = results.get(name)
            cells.append("–" if r is None else format_value(r.estimate, digits=3))
            if k == 0:
                cells.append("–" if r is None else format_interval(r.ci_low, r.ci_high, 3))
                if minimum is not None:
                    cells.append("–" if r is None else format_bound(r.lower_bound, minimum))
        table.add_row(*cells)
    stdout.print(table)
    if result.specific is not None and len(result.specific):
        dice = Table(title="Positional specific agreement (Dice; descriptive, not chance-corrected)",
                     title_justify="left")
        for name in ("Code", "Coders", "Positions marked", "Both", "Dice"):
            dice.add_column(name, justify="left" if name in ("Code", "Coders") else "right", overflow="fold",
                            min_width=width if name == "Code" else None)
        for r in result.specific.itertuples(index=False):
            dice.add_row(r.code, f"{r.coder_a} / {r.coder_b}", f"{r.positions_a:,} / {r.positions_b:,}",
                         f"{r.positions_both:,}", format_value(r.dice, digits=3))
        stdout.print(dice)
    if result.matching is not None and len(result.matching):
        match = Table(title="Span matching (a span is found by a same-code span of the other coder with Jaccard "
                            "≥ .5; descriptive)", title_justify="left")
        for name in ("Code", "Coders", "Spans", "Recall", "Precision", "F1"):
            match.add_column(name, justify="left" if name in ("Code", "Coders") else "right", overflow="fold",
                             min_width=width if name == "Code" else None)
        for r in result.matching.itertuples(index=False):
            match.add_row(r.code, f"{r.coder_a} / {r.coder_b}", f"{r.spans_a} / {r.spans_b}",
                          format_value(r.recall, digits=3),
                          format_value(r.precision, digits=3), format_value(r.f1, digits=3))
        stdout.print(match)
        stdout.print("Recall: share of the first coder's spans the second found; precision: share of the "
                     "second's spans the first found (counts in --format json or csv).", highlight=False)
    for n in result.notes:
        if n.code != "view":
            stdout.print(n.message.replace("Declare the coded documents", "Give --all-coded"), highlight=False)
    for line in result.left_out:
        if line not in {n.message for n in result.notes}:
            stdout.print(f"Left out: {line}", highlight=False)
    if minimum is not None and result.overall is not None:
        stdout.print(f"† bound: the one-sided {pct} lower bound, which decides against the minimum (it clears it "
                     "when above it).", highlight=False)
        stdout.print("Decision (all codes): "
                     f"{decision_sentence(result.overall, minimum)}.", highlight=False)


def score_csv(result: "ScoreResult", view: str | None = None) -> str:
    """The coefficients as CSV, by agree's one CSV writer (`agree.core.cells`); with `view` (scores of
    highlighted passages) a first column names it."""
    header = ["coefficient", "estimate", "se", "ci_low", "ci_high", "confidence_level", "ci_method",
              "lower_bound", "p_value_min", "n_units", "n_coders", "level", "weights"]
    rows = ([name] + [None if isinstance(v, float) and not math.isfinite(v) else v for v in
                      (r.estimate, r.se, r.ci_low, r.ci_high, r.confidence_level, r.ci_method,
                       r.lower_bound, r.p_value_min, r.n_units, r.n_coders, result.level, r.weights)]
            for name, r in result.coefficients.items())
    if view is not None:
        header, rows = ["view", *header], ([view, *row] for row in rows)
    return csv_text(header, rows)


def print_score(result: "ScoreResult") -> None:
    from agree.core.format import format_bound, format_interval, format_value, p_min_label, p_min_note, result_label

    pct = percent(result.confidence_level, None)
    title = (f"Agreement: {result.units_used} units, {len(result.coders)} coders "
             f"({', '.join(result.coders)}), level {result.level}")
    table = Table(title=title, title_justify="left")
    table.add_column("Coefficient")
    table.add_column("Estimate", justify="right")
    table.add_column("SE", justify="right")
    table.add_column(f"{pct} CI", justify="right")
    if result.minimum is not None:
        table.add_column("bound†", justify="right")
        table.add_column(p_min_label(result.minimum), justify="right")
    for r in result.coefficients.values():
        ci = format_interval(r.ci_low, r.ci_high, 3)
        row = [result_label(r, result.level), format_value(r.estimate, digits=3), format_value(r.se, "se", 3), ci]
        if result.minimum is not None:
            row.append(format_bound(r.lower_bound, result.minimum))
            row.append(format_value(r.p_value_min, "probability"))
        table.add_row(*row)
    stdout.print(table)
    over = ("units" if result.resampled == "unit" else
            f"whole groups of '{result.resampled.partition(':')[2]}'" if ":" in result.resampled else "whole groups")
    how = CI_METHODS.get(result.ci_method, result.ci_method)
    boot = (f"{how}, {result.n_resamples} {'draws' if result.ci_method == 'pseudo-unit' else 'resamples'} "
            f"over {over}, seed {result.seed}" if result.n_resamples else
            "no resampling; analytic intervals where published (normal or t approximation, Wilson for "
            "two coders' percent agreement)")
    se_rule = ("the bootstrap SD (published SEs, and the z-tests of no agreement beyond chance, assume "
               "independent units: no z or p-value is given for groups)" if result.resampled != "unit"
               else "analytic where published, else the bootstrap SD" if result.n_resamples
               else "analytic where published, else none (no bootstrap)")
    stdout.print(f"Intervals: {boot}. SE: {se_rule}.", highlight=False)
    if result.minimum is not None:
        stdout.print(f"† bound: the one-sided {pct} lower bound, which decides against the minimum (it clears it "
                     "when above it). " + p_min_note(result.minimum, result.confidence_level,
                                                     resampled=bool(result.n_resamples)), highlight=False)
    stdout.print(f"Units: {result.units_read} read, {result.units_used} used, {result.units_read - result.units_used} left out "
                 f"(fewer than two coders). Values: {result.values_read} read, {result.values_missing} empty cells.",
                 highlight=False)
    if result.units_left_out:
        shown = ", ".join(result.units_left_out[:10])
        more = f" and {len(result.units_left_out) - 10} more" if len(result.units_left_out) > 10 else ""
        stdout.print(f"Left out: {shown}{more}", highlight=False)
    for reason, names in skipped_by_reason(result.skipped).items():
        stdout.print(f"Not computed – {', '.join(map(display_name, names))}: {reason}", highlight=False)
    decision = result.decision()
    if decision is not None:
        stdout.print(f"Decision: {decision['sentence']}.", highlight=False)
    for w in result.warnings:
        note(f"warning [{w.code}]: {w.message}")
    stdout.print("Benchmarks such as .800 (Krippendorff) or the Landis–Koch bands are conventions; compare the "
                 "lower bound, not the estimate, with the minimum you chose, and report per-code results "
                 "(agree codes).", style="dim", highlight=False)
