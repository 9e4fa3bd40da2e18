"""Import every command module so that each registers itself on the app."""

from agree.cli import demo, diagnose, plan, reconcile, report, score  # noqa: F401
