"""`agree plan` (how many units to double-code) and `agree sample` (draw them, write the sheets)."""

from __future__ import annotations

from enum import Enum
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Optional

import typer
from rich.table import Table
from rich.text import Text

from agree.cli.app import app, note, print_json, progress_bar, stdout
from agree.core.model import AgreeError

if TYPE_CHECKING:
    from agree.analysis.planning import Plan


class OutputFormat(str, Enum):
    table = "table"
    json = "json"


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


@app.command()
def plan(
    coders: Annotated[int, typer.Option("--coders", help="Number of coders who each code every unit.")],
    expected: Annotated[float, typer.Option("--expected", help="The alpha the coders are expected to reach.")],
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
    output_format: Annotated[OutputFormat, typer.Option("--format", help="table or json.")] = OutputFormat.table,
):
    """How many units to double-code: a Monte Carlo plan for Krippendorff's alpha.

    Example: agree plan --coders 2 --shares 0.5,0.3,0.15,0.05 --expected 0.9 --min 0.8 --plot assurance.png
    """
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
    if output_format is OutputFormat.json:
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
                f"{i['confidence_level']:.0%} lower bound of {i['level']} alpha exceeds "
                f"{_num(i['minimum'])} with probability {i['assurance']:.0%}, if the coders reach "
                f"alpha = {_num(i['expected'])}.")
    stdout.print(head, highlight=False)
    stdout.print(f"Inputs: {i['coders']} coders; {i['categories']} categories with shares {shares}; "
                 f"missing {i['missing']:.0%}.", highlight=False)
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


@app.command()
def sample(
    corpus: Annotated[Path, typer.Argument(help="The full list of units (.csv or .xlsx), one row per unit.",
                                           show_default=False)],
    n: Annotated[int, typer.Option("-n", "--units", help="Number of units to draw.")],
    coders: Annotated[str, typer.Option("--coders", help="Coder names, comma-separated: one workbook each.")],
    out: Annotated[Path, typer.Option("-o", "--out", help="Folder for the coding workbooks and the manifest.")],
    stratify: Annotated[Optional[str], typer.Option(
        "--stratify", help="Column to stratify by (e.g. interview): each group in proportion. The column "
                           "is copied into every coder's sheet, so the sheets can be scored with "
                           "--keep COLUMN --cluster COLUMN.")] = None,
    keep: Annotated[Optional[list[str]], typer.Option(
        "--keep", "--keep-col", help="Another column of the list of units to copy into every coder's "
                                     "sheet, after the unit id, for context; repeatable.")] = None,
    exclude: Annotated[Optional[list[Path]], typer.Option(
        "--exclude", help="A file of units already double-coded (a coding file with a unit column, "
                          "or a .txt list, one id a line): those units are not drawn again; "
                          "repeat for several files.")] = None,
    seed: Annotated[int, typer.Option("--seed", help="Seed of the draw; the same seed draws the same units.")] = 1,
    codebook: Annotated[Optional[Path], typer.Option(
        "--codebook", help="Codebook (.txt one code a line, or .csv/.xlsx with a code column): "
                           "becomes the drop-down list.")] = None,
    shuffle: Annotated[bool, typer.Option("--shuffle", help="Give each coder the units in their own order.")] = False,
    unit_col: Annotated[Optional[str], typer.Option("--unit-col", help="The unit-id column, if not detected.")] = None,
    text_col: Annotated[Optional[str], typer.Option("--text-col", help="The text column, if not detected.")] = None,
    sheet: Annotated[Optional[str], typer.Option("--sheet", help="Worksheet of an .xlsx list of units.")] = None,
    force: Annotated[bool, typer.Option("--force", help="Write into a folder that is not empty.")] = False,
    output_format: Annotated[OutputFormat, typer.Option("--format", help="table or json.")] = OutputFormat.table,
):
    """Draw the reliability sample and write one blank coding workbook per coder.

    Example: agree sample samples/corpus.csv -n 120 --stratify interview --coders amara,bastien --codebook samples/codebook.csv --exclude samples/round1.csv --exclude samples/round2.csv -o sheets/
    """
    from agree.analysis.sampling import (
        draw_sample,
        load_codebook_categories,
        read_corpus,
        read_unit_ids,
        write_coding_sheets,
    )

    frame = read_corpus(corpus, sheet=sheet)
    exclude_files = list(exclude or [])
    already = read_unit_ids(exclude_files, id_col=unit_col) if exclude_files else ()
    drawn = draw_sample(frame, n, stratify=stratify, seed=seed, id_col=unit_col, exclude=already)
    categories = load_codebook_categories(codebook) if codebook is not None else None
    names = [c.strip() for c in coders.split(",") if c.strip()]
    written = write_coding_sheets(drawn, out, coders=names, codebook=categories, shuffle=shuffle,
                                  text_col=text_col, force=force, corpus_path=corpus, keep=list(keep or []))
    if exclude_files:
        note(sample_exclusion_note(drawn, [str(f) for f in exclude_files]))
    if output_format is OutputFormat.json:
        print_json(written.to_dict())
        return
    available = drawn.attrs["corpus_size"] - drawn.attrs.get("excluded", 0)
    pool = (f"{available} units not yet coded in {corpus}" if drawn.attrs.get("excluded")
            else f"{drawn.attrs['corpus_size']} units from {corpus}")
    stdout.print(f"Drew {written.n} of {pool} "
                 f"(seed {drawn.attrs['seed']}{', stratified by ' + stratify if stratify else ', simple random'}).",
                 highlight=False)
    allocation = drawn.attrs.get("allocation")
    if allocation:
        excluded = drawn.attrs.get("strata_excluded") or {}
        table = Table(title=f"Units drawn per {stratify}", title_justify="left")
        table.add_column(str(stratify))
        if any(excluded.values()):
            table.add_column("Already coded", justify="right")
        table.add_column("Units available", justify="right")
        table.add_column("Drawn", justify="right")
        for name, k in allocation.items():
            cells = [Text(name)]
            if any(excluded.values()):
                cells.append(str(excluded.get(name, 0)))
            table.add_row(*cells, str(drawn.attrs["strata_sizes"][name]), str(k))
        stdout.print(table)
    for f in written.files:
        stdout.print(f"wrote {f}", highlight=False)
    stdout.print(f"wrote {written.manifest_csv} and {written.manifest_json}", highlight=False)
    if categories is not None and written.drop_down is None:
        note("the codebook is too long for a drop-down list (Excel allows 255 characters); "
             "the code column is left free")
    if written.context_columns:
        note(f"column(s) {', '.join(repr(c) for c in written.context_columns)} copied into every sheet "
             "for context (shaded; leave them as they are)")
    note(f"read them back with: {score_command(written, stratify, codebook)}")


def sample_exclusion_note(drawn, files: list[str]) -> str:
    """How many units were left out of the draw as already coded, and any ids not found."""
    a = drawn.attrs
    text = (f"excluded {a['excluded']} unit{'s' if a['excluded'] != 1 else ''} already coded "
            f"({a['exclude_given']} distinct id{'s' if a['exclude_given'] != 1 else ''} in "
            f"{', '.join(files)})")
    if a.get("exclude_not_in_corpus"):
        text += f"; {a['exclude_not_in_corpus']} of those ids are not in the list of units"
    return text


def score_command(written, stratify: Optional[str], codebook: Optional[Path] = None) -> str:
    command = f"agree score {' '.join(written.files)}"
    if codebook is not None:
        command += f" --codebook {codebook}"  # keeps unused codes and the scale order
    if stratify:
        command += f" --keep {stratify} --cluster {stratify}"
    return command
