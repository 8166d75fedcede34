"""``python -m forebrief.cli``: the same as the ``forebrief`` command."""

from forebrief.cli import main

raise SystemExit(main())
