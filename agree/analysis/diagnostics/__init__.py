"""Which codes and which coders drive disagreement.

`diagnose_codes` looks at each category of the codebook on its own: how often each coder
used it, how well the coders agree on it (present against absent), which other codes it is
confused with and what merging two codes would do to alpha, and whether the coders use it
equally often. `diagnose_coders` looks at the coders: pairwise agreement, alpha with each
coder left out, and each coder's use of the codes against the others'. `confusion_table`
gives the coincidence matrix (several coders) or the directed coder x coder table (two).

Modules: `codes` (per code), `coders` (per coder), `confusion` (confusion tables and merged
alpha), `homogeneity` (tests of equal use), `common` (checks, shares, bootstrap intervals),
`results` (the result types).

Conventions used throughout (METHODS sections 0, 4, 5.4, 5.5, 6):

- Missing means the coder did not code the unit. In the per-code view a coder who coded the
  unit without applying code k gives 0 for k, never missing.
- Set-valued data (several codes per coder and unit) are analysed code by code as presence
  or absence. A *confusion* between codes c and k is a pair of coders on one unit where one
  applied c and not k and the other applied k and not c. A coder who applied c while the
  other applied neither c nor some alternative makes an *omission*, not a confusion.
- Category diagnostics are nominal: a code is applied or not, whatever the data's level.
- Nothing here rounds or prints. Reasons are plain sentences for people; every number in a
  reason is also a column of its own.

References
----------
Byrt, T., Bishop, J., & Carlin, J. B. (1993). Bias, prevalence and kappa. Journal of
    Clinical Epidemiology, 46(5), 423-429.
Cicchetti, D. V., & Feinstein, A. R. (1990). High agreement but low kappa: II. Resolving the
    paradoxes. Journal of Clinical Epidemiology, 43(6), 551-558.
Feinstein, A. R., & Cicchetti, D. V. (1990). High agreement but low kappa: I. The problems
    of two paradoxes. Journal of Clinical Epidemiology, 43(6), 543-549.
Fleiss, J. L. (1971). Measuring nominal scale agreement among many raters. Psychological
    Bulletin, 76(5), 378-382.
Krippendorff, K. (2004/2013/2019). Content Analysis: An Introduction to Its Methodology.
Spitzer, R. L., & Fleiss, J. L. (1974). A re-analysis of the reliability of psychiatric
    diagnosis. British Journal of Psychiatry, 125, 341-347.
(The tests of equal use cite theirs in `homogeneity`.)
"""

from agree.analysis.diagnostics.codes import diagnose_codes
from agree.analysis.diagnostics.coders import diagnose_coders
from agree.analysis.diagnostics.confusion import confusion_table
from agree.analysis.diagnostics.homogeneity import stuart_maxwell
from agree.analysis.diagnostics.results import STATUSES, CodeDiagnostics, CoderDiagnostics

__all__ = ["CodeDiagnostics", "CoderDiagnostics", "STATUSES", "confusion_table", "diagnose_codes",
           "diagnose_coders", "stuart_maxwell"]
