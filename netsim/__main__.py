"""``python -m netsim`` runs the command line (Ctrl-C while it starts: one line, exit 130)."""

import sys

try:
    from netsim.interrupts import interrupt_deferred  # the standard library only

    with interrupt_deferred():  # a Ctrl-C inside numpy's import would be an ImportError
        from netsim.cli import main
except KeyboardInterrupt:
    print("netsim: interrupted", file=sys.stderr)
    raise SystemExit(130) from None

raise SystemExit(main())
