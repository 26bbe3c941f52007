"""Estimation: price changes over the hedge horizon and their covariance (with shrinkage)."""
