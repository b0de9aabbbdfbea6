"""The command-line entry point: imports the CLI module inside the interrupt guard, so Ctrl-C or SIGTERM in the
first moments of start-up still ends in one line and the conventional exit status (130 / 143)."""

from __future__ import annotations

import sys


def main() -> int:
    try:
        from screener.show.cli import main as cli_main
    except KeyboardInterrupt:
        print("screener: interrupted", file=sys.stderr)
        return 130
    return cli_main()
