"""`agree demo` command(s)."""

from agree.cli.app import app  # noqa: F401
