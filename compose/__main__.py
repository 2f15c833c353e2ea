"""``python -m compose ...``: the same as the ``compose`` command (for environments where the
console script is not on PATH)."""
from compose.cli.main import main

if __name__ == "__main__":
    main()
