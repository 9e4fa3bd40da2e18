"""`agree plan`: how many units to double-code."""

from __future__ import annotations

from enum import Enum
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Optional

import typer
from rich.table import Table
from rich.text import Text

from agree.cli.app import app, note, percent, print_json, progress_bar, stdout
from agree.cli.options import ResultFormatOption, SummaryFormat
from agree.core.errors import AgreeError

if TYPE_CHECKING:
    from agree.analysis.planning import Plan


class PlanLevel(str, Enum):
    nominal = "nominal"
    ordinal = "ordinal"
    interval = "interval"


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

Example: agree plan --coders 2 --shares 0.4,0.3,0.2,0.1 --expected 0.85
Every option: agree plan --help"""


@app.command()
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
    level: Annotated[PlanLevel, typer.Option("--level", help="Level of measurement.")] = PlanLevel.nominal,
    ci: Annotated[float, typer.Option("--ci", help="Confidence level of the one-sided lower bound.")] = 0.95,
    assurance: Annotated[float, typer.Option(
        "--assurance", help="Wanted probability that the lower bound clears the minimum.")] = 0.80,
    missing: Annotated[float, typer.Option(
        "--missing", help="Expected share of missing values (completely at random).")] = 0.0,
    seed: Annotated[int, typer.Option("--seed", help="Seed of the simulation; the same seed repeats the plan.")] = 1,
    replicates: Annotated[int, typer.Option("--replicates", help="Simulated studies per sample size.")] = 500,
    boot: Annotated[int, typer.Option("--boot", help="Bootstrap replicates per simulated study.")] = 500,
    max_units: Annotated[int, typer.Option("--max-units", help="Largest sample size searched.")] = 2000,
    corpus_size: Annotated[Optional[int], typer.Option(
        "--corpus-size", help="Units in the whole study, for the percentage rules of thumb.")] = None,
    plot: Annotated[Optional[Path], typer.Option("--plot", help="Write the assurance curve to this PNG file.")] = None,
    output_format: ResultFormatOption = SummaryFormat.table,
):
    """How many units to double-code: a Monte Carlo plan for Krippendorff's alpha.

    Example: agree plan --coders 2 --shares 0.5,0.3,0.15,0.05 --expected 0.9 --min 0.8 --plot assurance.png

    With no options at all it prints what it needs, with an example, and exits with code 0.
    """
    if coders is None or expected is None:
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
    from agree.analysis.planning import plan_sample
    from agree.output.plots import assurance_figure, save_figure

    with progress_bar("plan") as tick:
        result = plan_sample(coders=coders, expected=expected, minimum=minimum, categories=categories,
                             shares=_shares(shares), rarest=rarest, level=level.value, confidence_level=ci,
                             assurance=assurance, missing=missing, seed=seed, replicates=replicates,
                             n_resamples=boot, max_units=max_units, corpus_size=corpus_size, progress=tick)
    if plot is not None:
        save_figure(assurance_figure(result), plot, dpi=120)
        note(f"assurance curve written to {plot}")
    if output_format is SummaryFormat.json:
        print_json(result.to_dict())
    else:
        print_plan(result)


def _num(x: float, digits: int = 3) -> str:
    return f"{x:.{digits}f}"


def print_plan(p: "Plan") -> None:
    i = p.inputs
    shares = ", ".join(f"{s:.3g}" for s in i["shares"])
    if p.units_needed is None:
        head = f"More than {i['max_units']} units would be needed (see the warnings)."
    else:
        head = (f"Units needed: {p.units_needed}, each coded by every coder. With them the one-sided "
                f"{percent(i['confidence_level'], None)} lower bound of {i['level']} alpha exceeds "
                f"{_num(i['minimum'])} with probability {percent(i['assurance'], None)}, if the coders reach "
                f"alpha = {_num(i['expected'])}.")
    stdout.print(head, highlight=False)
    stdout.print(f"Inputs: {i['coders']} coders; {i['categories']} categories with shares {shares}; "
                 f"missing {percent(i['missing'], None)}.", highlight=False)
    stdout.print(Text("Model: " + p.model))
    stdout.print(Text(p.interval))
    stdout.print(f"Smoothing: {p.smoothing}. Seed {p.seed}.", highlight=False)
    table = Table(title="Assurance by sample size", title_justify="left")
    table.add_column("Units", justify="right")
    table.add_column("Assurance", justify="right")
    table.add_column("MC error", justify="right")
    table.add_column("Smoothed", justify="right")
    for pt in p.curve:
        table.add_row(str(pt.units), _num(pt.assurance), _num(pt.mc_error), _num(pt.smoothed))
    stdout.print(table)
    forms = Table(title="Closed forms (context; different assumptions)", title_justify="left")
    forms.add_column("Formula")
    forms.add_column("Units", justify="right")
    forms.add_column("Source and assumptions")
    for c in p.closed_forms:
        forms.add_row(Text(c.name), "–" if c.units is None else str(c.units),
                      Text(f"{c.source}. {c.assumptions}"))
    stdout.print(forms)
    for r in p.rules_of_thumb:
        units = ""
        if r.units_high is not None:
            units = f" (here {r.units} to {r.units_high} units)"
        elif r.units is not None:
            units = f" (here at least {r.units} units)"
        stdout.print(Text(f"Rule of thumb, {r.name}: {r.rule}{units}. {r.note}"))
    for w in p.warnings:
        note(f"warning [{w.code}]: {w.message}")
