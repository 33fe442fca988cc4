"""The function each worker runs for one underlying.

A task carries the scenario folder's *path* and the screen's options
(:class:`~optbench.screening.rows.ScreenTask`, a few hundred bytes pickled), never
the chain or the history: each worker reads its own files. So every worker — a
local process or a Dask worker on another machine — must see the universe at the
same path (a shared or copied file system). A worker that does not see the folder
fails that underlying with one line naming the folder and the worker's machine; the
failure is deterministic (the same worker would not see it on a second try), so it
is not retried.
"""
from __future__ import annotations

import socket
from pathlib import Path

from optbench.errors import InputError
from optbench.screening.rows import ScreenTask, screen_one


def folder_not_visible(folder: str) -> InputError:
    """The error of a worker that cannot see a scenario folder."""
    return InputError(folder, f"folder not found on worker {socket.gethostname()}: every "
                              "worker must see the universe at the same path (shared "
                              "or copied storage)")


def screen_task(task: ScreenTask) -> list[dict]:
    """One underlying's rows (:func:`~optbench.screening.rows.screen_one`), after
    checking that this worker sees its folder."""
    if not Path(task.folder).is_dir():
        raise folder_not_visible(task.folder)
    return screen_one(task)
