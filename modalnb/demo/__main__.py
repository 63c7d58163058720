"""``python -m modalnb.demo --write example_data/``: regenerate the demo files."""

from ._store import main

if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
