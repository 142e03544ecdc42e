"""``python -m explorer``: the command line (see explorer.cli)."""

from .cli import main

raise SystemExit(main())
