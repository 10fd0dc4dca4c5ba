"""``python -m lowgmap``: the command line."""
import sys

from lowgmap.app.cli import main

sys.exit(main())
