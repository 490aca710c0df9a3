"""``python -m tdakit``: the same command line as the ``tdakit`` script."""

import sys

from tdakit.cli import main

sys.exit(main())
