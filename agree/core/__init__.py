"""Data model, errors, result types, the coefficient registry, shared constants, formatting, safe file writing. Imports nothing of agree."""
