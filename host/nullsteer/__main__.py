"""``python -m nullsteer`` runs the command line."""

from nullsteer.cli import main

raise SystemExit(main())
