"""``python -m optbench`` is the same as the ``optbench`` command."""
from optbench.cli import entry

raise SystemExit(entry())
