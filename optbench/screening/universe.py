"""Finding the scenario folders of a screening universe.

A universe is a folder of scenario folders, one per underlying, each holding a
chain file (``chain.csv`` or ``chain.parquet``) and ``history.csv``. A folder that is
itself a scenario is a universe of one.
"""
from __future__ import annotations

from pathlib import Path

from optbench.errors import InputError

CHAIN_NAMES = ("chain.csv", "chain.parquet", "chain.csv.gz")


def is_scenario(folder: Path) -> bool:
    return folder.is_dir() and any((folder / name).is_file() for name in CHAIN_NAMES)


def find_scenarios(root: str | Path) -> list[Path]:
    """The scenario folders under ``root`` (itself, or its sub-folders), sorted by name.

    Sub-folders without a chain file are skipped (they are not underlyings); a root
    with no scenario at all is a user error.
    """
    root = Path(root)
    if not root.exists():
        raise InputError(root, "no such folder")
    if not root.is_dir():
        raise InputError(root, "a screen needs a folder of scenario folders, not a file")
    if is_scenario(root):
        return [root]
    found = sorted((p for p in root.iterdir() if is_scenario(p)), key=lambda p: p.name)
    if not found:
        raise InputError(root, "no scenario folders here (each needs chain.csv and "
                               "history.csv)")
    return found
