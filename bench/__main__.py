"""``python -m rxbench``: the same entry point as the ``rxbench`` console script."""

from rxbench.cli import run_console

run_console()
