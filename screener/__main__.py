"""`python -m screener ...` runs the command-line tool."""

from screener.show.cli import main

raise SystemExit(main())
