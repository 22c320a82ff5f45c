"""``python -m runtrue`` is the same as the ``runtrue`` command."""

from runtrue.cli import main

raise SystemExit(main())
