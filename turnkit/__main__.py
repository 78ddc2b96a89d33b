"""``python -m turnkit``: the same as the ``turnkit`` command."""

from .cli import main

if __name__ == "__main__":
    raise SystemExit(main())
