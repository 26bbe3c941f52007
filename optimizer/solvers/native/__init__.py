"""Compiled parts of the optimizer (see :mod:`optimizer.solvers.native_search`)."""
