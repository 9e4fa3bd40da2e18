"""Analysis options shared by several commands: one flag name and one help text each.

Defaults are the same everywhere: 2000 bootstrap replicates and seed 1, so every command
repeats exactly unless told otherwise (the seed is printed with the results).
"""

from __future__ import annotations

from enum import Enum
from typing import Annotated, Optional

import typer

DEFAULT_BOOT = 2000
DEFAULT_SEED = 1


class TableFormat(str, Enum):
    table = "table"
    json = "json"
    csv = "csv"


MinOption = Annotated[Optional[float], typer.Option(
    "--min", min=-1.0, max=1.0, help="Minimum acceptable value (e.g. 0.8): adds the share of bootstrap resamples "
                  "below it and whether the one-sided lower bound clears it. A convention, not a law.")]
BootOption = Annotated[int, typer.Option(
    "--boot", min=0, help="Bootstrap replicates (units resampled with all their values); 0 for none.")]
SeedOption = Annotated[int, typer.Option("--seed", help="Seed of the bootstrap; the same seed repeats the run.")]
CIOption = Annotated[float, typer.Option("--ci", min=0.5, max=0.9999,
                                         help="Confidence level of the two-sided interval (e.g. 0.95).")]
FormatOption = Annotated[TableFormat, typer.Option(
    "--format", help="table (readable), json (the library's to_dict()) or csv.")]
