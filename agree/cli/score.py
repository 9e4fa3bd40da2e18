"""`agree score`: every standard coefficient with its interval, from the coders' sheets."""

from __future__ import annotations

import csv
import io
import math
import sys
from enum import Enum
from typing import Annotated, Optional

import typer
from rich.table import Table

from agree.cli.app import app, note, print_json, stdout
from agree.cli.reading import (CasefoldOption, ClusterOption, CodebookOption, CodeOption, CoderOption,
                               Files, KeepOption, LayoutOption, LevelOption, SepOption, SheetOption,
                               TextOption, TrimOption, UnitOption, load_data)
from agree.format import format_interval, format_value
from agree.planning import decision_sentence
from agree.scoring import ScoreResult, score as run_score


class OutputFormat(str, Enum):
    table = "table"
    json = "json"
    csv = "csv"


class CIMethod(str, Enum):
    bca = "bca"
    percentile = "percentile"


MinOption = Annotated[Optional[float], typer.Option(
    "--min", help="Minimum acceptable value (e.g. 0.8): adds the probability of lying below it and "
                  "whether the one-sided lower bound clears it. A convention, not a law.")]
BootOption = Annotated[int, typer.Option(
    "--boot", help="Bootstrap replicates (units resampled with all their values); 0 for none.")]
SeedOption = Annotated[int, typer.Option("--seed", help="Seed of the bootstrap; the same seed repeats the run.")]
CIOption = Annotated[float, typer.Option("--ci", help="Confidence level of the two-sided interval.")]
CIMethodOption = Annotated[CIMethod, typer.Option("--ci-method", help="Bootstrap interval: bca or percentile.")]
FormatOption = Annotated[OutputFormat, typer.Option("--format", help="table (readable), json or csv.")]

LABELS = {
    "percent_agreement": "Percent agreement",
    "cohen_kappa": "Cohen's kappa",
    "weighted_kappa_linear": "Weighted kappa (linear)",
    "weighted_kappa_quadratic": "Weighted kappa (quadratic)",
    "scott_pi": "Scott's pi",
    "fleiss_kappa": "Fleiss' kappa",
    "conger_kappa": "Conger's kappa",
    "brennan_prediger": "Brennan-Prediger",
    "gwet_ac1": "Gwet's AC1",
    "gwet_ac2": "Gwet's AC2 (quadratic)",
    "krippendorff_alpha": "Krippendorff's alpha",
}


@app.command()
def score(
    files: Files,
    level: LevelOption = None,
    codebook: CodebookOption = None,
    minimum: MinOption = None,
    boot: BootOption = 2000,
    seed: SeedOption = 1,
    ci: CIOption = 0.95,
    ci_method: CIMethodOption = CIMethod.bca,
    output_format: FormatOption = OutputFormat.table,
    cluster: ClusterOption = None,
    layout: LayoutOption = None,
    unit_col: UnitOption = None,
    coder_col: CoderOption = None,
    code_col: CodeOption = None,
    text_col: TextOption = None,
    sheet: SheetOption = None,
    sep: SepOption = ";",
    trim: TrimOption = False,
    casefold: CasefoldOption = False,
    keep: KeepOption = None,
):
    """Agreement between coders: every standard coefficient with a bootstrap interval.

    Example: agree score samples/round2.csv --codebook samples/codebook.csv --keep interview --min 0.8
    """
    data = load_data(files, layout=layout, unit=unit_col, coder=coder_col, code=code_col, text=text_col,
                     sheet=sheet, sep=sep, codebook=codebook, trim=trim, casefold=casefold, level=level,
                     keep=keep, cluster=cluster)
    result = run_score(data, level=level.value if level else None, minimum=minimum, n_resamples=boot,
                       seed=seed, confidence_level=ci, ci_method=ci_method.value, cluster=cluster)
    if output_format is OutputFormat.json:
        print_json(result.to_dict())
    elif output_format is OutputFormat.csv:
        sys.stdout.write(score_csv(result))
    else:
        print_score(result)


def score_csv(result: ScoreResult) -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["coefficient", "estimate", "se", "ci_low", "ci_high", "confidence_level", "ci_method",
                "p_below_min", "lower_bound", "n_units", "n_coders", "level", "weights"])
    for name, r in result.coefficients.items():
        w.writerow([name] + ["" if v is None or (isinstance(v, float) and not math.isfinite(v)) else v for v in
                             (r.estimate, r.se, r.ci_low, r.ci_high, r.confidence_level, r.ci_method,
                              r.p_below_min, r.lower_bound, r.n_units, r.n_coders, result.level, r.weights)])
    return buf.getvalue()


def print_score(result: ScoreResult) -> None:
    pct = f"{result.confidence_level:.0%}"
    title = (f"Agreement: {result.units_used} units, {len(result.coders)} coders "
             f"({', '.join(result.coders)}), level {result.level}")
    table = Table(title=title, title_justify="left")
    table.add_column("Coefficient")
    table.add_column("Estimate", justify="right")
    table.add_column("SE", justify="right")
    table.add_column(f"{pct} CI", justify="right")
    if result.minimum is not None:
        table.add_column(f"P(< {format_value(result.minimum, 'threshold')})", justify="right")
    for name, r in result.coefficients.items():
        ci = format_interval(r.ci_low, r.ci_high, 3)
        row = [LABELS.get(name, name), format_value(r.estimate, digits=3), format_value(r.se, "se", 3), ci]
        if result.minimum is not None:
            row.append(format_value(r.p_below_min, "probability"))
        table.add_row(*row)
    stdout.print(table)
    boot = (f"{result.n_resamples} bootstrap replicates over units ({result.ci_method}), seed {result.seed}"
            if result.n_resamples else "no bootstrap; analytic intervals where published")
    stdout.print(f"Intervals: {boot}. SE: analytic where published, else the bootstrap SD.", highlight=False)
    stdout.print(f"Units: {result.units_read} read, {result.units_used} used, {len(result.units_left_out)} left out "
                 f"(fewer than two coders). Values: {result.values_read} read, {result.values_missing} empty cells.",
                 highlight=False)
    if result.units_left_out:
        shown = ", ".join(result.units_left_out[:10])
        more = f" and {len(result.units_left_out) - 10} more" if len(result.units_left_out) > 10 else ""
        stdout.print(f"Left out: {shown}{more}", highlight=False)
    for name, reason in result.skipped.items():
        stdout.print(f"Not computed – {LABELS.get(name, name)}: {reason}", highlight=False)
    if result.minimum is not None:
        main = result.coefficients.get("krippendorff_alpha")
        if main is not None:
            stdout.print("Decision: " + decision_sentence(main, result.minimum) + ".", highlight=False)
    for w in result.warnings:
        note(f"warning [{w.code}]: {w.message}")
    stdout.print("Benchmarks such as 0.80 (Krippendorff) or the Landis–Koch bands are conventions; compare the "
                 "lower bound, not the estimate, with the minimum you chose, and report per-code results "
                 "(agree codes).", style="dim", highlight=False)
