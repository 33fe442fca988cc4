"""Every workbench test saves its settings in a folder of its own, never in the
user's config folder."""
from __future__ import annotations

import pytest


@pytest.fixture(autouse=True)
def _settings_folder(tmp_path, monkeypatch):
    folder = tmp_path / "config"
    monkeypatch.setenv("OPTBENCH_CONFIG_DIR", str(folder))
    return folder
