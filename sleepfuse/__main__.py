"""``python -m sleepfuse``: the same command line as ``sleepfuse``."""

import sys

from sleepfuse.cli.main import main

sys.exit(main())
