"""Import every command module so that each registers itself on the app."""

from agree.cli import score  # noqa: F401
