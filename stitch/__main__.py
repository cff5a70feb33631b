"""``python -m stitch``: the same as the ``stitch`` command."""

from .cli import main

if __name__ == "__main__":
    main()
