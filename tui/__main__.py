"""`python -m tui` is the same as the `sumpbook` command."""

from tui.launch import run

if __name__ == "__main__":
    run()
