"""``python -m optim`` runs the command line."""

from optim.cli import main

raise SystemExit(main())
