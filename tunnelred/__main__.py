"""``python -m tunnelred`` runs the command line, as the ``tunnelred`` script does."""

import signal

try:
    from tunnelred.cli import main
except KeyboardInterrupt:  # Ctrl-C while Python is still starting: no traceback
    raise SystemExit(130) from None

status = main()
# Exiting: a late Ctrl-C would only print a traceback from the clean-up at exit.
signal.signal(signal.SIGINT, signal.SIG_IGN)
raise SystemExit(status)
