"""Command-line interface. The CLI only parses options, calls the library and formats."""

from agree.cli.app import app, main

__all__ = ["app", "main"]
