"""Compiled parts of the optimizer (see :mod:`optimizer.integer_native`)."""
