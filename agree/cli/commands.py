"""Import every command module so that each registers itself on the app, in the order of the
help's list: measure, diagnose, reconcile, compare rounds, report, plan the next sample."""

from agree.cli import (  # noqa: F401  (isort: skip; the order is the help's order)
    score,
    codes,
    coders,
    disagreements,
    reconcile,
    rounds,
    report,
    plan,
    sample,
    demo,
)
