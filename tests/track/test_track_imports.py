"""The track-record package is core: no UI imports, no heavy modules at import."""
from __future__ import annotations

import subprocess
import sys


def test_track_core_imports_no_ui_and_no_heavy_modules():
    code = ("import sys, optbench.track.build, optbench.track.store, optbench.track.ivfile\n"
            "bad = [m for m in sys.modules if m.split('.')[0] in ('textual', 'rich', "
            "'matplotlib', 'openpyxl', 'statsmodels') or m == 'scipy.stats']\n"
            "print(','.join(bad))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == ""
