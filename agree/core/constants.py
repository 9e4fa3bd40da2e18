"""Constants shared by every layer: the version, conventional thresholds and the defaults of
the analysis options, so that no two modules can disagree about them."""

VERSION = "0.1.0"
