"""python -m logbook: same as the `logbook` command."""

import sys

from logbook.cli import main

sys.exit(main())
