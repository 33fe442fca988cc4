"""Suite-wide test settings.

On CI (``CI`` set in the environment) hypothesis runs derandomised — the same
examples on every run, so a red build always reproduces — and keeps no example
database in the clean clone. Locally it explores new examples each run.
"""
from __future__ import annotations

import os

from hypothesis import settings

settings.register_profile("ci", derandomize=True, database=None, print_blob=True)
if os.environ.get("CI"):
    settings.load_profile("ci")
