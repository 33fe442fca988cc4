"""Writing an export to a file: text as UTF-8, XLSX as bytes, one-line errors."""
from __future__ import annotations

from pathlib import Path

from optbench.errors import InputError


def write_payload(path: str | Path, payload: str | bytes) -> Path:
    """Write ``payload`` to ``path``; a file that cannot be written is an InputError."""
    path = Path(path)
    try:
        if isinstance(payload, bytes):
            path.write_bytes(payload)
        else:
            path.write_text(payload, encoding="utf-8")
    except OSError as err:
        raise InputError(path, f"cannot write: {err.strerror or err}") from None
    return path
