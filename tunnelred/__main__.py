"""``python -m tunnelred`` runs the command line, as the ``tunnelred`` script does."""

from tunnelred.cli import main

raise SystemExit(main())
