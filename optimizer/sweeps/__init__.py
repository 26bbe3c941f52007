"""Sweeps: scenario files and their checks, the scenario runner, stress moves, the frontier."""
