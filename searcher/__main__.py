import sys

from searcher.cli import main

sys.exit(main())
