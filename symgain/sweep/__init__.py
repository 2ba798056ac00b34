"""Gains over ranges of parameters: vectorized evaluation, schedules and lookup tables.

``evaluate`` turns the closed-form gains into numpy functions, ``schedule``
evaluates them over a grid and writes the table, ``lookup_c`` writes the C
lookup table with its interpolation routine, ``output`` writes files atomically.
"""
from .evaluate import GainEntry, gain_entries, gain_functions, GainEvaluator

__all__ = ["GainEntry", "gain_entries", "gain_functions", "GainEvaluator"]
