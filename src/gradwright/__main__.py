"""`python -m gradwright`: the command line."""

from .cli import main

raise SystemExit(main())
