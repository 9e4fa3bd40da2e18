"""`agree plan`: how many units to double-code."""

from __future__ import annotations

from enum import Enum
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Optional

import typer
from rich.table import Table
from rich.text import Text

from agree.cli.app import app, note, percent, print_json, progress_bar, stdout
from agree.cli.options import CodebookOption, ResultFormatOption, SummaryFormat, load_data, reading_options
from agree.core.constants import DEFAULT_RESAMPLES
from agree.core.errors import AgreeError

DEFAULT_TOLERANCE = 0.05  # as agree.analysis.planning.DEFAULT_TOLERANCE (not imported: --help stays light)

if TYPE_CHECKING:
    from agree.analysis.planning import Plan


class PlanLevel(str, Enum):
    nominal = "nominal"
    ordinal = "ordinal"
    interval = "interval"


class PlanMethod(str, Enum):
    pseudo_unit = "pseudo-unit"
    bca = "bca"
    percentile = "percentile"


def _shares(text: Optional[str]) -> Optional[list[float]]:
    if text is None:
        return None
    try:
        return [float(x) for x in text.replace(";", ",").split(",") if x.strip()]
    except ValueError:
        raise AgreeError(f"--shares must be numbers separated by commas; got '{text}'",
                         hint="--shares 0.4,0.3,0.2,0.1", code="plan-shares") from None


NEEDS = """\
agree plan works out how many units every coder should code so that the lower bound of
Krippendorff's alpha clears your minimum. It needs:
  --coders N       how many coders will code each unit
  --expected A     the alpha you expect them to reach (from a pilot round, say)
  the codes:       --shares 0.4,0.3,0.2,0.1 (expected share of each code), or
                   --categories K (equal shares; --rarest S for a rarer last code)
Optional: --min (default 0.8), --level, --assurance (default 0.8), --missing, --plot FILE.
Or from a pilot round: --pilot FILE (with --codebook) estimates the shares and alpha, and
their uncertainty, from the pilot's coding.

Example: agree plan --coders 2 --shares 0.4,0.3,0.2,0.1 --expected 0.85
Example: agree plan --pilot round1.csv --codebook codebook.csv --min 0.8
Every option: agree plan --help"""


@app.command()
@reading_options
def plan(
    ctx: typer.Context,
    coders: Annotated[Optional[int], typer.Option(
        "--coders", help="Number of coders who each code every unit.", show_default=False)] = None,
    expected: Annotated[Optional[float], typer.Option(
        "--expected", help="The alpha the coders are expected to reach.", show_default=False)] = None,
    categories: Annotated[Optional[int], typer.Option(
        "--categories", help="Number of categories (equal shares unless --rarest).")] = None,
    shares: Annotated[Optional[str], typer.Option(
        "--shares", help="Expected share of each category, e.g. 0.4,0.3,0.2,0.1 (must sum to 1).")] = None,
    rarest: Annotated[Optional[float], typer.Option(
        "--rarest", help="With --categories: the share of the rarest category (the rest equal).")] = None,
    minimum: Annotated[float, typer.Option("--min", help="Minimum acceptable alpha.")] = 0.800,
    level: Annotated[Optional[PlanLevel], typer.Option(
        "--level", help="Level of measurement (default nominal; with --pilot, the codebook's).",
        show_default=False)] = None,
    ci: Annotated[float, typer.Option("--ci", help="Confidence level of the one-sided lower bound.")] = 0.95,
    assurance: Annotated[float, typer.Option(
        "--assurance", help="Wanted probability that the lower bound clears the minimum.")] = 0.80,
    missing: Annotated[Optional[float], typer.Option(
        "--missing", help="Expected share of missing values, completely at random (default 0; with --pilot, "
                          "the pilot's).", show_default=False)] = None,
    seed: Annotated[int, typer.Option("--seed", help="Seed of the simulation; the same seed repeats the plan.")] = 1,
    replicates: Annotated[int, typer.Option(
        "--replicates", help="Simulated studies per sample size at first (more are added near the answer "
                             "until it is stable, up to 8 times as many).")] = 500,
    boot: Annotated[int, typer.Option(
        "--boot", help="Draws per simulated study; the default is agree score's, so the plan simulates "
                       "exactly its decision.")] = DEFAULT_RESAMPLES,
    ci_method: Annotated[PlanMethod, typer.Option(
        "--ci-method", help="The interval method the study will use (as agree score --ci-method).")]
    = PlanMethod.pseudo_unit,
    tolerance: Annotated[float, typer.Option(
        "--tolerance", help="Grow the simulation until the 95% Monte Carlo range of the answer is within "
                            "this share of it.")] = DEFAULT_TOLERANCE,
    pilot: Annotated[Optional[list[Path]], typer.Option(
        "--pilot", help="A pilot round's coding (any layout agree reads): the category shares, alpha, "
                        "coders and missing share are estimated from it, with their uncertainty.",
        show_default=False)] = None,
    codebook: CodebookOption = None,
    max_units: Annotated[int, typer.Option("--max-units", help="Largest sample size searched.")] = 2000,
    corpus_size: Annotated[Optional[int], typer.Option(
        "--corpus-size", help="Units in the whole study, for the percentage rules of thumb.")] = None,
    plot: Annotated[Optional[Path], typer.Option("--plot", help="Write the assurance curve to this PNG file.")] = None,
    output_format: ResultFormatOption = SummaryFormat.table,
    *,
    reading: dict,
):
    """How many units to double-code: a Monte Carlo plan for Krippendorff's alpha.

    Example: agree plan --coders 2 --shares 0.5,0.3,0.15,0.05 --expected 0.9 --min 0.8 --plot assurance.png

    Example: agree plan --pilot samples/round1.csv --codebook samples/codebook.csv --min 0.8

    With no options at all it prints what it needs, with an example, and exits with code 0.
    """
    if not pilot and (coders is None or expected is None):
        sources = [getattr(ctx.get_parameter_source(name), "name", "DEFAULT") for name in ctx.params]
        if all(source == "DEFAULT" for source in sources):
            stdout.print(Text(NEEDS))           # nothing asked: say what is needed (exit code 0)
            return
        missing_options = [o for o, v in (("--coders", coders), ("--expected", expected)) if v is None]
        raise AgreeError(f"a plan needs {' and '.join(missing_options)}",
                         hint="e.g. agree plan --coders 2 --shares 0.4,0.3,0.2,0.1 --expected 0.85; "
                              "`agree plan` alone says what it needs", code="plan-inputs")
    if plot is not None and plot.suffix.lower() != ".png":
        raise AgreeError(f"--plot writes a PNG file; got '{plot.name}'", hint="name it e.g. assurance.png",
                         code="plot-format")
    from agree.analysis.planning import plan_from_pilot, plan_sample
    from agree.output.plots import assurance_figure, save_figure

    common = dict(minimum=minimum, confidence_level=ci, assurance=assurance, seed=seed, replicates=replicates,
                  n_resamples=boot, ci_method=ci_method.value, max_units=max_units, corpus_size=corpus_size,
                  tolerance=tolerance)
    if pilot:
        if expected is not None or shares is not None or categories is not None or rarest is not None:
            raise AgreeError("--pilot estimates the shares and the expected alpha; do not give --expected, "
                             "--shares, --categories or --rarest with it", code="plan-inputs",
                             hint="use either a pilot round or your own expectations")
        data = load_data(pilot, codebook=codebook, level=level.value if level else None, **reading)
    with progress_bar("plan") as tick:
        if pilot:
            result = plan_from_pilot(data, level=level.value if level else None, coders=coders, missing=missing,
                                     progress=tick, **common)
        else:
            result = plan_sample(coders=coders, expected=expected, categories=categories, shares=_shares(shares),
                                 rarest=rarest, level=level.value if level else "nominal",
                                 missing=0.0 if missing is None else missing, progress=tick, **common)
    if plot is not None:
        save_figure(assurance_figure(result), plot, dpi=120)
        note(f"assurance curve written to {plot}")
    if output_format is SummaryFormat.json:
        print_json(result.to_dict())
    else:
        print_plan(result)


def print_plan(p: "Plan") -> None:
    i = p.inputs
    from agree.core.format import format_value

    def share(x: float) -> str:
        return format_value(x, "probability")

    shares = ", ".join(share(s) for s in i["shares"])
    if p.units_needed is None:
        head = f"More than {i['max_units']:,} units would be needed (see the warnings)."
    else:
        expect = (f"if the coders agree as in the pilot (alpha {format_value(p.pilot.alpha)}, with its uncertainty)"
                  if p.pilot is not None else f"if the coders reach alpha = {format_value(i['expected'])}")
        span = ("" if p.units_range is None else
                f" Monte Carlo range {p.units_range[0]:,} to {p.units_range[1]:,} units (95%; another seed would "
                "land within it).")
        head = (f"Units needed: {p.units_needed:,}, each coded by every coder. With them the one-sided "
                f"{percent(i['confidence_level'], None)} lower bound of {i['level']} alpha exceeds "
                f"{format_value(i['minimum'], 'threshold')} with probability {percent(i['assurance'], None)}, {expect}.{span}")
    stdout.print(head, highlight=False)
    if p.pilot is not None:
        e = p.pilot
        stdout.print(Text(f"Pilot: {e.units} units, {e.coders} coders; {e.level} alpha {format_value(e.alpha)} "
                          f"({percent(i['confidence_level'], None)} interval {format_value(e.alpha_interval[0])} to "
                          f"{format_value(e.alpha_interval[1])}); P(alpha ≤ {format_value(i['minimum'], 'threshold')}) "
                          f"= {share(e.p_value_min)} "
                          f"under its posterior; shares "
                          + ", ".join(f"{c} {share(s)}" for c, s in zip(e.categories, e.shares))
                          + f"; missing {percent(e.missing, 1)}. The plan is for a new round: the pilot's units "
                          "are not counted."))
    stdout.print(f"Inputs: {i['coders']} coders; {i['categories']} categories with shares {shares}; "
                 f"missing {percent(i['missing'], 1)}.", highlight=False)
    stdout.print(Text("Model: " + p.model))
    stdout.print(Text(p.interval))
    stdout.print(f"Smoothing: {p.smoothing}. Seed {p.seed}.", highlight=False)
    table = Table(title="Assurance by sample size", title_justify="left")
    table.add_column("Units", justify="right")
    table.add_column("Assurance", justify="right")
    table.add_column("MC error", justify="right")
    table.add_column("Smoothed", justify="right")
    table.add_column("Studies", justify="right")
    table.add_column("No disagreement", justify="right")
    for pt in p.curve:
        table.add_row(f"{pt.units:,}", share(pt.assurance), share(pt.mc_error), share(pt.smoothed), f"{pt.studies:,}",
                      percent(pt.no_disagreement))
    stdout.print(table)
    forms = Table(title="Closed forms (context; different assumptions)", title_justify="left")
    forms.add_column("Formula")
    forms.add_column("Units", justify="right")
    forms.add_column("Source and assumptions")
    for c in p.closed_forms:
        forms.add_row(Text(c.name), "–" if c.units is None else f"{c.units:,}",
                      Text(f"{c.source}. {c.assumptions}"))
    stdout.print(forms)
    for r in p.rules_of_thumb:
        units = ""
        if r.units_high is not None:
            units = f" (here {r.units:,} to {r.units_high:,} units)"
        elif r.units is not None:
            units = f" (here at least {r.units:,} units)"
        stdout.print(Text(f"Rule of thumb, {r.name}: {r.rule}{units}. {r.note}"))
    for w in p.warnings:
        note(f"warning [{w.code}]: {w.message}")
