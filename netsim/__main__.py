"""``python -m netsim`` runs the command line (Ctrl-C while it starts: one line, exit 130)."""

import sys

try:
    from netsim.cli import main
except KeyboardInterrupt:
    print("netsim: interrupted", file=sys.stderr)
    raise SystemExit(130) from None

raise SystemExit(main())
