"""``python -m service ...`` is the ``rolloff`` command."""

from service.cli import main

raise SystemExit(main())
