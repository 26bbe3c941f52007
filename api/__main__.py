"""``python -m basiswise``: the same command line as the ``basiswise`` program."""

from basiswise.cli.app import main

if __name__ == "__main__":
    main()
