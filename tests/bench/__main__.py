"""``python -m tests.bench``: run the benchmarks, print the table, write ``bench-results.json``."""

import sys

from .runner import main

if __name__ == "__main__":
    sys.exit(main())
