"""`python -m tui` is the same as the `sumpbook` command."""

import sys

from tui.launch import main

if __name__ == "__main__":
    sys.exit(main())
