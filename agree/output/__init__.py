"""Plots, workbooks, reports and reconciliation files. Imports every layer below."""
