"""The hedge problem: the book's model in normalised units, its limits, its cvxpy form, clashes."""
