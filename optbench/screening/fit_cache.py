"""The screen's opt-in fit cache: a fitted volatility model kept per underlying and
reused while the history only grows, so the next day's screen filters instead of
refitting (``optbench screen --fit-cache DIR``).

What "filter instead of refit" means
    The cached parameters are held exactly as estimated (no optimiser runs); the
    model's variance recursion — e.g. GJR-GARCH
    :math:`\\sigma^2_t = \\omega + (\\alpha + \\gamma 1[\\varepsilon_{t-1}<0])
    \\varepsilon^2_{t-1} + \\beta\\sigma^2_{t-1}` (Glosten, Jagannathan & Runkle 1993) —
    runs over the whole history again, the appended days included, from the fit's
    start-up variance, kept in the entry (:func:`optbench.volatility.garch.fix_garch`),
    so the conditional variances of the fitted days are the fit's own. The forecast
    therefore starts from the newest day's conditional variance; the parameters, and
    so the long-run level and the persistence, are those of the fit's date, and so is
    the forecast band's parameter covariance (the fit's robust covariance, kept in
    the entry). On the same history the rows equal the fitted rows.

When the cache is used
    Entry per underlying code and model choice (``model``, ``dist``, ``mean``). It is
    used when the returns it was fitted on are, bit for bit (SHA-256 of the float64
    returns, the *fingerprint*), the first returns of today's history, and at most
    ``max_filter_days`` returns were appended since. Otherwise (history revised,
    shortened or rolled, too many new days, an unreadable entry) the model is refitted
    and the entry replaced; a fit that fell back to a simpler model is not cached.
    Every row says which happened (``fit_source``: ``fitted``, ``cached`` — the same
    history — or ``filtered``; ``fit_date``: the last history date the parameters
    were estimated on), and a reused fit adds a note to the row's warnings.
"""
from __future__ import annotations

import datetime as _dt
import hashlib
import json
import os
import re
import tempfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from optbench.errors import InputError

FORMAT = 1
#: most appended returns a cached fit is filtered over before the model is refitted
#: (about a month of trading days; common practice is to re-estimate GARCH-family
#: models monthly or more often)
DEFAULT_MAX_FILTER_DAYS = 21


@dataclass(frozen=True)
class FitOrigin:
    """Where a row's fitted model came from.

    source : ``"fitted"`` (estimated now), ``"cached"`` (the cached parameters on the
        same history) or ``"filtered"`` (the cached parameters, the variance recursion
        run over ``new_days`` appended returns).
    fit_date : ISO date of the last history day the parameters were estimated on.
    new_days : returns appended since that date (0 unless filtered).
    note : the sentence a reused fit adds to the row's warnings ('' when fitted);
        a refit after a cache miss says why.
    """

    source: str
    fit_date: str
    new_days: int = 0
    note: str = ""


def fingerprint(returns) -> str:
    """SHA-256 of the returns as little-endian float64 bytes (hex)."""
    y = np.ascontiguousarray(np.asarray(returns, dtype="<f8"))
    return hashlib.sha256(y.tobytes()).hexdigest()


def check_folder(folder) -> Path:
    """The cache folder, created if missing; InputError when it cannot be used."""
    path = Path(folder)
    if path.exists() and not path.is_dir():
        raise InputError("--fit-cache", f"{path} is a file, not a folder: give a folder "
                                        "for the cache (it is created if missing)")
    try:
        path.mkdir(parents=True, exist_ok=True)
    except OSError as err:
        raise InputError("--fit-cache", f"cannot create {path}: {err.strerror or err}") \
            from None
    if not path.is_dir() or not os.access(path, os.W_OK):
        raise InputError("--fit-cache", f"{path} is not a writable folder")
    return path


def entry_path(folder, code: str, model: str, dist: str, mean: str) -> Path:
    safe = re.sub(r"[^A-Za-z0-9._-]", "_", str(code)) or "_"
    return Path(folder) / f"{safe}.{model}-{dist}-{mean}.json"


def _read(path: Path) -> dict | None:
    try:
        entry = json.loads(path.read_text())
    except (OSError, ValueError):
        return None
    need = ("format", "model", "params", "n_obs", "fingerprint", "fit_date", "backcast")
    if not isinstance(entry, dict) or any(k not in entry for k in need) \
            or entry["format"] != FORMAT:
        return None
    return entry


def _write(path: Path, entry: dict) -> None:
    """Write atomically (a temporary file renamed over the entry), so a reader in
    another worker sees the old entry or the new one, never half of one."""
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=".fit-", suffix=".tmp")
    try:
        with os.fdopen(fd, "w") as f:
            json.dump(entry, f, indent=1, sort_keys=True)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def fit_with_cache(returns, dates, *, folder, code: str, model: str, dist: str,
                   mean: str, max_filter_days: int = DEFAULT_MAX_FILTER_DAYS):
    """``(fit, FitOrigin)`` for the history ``returns`` (``dates``: the date of each
    return, oldest first), from the cache in ``folder`` when it applies (module Notes),
    else fitted with :func:`~optbench.volatility.garch.fit_garch` and cached."""
    from optbench.volatility.garch import fit_garch, fix_garch

    y = np.asarray(returns, float)
    days = np.asarray(dates, dtype="datetime64[D]")
    path = entry_path(folder, code, model, dist, mean)
    entry = _read(path) if path.exists() else None
    why = ""
    if entry is not None:
        n0 = int(entry["n_obs"])
        new = len(y) - n0
        if n0 < 2 or new < 0 or fingerprint(y[:n0]) != entry["fingerprint"]:
            why = (f"the history up to {entry['fit_date']} differs from the one the cached "
                   "fit used: refitted")
        elif new > int(max_filter_days):
            why = (f"{new} returns since the cached fit of {entry['fit_date']} (more than "
                   f"{int(max_filter_days)}): refitted")
        else:
            fit = _held(fix_garch(y, entry["params"], model=entry["model"], dist=dist,
                                  mean=mean, backcast=float(entry["backcast"])), entry)
            if new == 0:
                return fit, FitOrigin("cached", entry["fit_date"], 0, (
                    f"volatility model: the cached fit of {entry['fit_date']} (fit cache, "
                    "same history, parameters held)"))
            return fit, FitOrigin("filtered", entry["fit_date"], new, (
                f"volatility model: parameters of the cached fit of {entry['fit_date']}, "
                f"filtered over {new} new day{'s' if new != 1 else ''} "
                f"to {_iso(days[-1])}, not refitted (fit cache)"))
    elif path.exists():
        why = "the cached fit could not be read: refitted"
    fit = fit_garch(y, model=model, dist=dist, mean=mean)
    fit_date = _iso(days[-1])
    if not fit.fallback_reason and fit.model != "ewma":
        _write(path, {"format": FORMAT, "code": str(code), "request": model,
                      "model": fit.model, "dist": dist, "mean": mean,
                      "params": {k: float(v) for k, v in fit.params.items()},
                      "n_obs": int(len(y)), "fingerprint": fingerprint(y),
                      "backcast": _backcast(y, mean),
                      "param_names": list(fit.param_names),
                      "cov": None if fit.cov is None else np.asarray(fit.cov).tolist(),
                      "first_date": _iso(days[0]), "fit_date": fit_date})
    return fit, FitOrigin("fitted", fit_date, 0,
                          f"volatility model: {why} (fit cache)" if why else "")


def _held(fit, entry: dict):
    """The filtered fit with the cached fit's parameter covariance (the band's
    uncertainty is the fit's own, as estimated on its date)."""
    import dataclasses
    cov = entry.get("cov")
    if cov is None or list(entry.get("param_names") or ()) != list(fit.param_names):
        return fit                     # the sandwich at the held parameters instead
    return dataclasses.replace(fit, covariance_source=np.asarray(cov, float))


def _backcast(y: np.ndarray, mean: str) -> float:
    """The fit's start-up variance in decimal units (the EWMA of the first squared
    residuals, :func:`optbench.volatility.recursions.backcast_value`), kept so the
    filter starts where the fit started (the sample mean moves as days are added)."""
    from optbench.volatility.recursions import backcast_value
    return backcast_value(y - np.mean(y) if mean == "constant" else y)


def _iso(day) -> str:
    return _dt.date.fromisoformat(str(np.datetime64(day, "D"))).isoformat()
