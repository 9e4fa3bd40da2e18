"""`agree score`: every standard coefficient with its interval, from the coders' sheets."""

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
from agree.core.cells import csv_text
from agree.core.constants import CI_METHODS
from agree.core.errors import AgreeError
from agree.core.registry import display_name, skipped_by_reason

if TYPE_CHECKING:
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
):
    """Agreement between coders: every standard coefficient with a bootstrap interval.

    Example: agree score samples/round2.csv --codebook samples/codebook.csv --keep interview --min 0.8
    """
    from agree.stats.scoring import score as run_score

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


def score_csv(result: "ScoreResult") -> str:
    """The coefficients as CSV, by agree's one CSV writer (`agree.core.cells`)."""
    header = ["coefficient", "estimate", "se", "ci_low", "ci_high", "confidence_level", "ci_method",
              "lower_bound", "p_value_min", "n_units", "n_coders", "level", "weights"]
    rows = ([name] + [None if isinstance(v, float) and not math.isfinite(v) else v for v in
                      (r.estimate, r.se, r.ci_low, r.ci_high, r.confidence_level, r.ci_method,
                       r.lower_bound, r.p_value_min, r.n_units, r.n_coders, result.level, r.weights)]
            for name, r in result.coefficients.items())
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
    stdout.print("Benchmarks such as 0.80 (Krippendorff) or the Landis–Koch bands are conventions; compare the "
                 "lower bound, not the estimate, with the minimum you chose, and report per-code results "
                 "(agree codes).", style="dim", highlight=False)
