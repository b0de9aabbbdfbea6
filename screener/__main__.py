"""`python -m screener ...` runs the command-line tool."""

from screener._entry import main

raise SystemExit(main())
