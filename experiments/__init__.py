"""Orchestration: the command line, comparisons, sweeps, sizing, charts and the report."""
