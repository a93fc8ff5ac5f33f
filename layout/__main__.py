"""python -m layout: the same as the layout command."""

from layout.cli import main

raise SystemExit(main())
