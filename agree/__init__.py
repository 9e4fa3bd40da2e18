"""agree: measure, diagnose, reconcile and report agreement between coders of qualitative data.

The layers, ground floor first: the data model (`agree.model`) -> readers and codebooks ->
value patterns and coefficients -> resampling and planning -> diagnostics and rounds ->
reconciliation and reports -> the command line (`agree.cli`).
"""

from agree.coefficients import (brennan_prediger, cohen_kappa, coincidence_matrix, conger_kappa,
                                fleiss_kappa, gwet_ac1, krippendorff_alpha, pabak, percent_agreement,
                                scott_pi)
from agree.codebook import Codebook, read_codebook
from agree.diagnostics import (CodeDiagnostics, CoderDiagnostics, confusion_table, diagnose_codes,
                               diagnose_coders)
from agree.model import AgreeError, CodingData, from_table
from agree.planning import Plan, decision_sentence, plan_sample
from agree.readers import read
from agree.report import Report, build_report, write_report
from agree.rounds import RoundsResult, compare_rounds
from agree.reconcile import Consensus, ReviewSummary, reconcile, review_table, write_consensus, write_review
from agree.results import AgreementResult, BootstrapInfo, Note
from agree.sampling import draw_sample, write_coding_sheets
from agree.scoring import ScoreResult, score

__version__ = "0.1.0"

__all__ = [
    "AgreeError", "AgreementResult", "BootstrapInfo", "CodeDiagnostics", "CoderDiagnostics", "Codebook",
    "CodingData", "Consensus", "Note", "Plan", "Report", "ReviewSummary", "RoundsResult", "ScoreResult",
    "build_report", "compare_rounds", "write_report",
    "decision_sentence", "draw_sample", "plan_sample", "write_coding_sheets",
    "confusion_table", "diagnose_codes", "diagnose_coders", "read", "read_codebook", "reconcile",
    "review_table", "write_consensus", "write_review",
    "brennan_prediger", "cohen_kappa", "coincidence_matrix", "conger_kappa", "fleiss_kappa",
    "from_table", "gwet_ac1", "krippendorff_alpha", "pabak", "percent_agreement", "scott_pi", "score",
]
