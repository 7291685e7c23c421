"""`python -m tui` is the same as the `sumpbook` command."""

import sys

from .cli import main

sys.exit(main())
