"""The loaders stay cheap to import: ``optbench compare`` must start fast, and
scipy.stats / scipy.signal cost about a second each on the development machine."""
from __future__ import annotations

import subprocess
import sys


def test_loaders_import_no_scipy_and_no_ui():
    code = ("import sys\n"
            "from optbench.data.scenario import load_scenario\n"
            "from optbench.data.chain import load_chain\n"
            "from optbench.data.history import load_history\n"
            "import optbench.data.occ, optbench.data.validate\n"
            "bad = [m for m in sys.modules if m.split('.')[0] in ('scipy', 'textual', 'rich')]\n"
            "print(','.join(sorted(bad)))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == ""
