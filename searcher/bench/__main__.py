"""``python -m searcher.bench``: the entry point of ``scripts/bench``."""
import sys

from searcher.bench import main

sys.exit(main())
