"""A screen worker keeps the memory it frees for the next underlying.

Checked on the process's own count of minor page faults (``getrusage``, POSIX): a
child process that makes 64 arrays of 64 KiB (4 MiB together, the kind of working
set a screen row builds), frees them and does it again 50 times faults their pages
in once with the worker setting, and again every round without it: glibc's default
returns a freed heap top above 128 KiB to the kernel (``mallopt(3)``, M_TRIM_THRESHOLD;
the GNU C Library manual, "Malloc Tunable Parameters").
"""
from __future__ import annotations

import platform
import subprocess
import sys

import pytest

from optbench.screening.runner import _worker_start

CHILD = """
import resource, sys
import numpy as np
if sys.argv[1] == "1":
    from optbench.screening.runner import keep_freed_memory
    assert keep_freed_memory()
np.ones(1000).sum()                          # numpy's own start-up allocations first
before = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
for _ in range(50):
    arrays = [np.ones(1 << 13) for _ in range(64)]   # 64 KiB each, written
    del arrays
print(resource.getrusage(resource.RUSAGE_SELF).ru_minflt - before)
"""


def _faults(keep: bool) -> int:
    out = subprocess.run([sys.executable, "-c", CHILD, "1" if keep else "0"],
                         capture_output=True, text=True, check=True)
    return int(out.stdout.strip())


def _glibc() -> bool:
    return platform.system() == "Linux" and platform.libc_ver()[0] == "glibc"


@pytest.mark.skipif(not _glibc(), reason="the setting is glibc's mallopt")
def test_freed_arrays_are_reused_instead_of_faulted_in_again():
    pages = (1 << 22) // 4096                   # 1,024 pages of 4 KiB a round
    kept, default = _faults(True), _faults(False)
    assert default >= 25 * pages, default       # faulted in again round after round
    assert kept < 3 * pages, kept               # faulted in once, then reused


def test_the_worker_initializer_sets_it(monkeypatch):
    import optbench.screening.runner as runner

    calls = []
    monkeypatch.setattr(runner, "keep_freed_memory", lambda: calls.append("kept") or True)
    _worker_start(False)
    assert calls == ["kept"]
