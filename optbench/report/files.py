"""Writing an export to a file: text as UTF-8, XLSX as bytes or streamed, one-line
errors, and never a half-written file.

Each file is written to a temporary file in the same folder and moved over the
target only when complete (``os.replace``), so an interrupted or failed export leaves
an older file of that name intact. A CSV that carries notes
(:class:`optbench.report.csv.CsvText`) gets its sidecar ``<file>.meta.json``.
"""
from __future__ import annotations

import os
import stat
import tempfile
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import IO

from optbench.errors import InputError

#: files a scenario folder holds (and that a chain file's folder may supply)
SCENARIO_FILES = ("chain.csv", "chain.parquet", "chain.pq", "history.csv",
                  "history.parquet", "meta.toml")

#: suffix of the notes file written beside a CSV
SIDECAR_SUFFIX = ".meta.json"


@dataclass(frozen=True)
class StreamedFile:
    """A binary export written straight into its file by ``write(binary_file)``
    (large XLSX workbooks are never held in memory whole)."""

    write: Callable[[IO[bytes]], object]


def sidecar_path(path: str | Path) -> Path:
    """The notes file of a CSV: ``table.csv`` -> ``table.csv.meta.json``."""
    path = Path(path)
    return path.with_name(path.name + SIDECAR_SUFFIX)


def _special(path: Path) -> bool:
    """True for an existing target that is not a regular file (``/dev/null``, a pipe,
    a terminal): it is written into as it is, never replaced."""
    try:
        return not stat.S_ISREG(path.stat().st_mode)
    except OSError:
        return False


def _atomic(path: Path, fill: Callable[[IO[bytes]], object]) -> None:
    if _special(path):
        with open(path, "wb") as handle:
            fill(handle)
        return
    folder = path.parent if str(path.parent) else Path(".")
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=folder)
    try:
        with os.fdopen(fd, "wb") as handle:
            fill(handle)
        try:
            mode = path.stat().st_mode & 0o777
        except FileNotFoundError:
            umask = os.umask(0)
            os.umask(umask)
            mode = 0o666 & ~umask
        os.chmod(tmp, mode)
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise


def write_payload(path: str | Path, payload) -> Path:
    """Write ``payload`` (text, bytes or a :class:`StreamedFile`) to ``path``; a file
    that cannot be written is an InputError. Notes of a CSV go to its sidecar."""
    path = Path(path)
    try:
        if isinstance(payload, StreamedFile):
            _atomic(path, payload.write)
        elif isinstance(payload, bytes):
            _atomic(path, lambda f: f.write(payload))
        else:
            data = str(payload).encode("utf-8")
            _atomic(path, lambda f: f.write(data))
            notes = getattr(payload, "notes", None)
            if notes and not _special(path):      # no sidecar beside /dev/null or a pipe
                from optbench.report.notes import sidecar_json
                text = sidecar_json(notes, getattr(payload, "columns", None)).encode("utf-8")
                _atomic(sidecar_path(path), lambda f: f.write(text))
    except OSError as err:
        raise InputError(path, f"cannot write: {err.strerror or err}") from None
    return path


# --------------------------------------------------------------- never over inputs
def _exists(path: Path) -> bool:
    try:
        return path.exists()
    except (OSError, ValueError):
        return False


def _same(a: Path, b: Path) -> bool:
    try:
        return os.path.samefile(a, b)
    except (OSError, ValueError):
        return False


def _is_universe(folder: Path) -> bool:
    return not any((folder / name).is_file() for name in SCENARIO_FILES[:3])


def refuse_input_overwrite(target: str | Path, inputs: list[tuple[str, Path]]) -> None:
    """InputError if writing ``target`` would replace an input of the command: an
    input file itself (same file, by path, link or hard link), a file of an input
    scenario folder (or of a scenario folder inside an input universe folder), or a
    scenario file (``chain.csv``, ``history.csv``, ``meta.toml``, ...) beside an
    input chain file."""
    out = Path(target).expanduser()
    where = out.resolve(strict=False)
    parent = where.parent
    exists = _exists(out)
    scenario_name = out.name.lower() in SCENARIO_FILES
    for key, path in inputs:
        if path.is_dir():
            folders = [path]
            if _is_universe(path) and _exists(parent) and _same(parent.parent, path):
                folders.append(parent)
            for folder in folders:
                if _exists(parent) and _same(parent, folder) and (exists or scenario_name):
                    raise InputError(f"-o {target}", f"would overwrite a file of the input "
                                                     f"folder {path} ({key}); write the "
                                                     "output elsewhere")
        else:
            if exists and _same(out, path):
                raise InputError(f"-o {target}", f"is an input of this command ({key}: "
                                                 f"{path}); write the output elsewhere")
            if scenario_name and _exists(parent) and _same(parent, path.parent):
                raise InputError(f"-o {target}", f"would replace the scenario file beside "
                                                 f"the input {path} ({key}); write the "
                                                 "output elsewhere")


