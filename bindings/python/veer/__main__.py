"""python3 -m veer: see veer.cli."""
import sys

from .cli import main

sys.exit(main())
