"""`agree codes` and `agree coders`: which codes and which coders drive disagreement."""

from __future__ import annotations

import math
import sys
from typing import TYPE_CHECKING, Annotated, Any

import pandas as pd
import typer
from rich.table import Table

from agree.cli.app import app, note, print_json, stdout
from agree.cli.options import (DEFAULT_BOOT, DEFAULT_SEED, BootOption, FormatOption, MinOption, SeedOption,
                               TableFormat)
from agree.cli.reading import CodebookOption, Files, LevelOption, load_data, reading_options

if TYPE_CHECKING:
    from agree.diagnostics import CodeDiagnostics, CoderDiagnostics


MinUnitsOption = Annotated[int, typer.Option("--min-units", help="A code used on fewer shared units "
                                                                 "than this is 'too rare' to judge.")]
TopOption = Annotated[int, typer.Option("--top", help="How many confused pairs to show in the table.")]


def _num(x: Any, digits: int = 3) -> str:
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "–"
    text = f"{x:.{digits}f}"
    return text[1:] if text.startswith("-") and not text.strip("-0.") else text   # no "-0.000"


def _pct(x: Any) -> str:
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "–"
    return f"{100 * x:.0f}%"


def _notes(notes) -> None:
    for n in notes:
        note(f"note: {n.message}")


@app.command("codes")
@reading_options
def codes_command(
    files: Files,
    minimum: MinOption = 0.8,
    boot: BootOption = DEFAULT_BOOT,
    seed: SeedOption = DEFAULT_SEED,
    min_units: MinUnitsOption = 5,
    top: TopOption = 10,
    output: FormatOption = TableFormat.table,
    codebook: CodebookOption = None,
    level: LevelOption = None,
    *,
    reading: dict,
) -> None:
    """Which codes drive disagreement: per-code alpha, specific agreement, confusions, unequal use.

    Codes are listed worst first, each with a short reason.

    Example: agree codes coding.xlsx --min 0.8 --boot 2000 --seed 1
    """
    data = load_data(files, codebook=codebook, level=level, **reading)
    from agree.diagnostics import diagnose_codes

    result = diagnose_codes(data, minimum=minimum, n_resamples=boot, seed=seed,
                            min_units_per_code=min_units)
    _notes(result.notes)
    if output is TableFormat.json:
        print_json(result.to_dict())
    elif output is TableFormat.csv:
        sys.stdout.write(result.to_frame().to_csv(index=False))
    else:
        _codes_table(result, top)


def _codes_table(result: "CodeDiagnostics", top: int) -> None:
    frame = result.to_frame()
    level = f"{result.confidence_level:.0%}"
    table = Table(title=f"Codes, worst first (minimum alpha {_num(result.minimum, 2)})")
    table.add_column("#", justify="right", no_wrap=True)
    table.add_column("code", min_width=8)
    table.add_column("status", min_width=8)
    for name in ["alpha", f"{level} interval", "p_s", "kappa"]:
        table.add_column(name, justify="right", no_wrap=True)
    table.add_column("reason", ratio=1, min_width=20)
    for row in frame.itertuples(index=False):
        interval = ("–" if not math.isfinite(row.ci_low)
                    else f"{_num(row.ci_low)} to {_num(row.ci_high)}")
        table.add_row(str(row.rank), str(row.code), row.status, _num(row.alpha), interval,
                      _num(row.specific_agreement), _num(row.kappa), row.reason)
    stdout.print(table)
    note("p_s: specific agreement (when one coder applied the code, how often another did too); "
         "--format csv or json for per-coder use and the tests of equal use")
    pairs = result.confused_pairs.head(top)
    if len(pairs):
        ptable = Table(title="Most confused pairs (share of all disagreement)")
        columns = ["codes", "count", "share", "o/e", "alpha if merged", "change"]
        if len(result.coders) == 2:
            columns[2:2] = [f"{result.coders[0]}→{result.coders[1]}", "reverse"]
        for name in columns:
            ptable.add_column(name, justify="left" if name == "codes" else "right")
        for p in pairs.itertuples(index=False):
            cells = [f"{p.code_a} / {p.code_b}", _num(p.count, 1), _pct(p.share), _num(p.o_over_e, 2),
                     _num(p.alpha_if_merged), f"{p.delta_alpha:+.3f}"]
            if len(result.coders) == 2:
                cells[2:2] = [_num(p.a_to_b, 0), _num(p.b_to_a, 0)]
            ptable.add_row(*cells)
        stdout.print(ptable)
    mh = result.marginal_homogeneity
    if mh.get("test"):
        line = (f"Marginal homogeneity (Stuart–Maxwell): X² = {_num(mh['statistic'])}, "
                f"df = {mh['df']}, p = {_num(mh['p_value'], 4)}")
        if mh.get("dropped"):
            line += f"; left out (never in a disagreement): {', '.join(map(str, mh['dropped']))}"
        stdout.print(line, highlight=False)
    elif mh.get("reason"):
        note(f"note: no marginal homogeneity test: {mh['reason']}")
    for row in frame.itertuples(index=False):
        if row.paradox:
            note(f"note: {row.code}: {row.explanation}")
    if result.bootstrap is not None:
        note(f"intervals: {result.bootstrap.method}, {result.bootstrap.replicates} unit resamples, "
             f"seed {result.bootstrap.seed}")


@app.command("coders")
@reading_options
def coders_command(
    files: Files,
    boot: BootOption = DEFAULT_BOOT,
    seed: SeedOption = DEFAULT_SEED,
    output: FormatOption = TableFormat.table,
    codebook: CodebookOption = None,
    level: LevelOption = None,
    *,
    reading: dict,
) -> None:
    """Which coders drive disagreement: pairwise agreement, alpha without each coder, code use.

    Example: agree coders coding.xlsx --boot 2000 --seed 1
    """
    data = load_data(files, codebook=codebook, level=level, **reading)
    from agree.diagnostics import diagnose_coders

    result = diagnose_coders(data, level=None if level is None else level.value, n_resamples=boot,
                             seed=seed)
    _notes(result.notes)
    if output is TableFormat.json:
        print_json(result.to_dict())
    elif output is TableFormat.csv:
        sys.stdout.write(result.to_frame().to_csv(index=False))
    else:
        _coders_table(result)


def _coders_table(result: "CoderDiagnostics") -> None:
    stdout.print(f"alpha ({result.level}), all coders: {_num(result.alpha)}", highlight=False)
    ptable = Table(title="Pairs of coders")
    for name in ["coder", "coder", "units", "% agree", "kappa", "alpha"]:
        ptable.add_column(name, justify="left" if name == "coder" else "right")
    for p in result.pairwise.itertuples(index=False):
        ptable.add_row(p.coder_a, p.coder_b, str(p.n_units), _pct(p.percent_agreement),
                       _num(p.kappa), _num(p.alpha))
    stdout.print(ptable)
    frame = result.to_frame()
    if frame.alpha_without.notna().any():
        level = f"{result.confidence_level:.0%}"
        ltable = Table(title="Alpha with each coder left out (a positive change: the coder lowers it)")
        for name in ["coder", "alpha without", "change", f"{level} interval of change"]:
            ltable.add_column(name, justify="left" if name == "coder" else "right")
        for r in frame.sort_values("delta", ascending=False).itertuples(index=False):
            interval = ("–" if not math.isfinite(r.delta_ci_low)
                        else f"{r.delta_ci_low:+.3f} to {r.delta_ci_high:+.3f}")
            ltable.add_row(r.coder, _num(r.alpha_without), f"{r.delta:+.3f}", interval)
        stdout.print(ltable)
    use = result.code_use_table()
    utable = Table(title="Share of each coder's units given each code")
    utable.add_column("coder")
    for code in use.columns:
        utable.add_column(str(code), justify="right")
    for coder, shares in use.iterrows():
        utable.add_row(str(coder), *[_pct(float(v)) if pd.notna(v) else "–" for v in shares])
    stdout.print(utable)
    if result.bootstrap is not None:
        note(f"intervals: {result.bootstrap.method}, {result.bootstrap.replicates} unit resamples, "
             f"seed {result.bootstrap.seed}")
