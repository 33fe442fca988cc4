"""``python -m optbench`` is the same as the ``optbench`` command."""
from optbench.cli import main

raise SystemExit(main())
