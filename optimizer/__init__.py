"""The optimizer: estimation → problem → solvers → results, plus sweeps and backtests."""
