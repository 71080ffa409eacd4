"""Allow ``python -m checker``."""

from checker.cli import main

raise SystemExit(main())
