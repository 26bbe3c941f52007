"""Backtests: the rolling out-of-sample engine, its strategies, evidence, workers and chart."""
