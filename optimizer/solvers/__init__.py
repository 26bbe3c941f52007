"""Solvers: the relaxation, rounding, and the exact whole-contract search with its bounds."""
