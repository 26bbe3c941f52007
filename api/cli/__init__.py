"""The ``basiswise`` command line: typer commands over the Python API, rich tables."""
