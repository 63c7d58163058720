"""``python -m modalnb``: the same command as ``modalnb`` (:func:`modalnb.cli.main`)."""

from .cli import main

if __name__ == "__main__":
    raise SystemExit(main())
