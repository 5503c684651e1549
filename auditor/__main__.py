"""`python -m auditor` runs the command line."""

import sys

from auditor.cli import main

sys.exit(main())
