"""``python -m damper``."""

import sys

from .cli import main

if __name__ == "__main__":  # not when a worker process imports this module (spawn)
    sys.exit(main())
