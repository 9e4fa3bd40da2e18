"""`agree coders`: which coders drive disagreement."""

from __future__ import annotations

import math
import sys
from typing import TYPE_CHECKING

from rich.table import Table

from agree.cli.app import app, coefficient, note, percent, print_json, print_notes, signed, stdout
from agree.cli.codes import resampling_note
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
    SeedOption,
    SetDistance,
    TableFormat,
    reading_options,
)
from agree.cli.spans import span_options
from agree.core.cells import frame_csv

if TYPE_CHECKING:
    from agree.analysis.diagnostics import CoderDiagnostics


@app.command("coders")
@reading_options
@span_options
def coders_command(
    files: Files,
    boot: BootOption = DEFAULT_BOOT,
    seed: SeedOption = DEFAULT_SEED,
    distance: DistanceOption = SetDistance.masi,
    cluster: ClusterOption = None,
    output: FormatOption = TableFormat.table,
    codebook: CodebookOption = None,
    level: LevelOption = None,
    *,
    reading: dict,
    span_reading: dict,
) -> None:
    """Which coders drive disagreement: pairwise agreement, alpha without each coder, code use.

    Example: agree coders samples/round1.csv --codebook samples/codebook.csv --cluster interview

    Example: agree coders samples/ratings.csv --codebook samples/ratings_codebook.csv --boot 2000 --seed 1

    Example: agree coders samples/passages.qdpx --segments turn   (highlighted passages, turns as units)
    """
    from agree.cli.spans import coding_or_spans, with_view

    # a span file goes through view 1 or 2, named in the output (view None for sheets)
    data, cluster, level, view = coding_or_spans(files, command="coders", codebook=codebook, level=level,
                                                 cluster=cluster, reading=reading, span_reading=span_reading,
                                                 weighted_ok=True)
    from agree.analysis.diagnostics import diagnose_coders

    result = diagnose_coders(data, level=None if level is None else level.value, n_resamples=boot,
                             seed=seed, distance=distance.value, cluster=cluster)
    print_notes(result.notes)
    if output is TableFormat.json:
        print_json(result.to_dict() if view is None else {"view": view, **result.to_dict()})
    elif output is TableFormat.csv:
        sys.stdout.write(frame_csv(result.to_frame() if view is None else with_view(result.to_frame(), view)))
    else:
        if view is not None:
            stdout.print(f"View: {view}.", highlight=False)
        _coders_table(result)


def _coders_table(result: "CoderDiagnostics") -> None:
    import pandas as pd

    from agree.core.format import format_value

    stdout.print(f"Krippendorff's α ({result.level_label}), all coders: {coefficient(result.alpha)}", highlight=False)
    ptable = Table(title="Pairs of coders")
    for name in ["coder", "coder", "units", "% agreement", "Cohen's κ", "Krippendorff's α"]:
        ptable.add_column(name, justify="left" if name == "coder" else "right")
    for p in result.pairwise.itertuples(index=False):
        ptable.add_row(p.coder_a, p.coder_b, format_value(p.n_units, "count"), percent(p.percent_agreement),
                       coefficient(p.kappa), coefficient(p.alpha))
    stdout.print(ptable)
    frame = result.to_frame()
    if frame.alpha_without.notna().any():
        level = f"{percent(result.confidence_level, None)} CI of change"
        ltable = Table(title="Krippendorff's α with each coder left out (a positive change: the coder lowers it)")
        for name in ["coder", "α without", "change", level]:
            ltable.add_column(name, justify="left" if name == "coder" else "right")
        for r in frame.sort_values("delta", ascending=False).itertuples(index=False):
            interval = ("–" if not math.isfinite(r.delta_ci_low)
                        else f"[{signed(r.delta_ci_low)}, {signed(r.delta_ci_high)}]")
            ltable.add_row(r.coder, coefficient(r.alpha_without), signed(r.delta), interval)
        stdout.print(ltable)
    use = result.code_use_table()
    utable = Table(title="Share of each coder's units given each code")
    utable.add_column("coder")
    for code in use.columns:
        utable.add_column(str(code), justify="right")
    for coder, shares in use.iterrows():
        utable.add_row(str(coder), *[percent(float(v)) if pd.notna(v) else "–" for v in shares])
    stdout.print(utable)
    if result.bootstrap is not None:
        note(resampling_note(result.bootstrap, result.cluster, result.n_clusters))
