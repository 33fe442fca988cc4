"""Pricing tests run on optbench's numpy special functions (the default, and the path
a command-line run takes), although the test process has imported scipy.special (the
reference library of tests/pricing/test_special.py), whatever a test before set."""
from __future__ import annotations

import pytest

from optbench.pricing import special


@pytest.fixture(autouse=True)
def numpy_special_functions(monkeypatch):
    monkeypatch.setattr(special, "PREFER_COMPILED", False)
