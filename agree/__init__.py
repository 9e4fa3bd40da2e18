"""agree: measure, diagnose, reconcile and report agreement between coders of qualitative data.

The layers, ground floor first: the data model (`agree.core`) -> reading (`agree.io`) ->
patterns, coefficients and resampling (`agree.stats`) -> diagnostics, rounds, planning and
sampling (`agree.analysis`) -> reconciliation and reports (`agree.output`) -> the command line
(`agree.cli`).

Every export loads on first use (PEP 562): `import agree` itself imports neither numpy nor
pandas, so the command line and `from agree import AgreeError` start quickly, while
`agree.score` or `from agree import krippendorff_alpha` load the engine when asked for.
"""

from __future__ import annotations

from importlib import import_module
from typing import Any

from agree.core.constants import VERSION

__version__ = VERSION

# Where each export lives: {module: names}.
_EXPORTS = {
    "agree.core.errors": ("AgreeError",),
    "agree.core.model": ("CodingData", "from_table"),
    "agree.core.results": ("AgreementResult", "BootstrapInfo", "Note"),
    "agree.core.format": ("decision_sentence",),
    "agree.io.codebook": ("Codebook", "read_codebook"),
    "agree.io.readers": ("read",),
    "agree.io.spans": ("read_spans",),
    "agree.io.refi": ("read_project",),
    "agree.io.counts": ("pattern_count_table", "read_counts"),
    "agree.io.duckdb_engine": ("read_duckdb",),
    "agree.io.dask_engine": ("pattern_counts_dask",),
    "agree.io.sql": ("pattern_count_sql",),
    "agree.stats.coefficients": ("brennan_prediger", "cohen_kappa", "coincidence_matrix", "conger_kappa",
                                 "fleiss_kappa", "gwet_ac1", "krippendorff_alpha", "pabak", "percent_agreement",
                                 "scott_pi"),
    "agree.stats.scoring": ("ScoreResult", "score"),
    "agree.analysis.diagnostics": ("CodeDiagnostics", "CoderDiagnostics", "confusion_table", "diagnose_codes",
                                   "diagnose_coders"),
    "agree.analysis.planning": ("Plan", "plan_sample"),
    "agree.analysis.rounds": ("RoundsResult", "compare_rounds"),
    "agree.analysis.sampling": ("draw_sample", "read_unit_ids"),
    "agree.analysis.passages": ("PassageAgreement", "consensus_spans", "disputed_passages", "position_agreement",
                                "position_units", "positional_specific_agreement", "restrict_documents",
                                "segment_agreement", "segment_units", "span_matching", "unitizing_agreement"),
    "agree.output.report": ("Report", "StudyReport", "Variable", "build_report", "build_study_report",
                            "write_report"),
    "agree.output.refi": ("write_project",),
    "agree.output.spans": ("write_spans",),
    "agree.output.reconciliation": ("Consensus", "ReviewSummary", "reconcile", "review_table", "write_consensus",
                                    "write_review"),
    "agree.output.sheets": ("write_coding_sheets",),
}
_WHERE = {name: module for module, names in _EXPORTS.items() for name in names}

# The engine's names first, then those that always loaded on first use (as before the root went lazy).
_FIRST = ("AgreeError", "AgreementResult", "BootstrapInfo", "Codebook", "CodingData", "Note", "ScoreResult",
          "brennan_prediger", "cohen_kappa", "coincidence_matrix", "conger_kappa", "fleiss_kappa", "from_table",
          "gwet_ac1", "krippendorff_alpha", "pabak", "percent_agreement", "read", "read_codebook", "score",
          "scott_pi")
__all__ = [*_FIRST, *sorted(set(_WHERE) - set(_FIRST))]


def __getattr__(name: str) -> Any:
    module = _WHERE.get(name)
    if module is None:
        raise AttributeError(f"module 'agree' has no attribute {name!r}")
    value = getattr(import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_WHERE))
