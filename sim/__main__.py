"""``python -m sim`` is the ``skidpad`` command."""

from sim.cli import main

raise SystemExit(main())
