"""``python -m bitsift.cli``: the command line."""

from bitsift.cli import console

if __name__ == "__main__":
    console()
