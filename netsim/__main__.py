"""``python -m netsim`` runs the command line."""

from netsim.cli import main

raise SystemExit(main())
