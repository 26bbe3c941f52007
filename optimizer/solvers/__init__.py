"""Solvers: the method switch, rounding, and the exact whole-contract search with its bounds."""
