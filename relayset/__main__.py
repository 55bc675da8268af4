"""``python -m relayset``: the command line (relayset.cli)."""

from relayset.cli import main

raise SystemExit(main())
