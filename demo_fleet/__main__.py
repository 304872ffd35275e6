"""Write the demo CSV files: ``python -m demo_fleet OUTDIR [--today YYYY-MM-DD] [--seed N]``."""

import sys

from demo_fleet.generate import main

sys.exit(main())
