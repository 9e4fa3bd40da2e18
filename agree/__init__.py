"""agree: measure, diagnose, reconcile and report agreement between coders of qualitative data.

The layers, ground floor first: the data model (`agree.core.model`) -> readers and codebooks ->
value patterns and coefficients -> resampling and planning -> diagnostics and rounds ->
reconciliation and reports -> the command line (`agree.cli`).

The engine and the readers load with the package; diagnostics, planning, reconciliation and
reports load on first use (they bring heavier libraries), so `import agree` and the command
line start quickly.
"""

from importlib import import_module
from typing import Any

from agree.core.constants import VERSION
from agree.core.model import AgreeError, CodingData, from_table
from agree.core.results import AgreementResult, BootstrapInfo, Note
from agree.io.codebook import Codebook, read_codebook
from agree.io.readers import read
from agree.stats.coefficients import (
    brennan_prediger,
    cohen_kappa,
    coincidence_matrix,
    conger_kappa,
    fleiss_kappa,
    gwet_ac1,
    krippendorff_alpha,
    pabak,
    percent_agreement,
    scott_pi,
)
from agree.stats.scoring import ScoreResult, score

__version__ = VERSION

_LAZY = {
    "agree.analysis.diagnostics": ("CodeDiagnostics", "CoderDiagnostics", "confusion_table", "diagnose_codes",
                          "diagnose_coders"),
    "agree.core.format": ("decision_sentence",),
    "agree.analysis.planning": ("Plan", "plan_sample"),
    "agree.output.report": ("Report", "build_report", "write_report"),
    "agree.analysis.rounds": ("RoundsResult", "compare_rounds"),
    "agree.output.reconciliation": ("Consensus", "ReviewSummary", "reconcile", "review_table", "write_consensus",
                             "write_review"),
    "agree.analysis.sampling": ("draw_sample", "read_unit_ids", "write_coding_sheets"),
}
_WHERE = {name: module for module, names in _LAZY.items() for name in names}


def __getattr__(name: str) -> Any:
    module = _WHERE.get(name)
    if module is None:
        raise AttributeError(f"module 'agree' has no attribute {name!r}")
    value = getattr(import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_WHERE))


__all__ = [
    "AgreeError", "AgreementResult", "BootstrapInfo", "Codebook", "CodingData", "Note", "ScoreResult",
    "brennan_prediger", "cohen_kappa", "coincidence_matrix", "conger_kappa", "fleiss_kappa", "from_table",
    "gwet_ac1", "krippendorff_alpha", "pabak", "percent_agreement", "read", "read_codebook", "score",
    "scott_pi", *sorted(_WHERE),
]
