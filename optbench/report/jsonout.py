"""JSON output: decimals, ISO dates, ``null`` for missing numbers.

The schema of the ``compare`` and ``hedge`` documents is in ``docs/schema.md``.
``NaN`` and infinities are written as ``null`` (JSON has no NaN; RFC 8259 §6);
dates as ``YYYY-MM-DD`` (ISO 8601); numpy scalars and arrays as plain numbers and lists.
"""
from __future__ import annotations

import datetime as _dt
import json
import math
from typing import Any

import numpy as np

SCHEMA_VERSION = 1


def clean(value: Any) -> Any:
    """Recursively make ``value`` JSON-safe: NaN/inf -> None, dates -> ISO strings."""
    if value is None or isinstance(value, (bool, str)):
        return value
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        x = float(value)
        return x if math.isfinite(x) else None
    if isinstance(value, (_dt.datetime,)):
        return value.date().isoformat() if not value.time() else value.isoformat()
    if isinstance(value, _dt.date):
        return value.isoformat()
    if isinstance(value, np.datetime64):
        return None if np.isnat(value) else str(value.astype("datetime64[D]"))
    if isinstance(value, dict):
        return {str(k): clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [clean(v) for v in value]
    if isinstance(value, np.ndarray):
        return [clean(v) for v in value.tolist()]
    if hasattr(value, "to_dict"):
        from optbench.analysis.results import plain
        return clean(plain(value))
    try:
        import pandas as pd
        if value is pd.NaT or (not isinstance(value, (list, tuple, dict)) and pd.isna(value)):
            return None
        if isinstance(value, pd.Timestamp):
            return value.date().isoformat()
    except (TypeError, ValueError):
        pass
    return str(value)


def frame_records(frame) -> list[dict]:
    """A DataFrame as JSON-safe records, column by column in numpy (fast for the
    per-strike table of a large chain): floats stay exact, NaN -> None, dates -> ISO."""
    import pandas as pd
    columns = []
    for name in frame.columns:
        col = frame[name]
        if pd.api.types.is_datetime64_any_dtype(col):
            iso = np.asarray(col.to_numpy(), dtype="datetime64[D]").astype(str)
            values = [None if v == "NaT" else v for v in iso.tolist()]
        elif pd.api.types.is_float_dtype(col):
            arr = col.to_numpy(float)
            values = arr.tolist()
            bad = np.flatnonzero(~np.isfinite(arr))
            for i in bad.tolist():
                values[i] = None
        elif pd.api.types.is_bool_dtype(col) or pd.api.types.is_integer_dtype(col):
            values = col.to_numpy().tolist()
        else:
            values = [clean(v) for v in col.tolist()]
        columns.append(values)
    names = [str(c) for c in frame.columns]
    return [dict(zip(names, row)) for row in zip(*columns)]


def _column_texts(col) -> list[str]:
    """Each value of a DataFrame column as the JSON text :func:`frame_records` and
    ``json.dumps`` give it: floats by ``float.__repr__`` (what the encoder writes) with
    ``null`` for NaN and infinities, dates as quoted ISO strings, numpy booleans and
    integers by their Python value; anything else value by value through the encoder."""
    import pandas as pd
    dtype = col.dtype
    if pd.api.types.is_datetime64_any_dtype(col):
        iso = np.asarray(col.to_numpy(), dtype="datetime64[D]").astype(str)
        return ["null" if v == "NaT" else f'"{v}"' for v in iso.tolist()]
    if isinstance(dtype, np.dtype) and dtype.kind == "f":
        arr = col.to_numpy(float)
        texts = list(map(float.__repr__, arr.tolist()))
        for i in np.flatnonzero(~np.isfinite(arr)).tolist():
            texts[i] = "null"
        return texts
    if isinstance(dtype, np.dtype) and dtype.kind == "b":
        return ["true" if v else "false" for v in col.to_numpy().tolist()]
    if isinstance(dtype, np.dtype) and dtype.kind in "iu":
        return list(map(int.__repr__, col.to_numpy().tolist()))
    encode = json.JSONEncoder(allow_nan=False, ensure_ascii=False).encode
    cache: dict = {}
    texts = []
    for v in frame_records(col.to_frame()):
        v = next(iter(v.values()))
        key = (type(v), v) if isinstance(v, (str, bool, int, type(None))) else None
        if key is None:
            texts.append(encode(v))
            continue
        text = cache.get(key)
        if text is None:
            text = cache[key] = encode(v)
        texts.append(text)
    return texts


def records_text(frame, sep: str = ", ") -> str:
    """The JSON text of ``json.dumps(frame_records(frame))[1:-1]`` with ``sep`` between
    records, built column by column: each column's values are written to text once
    (numbers by their ``repr``, as the encoder does) and the records are filled into
    one template, instead of encoding every key and value of every record."""
    names = [str(c) for c in frame.columns]
    if len(set(names)) != len(names) or not len(frame):
        body = json.dumps(frame_records(frame), allow_nan=False, ensure_ascii=False)[1:-1]
        return body.replace("}, {", "}" + sep + "{")
    keys = [json.dumps(n, ensure_ascii=False).replace("%", "%%") for n in names]
    template = "{" + ", ".join(f"{k}: %s" for k in keys) + "}"
    columns = [_column_texts(frame.iloc[:, i]) for i in range(len(names))]
    return sep.join([template % row for row in zip(*columns)])


def dumps(obj: Any, *, kind: str | None = None, indent: int | None = 2) -> str:
    """JSON text of a result object (anything with ``to_dict()``) or plain data.

    ``kind`` (``"compare"``/``"hedge"``) adds ``"schema": "optbench.<kind>/1"``.
    """
    strikes = None
    if hasattr(obj, "strike_frame") and hasattr(obj, "to_dict"):
        # the per-strike table can be large: serialise it column-wise
        data = clean(obj.to_dict(strikes=False))
        strikes = obj.strike_frame()
    else:
        data = obj.to_dict() if hasattr(obj, "to_dict") else obj
        data = clean(data)
    if kind and isinstance(data, dict):
        data = {"schema": f"optbench.{kind}/{SCHEMA_VERSION}", **data}
    text = json.dumps(data, indent=indent, allow_nan=False, ensure_ascii=False)
    if strikes is not None:
        # one record per line, written column by column (an indented dump of a large
        # table would go through the slow pure-Python encoder)
        pad = " " * (indent or 0)
        sep = ",\n" + pad * 2 if indent else ","
        body = records_text(strikes, sep)
        head = f",\n{pad}\"strikes\": [\n{pad * 2}" if indent else ',"strikes":['
        tail = f"\n{pad}]\n}}" if indent else "]}"
        text = text[:text.rstrip().rfind("}")].rstrip() + head + body + tail
    return text + "\n"
