"""``python -m bitsift.cli``: the command line."""

from bitsift.cli import main

if __name__ == "__main__":
    main()
