"""The `sumpbook` command line and the other doors (CSV, merge), end to end."""
