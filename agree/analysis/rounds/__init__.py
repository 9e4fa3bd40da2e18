"""Coding rounds: agreement per round, whether it changed beyond sampling noise, and drift.

A coding project often runs in rounds: code a batch, meet, sharpen the codebook, code the
next batch. `compare_rounds` measures each round (Krippendorff's α at the level over all
codes, and nominal α on each code's presence/absence recoding), with bootstrap intervals,
and compares consecutive rounds by the bootstrap interval of the difference. When only a share
of units is still double-coded after the split (the drift phase), a round marked as the drift
round is compared with the last full round.

Notes
-----
The difference of α between round a and round b is α_b - α_a; its interval is the percentile
interval of α*_b,i - α*_a,i over i = 1..B, from resamples drawn for the pair of rounds. Units
coded in both rounds (the same unit id; with a cluster column, the same group) are drawn
jointly with their values in both rounds, the others within their own round (a paired
bootstrap where the rounds share units, the independent two-sample bootstrap where they share
none; units resampled with all their values, METHODS 7.1). The change is "beyond sampling
noise" when that interval excludes 0. Every comparison has its own seed derived from the one
recorded seed, so a run repeats exactly.

Modules: `results` (the result types and their summary), `paired` (the bootstrap of
differences), `compare` (`compare_rounds`, cut along its seams).

References
----------
Efron, B., & Tibshirani, R. J. (1993). An Introduction to the Bootstrap, ch. 8 (two-sample
    problems). Chapman & Hall.
Krippendorff, K. (2004). Content Analysis (2nd ed.), ch. 11. Sage.
O'Connor, C., & Joffe, H. (2020). Intercoder reliability in qualitative research. IJQM, 19.
"""

from agree.analysis.rounds.compare import PAIRINGS, compare_rounds, split_rounds
from agree.analysis.rounds.paired import difference_interval
from agree.analysis.rounds.results import (
    DefinitionChange,
    DriftCheck,
    RoundAgreement,
    RoundChange,
    RoundsResult,
    round_name,
)

__all__ = ["DefinitionChange", "DriftCheck", "PAIRINGS", "RoundAgreement", "RoundChange", "RoundsResult",
           "compare_rounds", "difference_interval", "round_name", "split_rounds"]
