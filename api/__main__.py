"""``python -m lowgmap``: the command line."""
import sys

from lowgmap.app.cli import main

if __name__ == "__main__":    # a worker process started with "spawn" imports this module again: run nothing then
    sys.exit(main())
