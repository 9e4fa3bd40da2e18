"""Diagnostics, rounds, planning and sampling. Imports core, io and stats."""
