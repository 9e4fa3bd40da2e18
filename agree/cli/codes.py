"""`agree codes`: which codes drive disagreement."""

from __future__ import annotations

import sys
from typing import TYPE_CHECKING, Annotated

import typer
from rich.table import Table

from agree.cli.app import (
    DIGITS,
    app,
    coefficient,
    note,
    percent,
    print_json,
    print_notes,
    progress_bar,
    signed,
    stdout,
)
from agree.cli.options import (
    DEFAULT_BOOT,
    DEFAULT_SEED,
    BootOption,
    ClusterOption,
    CodebookOption,
    DistanceOption,
    Files,
    FormatOption,
    LevelOption,
    MinOption,
    SeedOption,
    SetDistance,
    TableFormat,
    reading_options,
)
from agree.cli.spans import span_options
from agree.core.cells import frame_csv
from agree.core.constants import DEFAULT_MINIMUM
from agree.core.constants import CI_METHODS

if TYPE_CHECKING:
    from agree.analysis.diagnostics import CodeDiagnostics


MinUnitsOption = Annotated[int, typer.Option("--min-units", help="A code used on fewer shared units "
                                                                 "than this is 'too rare' to judge.")]
TopOption = Annotated[int, typer.Option("--top", help="How many confused pairs to show in the table.")]


def resampling_note(bootstrap, cluster: str | None, n_clusters: int | None) -> str:
    """'bca intervals, 2,000 resamples of units, seed 1' (or of whole groups of a column)."""
    from agree.core.format import format_value

    if cluster is not None:
        what = (f"whole {cluster} groups ({format_value(n_clusters, 'count')} groups)" if cluster != "cluster"
                else f"whole clusters ({format_value(n_clusters, 'count')})")
    else:
        what = "units"
    method = bootstrap.method
    for key, words in CI_METHODS.items():
        method = method.replace(key, words) if method.startswith(key) else method
    draws = "draws over" if bootstrap.method.startswith("pseudo-unit") else "resamples of"
    return (f"intervals: {method}, {format_value(bootstrap.replicates, 'count')} {draws} "
            f"{what}, seed {bootstrap.seed}")


@app.command("codes")
@reading_options
@span_options
def codes_command(
    files: Files,
    minimum: MinOption = DEFAULT_MINIMUM,
    boot: BootOption = DEFAULT_BOOT,
    seed: SeedOption = DEFAULT_SEED,
    min_units: MinUnitsOption = 5,
    top: TopOption = 10,
    distance: DistanceOption = SetDistance.masi,
    cluster: ClusterOption = None,
    output: FormatOption = TableFormat.table,
    codebook: CodebookOption = None,
    level: LevelOption = None,
    *,
    reading: dict,
    span_reading: dict,
) -> None:
    """Which codes drive disagreement: per-code alpha, specific agreement, confusions, unequal use.

    Codes are listed worst first, each with a status and a short reason. A code is "ok" when
    its one-sided 95% lower confidence bound is above the minimum (the rule of `agree score
    --min`), "uncertain" when only the estimate does.

    Example: agree codes samples/round1.csv --codebook samples/codebook.csv --cluster interview

    Example: agree codes samples/multicode.xlsx --distance masi --min 0.8 --boot 2000 --seed 1

    Example: agree codes samples/passages.qdpx --code-depth 1   (highlighted passages, positions as units)
    """
    from agree.cli.spans import coding_or_spans, with_view

    with progress_bar("codes") as tick:
        tick("reading", 0.0)
        # a span file goes through view 1 or 2, named in the output (view None for sheets)
        data, cluster, level, view = coding_or_spans(files, command="codes", codebook=codebook, level=level,
                                                     cluster=cluster, reading=reading,
                                                     span_reading=span_reading, weighted_ok=True)
        tick("per-code diagnostics", 0.6)
        from agree.analysis.diagnostics import diagnose_codes

        result = diagnose_codes(data, minimum=minimum, n_resamples=boot, seed=seed,
                                min_units_per_code=min_units, distance=distance.value, cluster=cluster)
    print_notes(result.notes)
    if output is TableFormat.json:
        print_json(result.to_dict() if view is None else {"view": view, **result.to_dict()})
    elif output is TableFormat.csv:
        sys.stdout.write(frame_csv(result.to_frame() if view is None else with_view(result.to_frame(), view)))
    else:
        if view is not None:
            stdout.print(f"View: {view}.", highlight=False)
        print_codes(result, top)


def _word_width(names, cap: int = 24) -> int:
    """Width of the longest word of the names (so a column wraps them at spaces, never inside a
    word), at most `cap` (a longer word is folded onto the next line, not cut)."""
    return min(max((len(w) for n in names for w in str(n).split()), default=4), cap)


def _min_width(table: Table) -> int:
    """The narrowest the table can be drawn without cutting a word (unclamped by the terminal)."""
    from rich.measure import Measurement

    return Measurement.get(stdout, stdout.options.update_width(10_000), table).minimum


def _codes_table(result: "CodeDiagnostics", frame, title: str, level: str, *, reasons: bool) -> Table:
    """The per-code table; without the reason column (and with a plainer frame) for narrow terminals."""
    from rich import box

    from agree.core.format import format_bound, format_interval

    table = (Table(title=title) if reasons else
             Table(title=title, box=box.SIMPLE_HEAD, show_edge=False, pad_edge=False, collapse_padding=True))
    table.add_column("#", justify="right", no_wrap=True)
    # without reasons the table is for a narrow terminal: words columns at their longest word, so
    # that the numbers keep their room (rich would otherwise crop the last number column)
    code_width = _word_width(frame["code"])
    table.add_column("code", min_width=code_width, max_width=None if reasons else code_width, overflow="fold")
    table.add_column("status", min_width=9, max_width=None if reasons else 9)
    kappa = "Cohen's κ" if len(result.coders) == 2 else "Fleiss' κ"
    rows = [[str(row.rank), str(row.code), row.status, coefficient(row.alpha),
             format_interval(row.ci_low, row.ci_high, DIGITS), format_bound(row.lower_bound, result.minimum),
             coefficient(row.specific_agreement), coefficient(row.kappa), row.reason]
            for row in frame.itertuples(index=False)]
    for j, name in enumerate(["α", level, "bound†", "specific agreement", kappa], start=3):
        # headers may wrap, numbers are never wrapped or cut (".42" for .423 would misreport it)
        table.add_column(name, justify="right", no_wrap=name == level,
                         min_width=max((len(r[j]) for r in rows), default=1))
    if reasons:
        table.add_column("reason", ratio=1, min_width=20)
    for cells in rows:
        table.add_row(*cells[:8], *(cells[8:] if reasons else []))
    return table


def print_codes(result: "CodeDiagnostics", top: int) -> None:
    from agree.core.format import format_bound, format_interval, format_value

    frame = result.to_frame()
    level = f"{percent(result.confidence_level, None)} CI"
    interval = ("" if result.alpha_ci_low is None else
                f" {format_interval(result.alpha_ci_low, result.alpha_ci_high, DIGITS)}")
    stdout.print(f"Krippendorff's α ({result.alpha_label}), all codes: {coefficient(result.alpha)}{interval}", highlight=False)
    minimum = "none" if result.minimum is None else format_value(result.minimum, "threshold")
    bound = f"one-sided {100 * result.confidence_level:g}% lower bound"
    title = f"Codes, worst first (presence/absence α; minimum {minimum})"
    # the reasons sit in the table when it fits the terminal, else numbered below it; code names
    # wrap at spaces and are never cut
    table = _codes_table(result, frame, title, level, reasons=True)
    if _min_width(table) > stdout.width:
        table = _codes_table(result, frame, title, level, reasons=False)
    stdout.print(table)
    if len(table.columns) < 9:
        for row in frame.itertuples(index=False):
            stdout.print(f"#{row.rank} {row.code}: {row.reason}", highlight=False)
    judged = (f"ok: the {bound} is above the minimum (as for agree score --min); uncertain: only the "
              f"estimate does; † bound: the {bound} (3 decimals, rounded down where rounding would reach the minimum)"
              if result.bootstrap is not None else
              "no bootstrap (--boot 0): statuses compare the estimate, not an interval, with the minimum")
    note(f"status — {judged}")
    note("specific agreement: when one coder applied the code, how often another did too; "
         "--format csv or json for per-coder use and the tests of equal use")
    pairs = result.confused_pairs.head(top)
    if len(pairs):
        ptable = Table(title="Most confused pairs (share of all disagreement)")
        columns = ["codes", "coincidences¹", "share", "o/e", "α if merged", "change"]
        if len(result.coders) == 2:
            columns[2:2] = [f"{result.coders[0]}→{result.coders[1]}", "reverse"]
        for name in columns:
            ptable.add_column(name, justify="left" if name == "codes" else "right", overflow="fold",
                              min_width=(len(name) if name.startswith("coinc") else
                                         _word_width(list(pairs["code_a"]) + list(pairs["code_b"]))
                                         if name == "codes" else None))
        for p in pairs.itertuples(index=False):
            cells = [f"{p.code_a} / {p.code_b}", format_value(p.count, "number", 1), percent(p.share),
                     format_value(p.o_over_e, "number", 2), coefficient(p.alpha_if_merged), signed(p.delta_alpha)]
            if len(result.coders) == 2:
                cells[2:2] = [format_value(p.a_to_b, "amount"), format_value(p.b_to_a, "amount")]
            ptable.add_row(*cells)
        stdout.print(ptable)
        note("¹ coincidences: pairs of values within a unit, each pair weighted 1/(m − 1) for a unit "
             "coded by m coders, so with more than two coders they can be fractional; o/e: observed "
             f"over expected coincidences; α if merged: overall α ({result.alpha_label}) with the two "
             "codes merged")
    mh = result.marginal_homogeneity
    if mh.get("test"):
        line = (f"Marginal homogeneity (Stuart–Maxwell): X² = {format_value(mh['statistic'], 'number', DIGITS)}, "
                f"df = {mh['df']}, p = {format_value(mh['p_value'], 'probability')}")
        if mh.get("dropped"):
            line += f"; left out (never in a disagreement): {', '.join(map(str, mh['dropped']))}"
        stdout.print(line, highlight=False)
    elif mh.get("reason"):
        note(f"note: no marginal homogeneity test: {mh['reason']}")
    for row in frame.itertuples(index=False):
        if row.paradox:
            note(f"note: {row.code}: {row.explanation}")
    if result.bootstrap is not None:
        note(resampling_note(result.bootstrap, result.cluster, result.n_clusters))
