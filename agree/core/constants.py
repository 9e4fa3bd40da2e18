"""Constants shared by every layer: the version, conventional thresholds and the defaults of
the analysis options, so that no two modules can disagree about them."""

VERSION = "0.1.0"

# -- conventional thresholds (conventions, not laws: every output says so) ------------------
#: The minimum alpha when none is given: Krippendorff's (2004) convention for relying on a variable.
DEFAULT_MINIMUM = 0.8
#: Krippendorff's (2004) lower limit for tentative conclusions.
TENTATIVE = 0.667
#: Fewer pairable units than this: intervals are wide and benchmarks hard to judge (common practice).
FEW_UNITS = 30
#: Fewer resampled groups than this: cluster-bootstrap intervals are rough (common practice).
FEW_CLUSTERS = 20
#: A code used on fewer pairable units than this is too rare to judge (common practice).
MIN_UNITS_PER_CODE = 5

# -- defaults of the analysis options, the same in every library function and command -------
#: Bootstrap replicates (units resampled with all their values).
DEFAULT_RESAMPLES = 2000
#: Confidence level of intervals and of the one-sided lower bound.
DEFAULT_CONFIDENCE = 0.95
#: Interval methods, by the name options take, with the words outputs use for them
#: (`agree.stats.resampling` describes each). "pseudo-unit" decides by default everywhere.
CI_METHODS = {
    "pseudo-unit": "Bayesian bootstrap with a least-favourable pseudo-unit",
    "bca": "BCa bootstrap",
    "percentile": "percentile bootstrap",
}
#: Interval method (the one-sided bound that decides against a minimum comes from it).
DEFAULT_CI_METHOD = "pseudo-unit"
#: The seed the commands use unless told otherwise (the library draws and records one when
#: given seed=None), so every command repeats exactly.
DEFAULT_SEED = 1
#: The largest worksheet read, in cells: the rows that hold values times the columns that hold
#: values (a block past it is refused before it is built; `max_cells=`, `--max-cells` override).
MAX_SHEET_CELLS = 20_000_000
#: Distance between sets of codes (several codes per unit and coder) unless another is asked for.
DEFAULT_SET_DISTANCE = "masi"
