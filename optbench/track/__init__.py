"""The verdict's track record: implied-vol histories, the record store of past
comparisons, the walk-forward replay and its statistics.

Pure like the rest of the core: frames and arrays in, frozen result objects out.
"""
from __future__ import annotations

from optbench._lazy import lazy_names

_EXPORTS: dict[str, str] = {
    "load_iv_history": "optbench.track.ivfile",
    "IvHistory": "optbench.track.ivfile",
    "record_comparison": "optbench.track.store",
    "read_records": "optbench.track.store",
    "read_iv_history": "optbench.track.store",
    "walk_forward": "optbench.track.walkforward",
    "track_record": "optbench.track.build",
    "track": "optbench.track.build",
    "TrackRecord": "optbench.track.results",
    "TenorRecord": "optbench.track.results",
}

__all__ = sorted(_EXPORTS)

__getattr__, _lazy_dir = lazy_names("optbench.track", _EXPORTS, globals())
