"""The workbench's saved settings: the hedge planner's inputs (the portfolio among
them) and the volatility model, kept as TOML in the user's config folder and read
back at the next start. No textual here.

Where: ``$OPTBENCH_CONFIG_DIR/settings.toml`` when that variable is set (tests use
it), else the platform's config folder: ``%APPDATA%\\optbench`` on Windows,
``~/Library/Application Support/optbench`` on macOS, ``$XDG_CONFIG_HOME/optbench``
(default ``~/.config/optbench``) elsewhere.

A file that cannot be read gives defaults and a one-line notice, never an error.
"""
from __future__ import annotations

import math
import os
import sys
from dataclasses import asdict, dataclass, replace
from pathlib import Path

ENV_DIR = "OPTBENCH_CONFIG_DIR"
FILE_NAME = "settings.toml"
VERSION = 1

MODELS = ("auto", "garch", "gjr", "egarch")
DISTS = ("t", "normal")
MEANS = ("constant", "zero")
STRUCTURES = ("put", "put_spread", "collar")


@dataclass(frozen=True)
class PlannerState:
    """The hedge planner's inputs, as numbers (the overview's headline uses them too).

    ``expiry`` is the chosen expiry (ISO) when the chain lists it; otherwise the
    expiry nearest ``days`` calendar days is used.
    """

    portfolio_value: float = 10_000_000.0
    beta: float = 1.0
    floor: float = 0.90
    structure: str = "put"
    lower_floor: float | None = None
    call_strike: float | None = None
    expiry: str | None = None
    days: int = 91

    def hedge_kwargs(self, listed: list[str] | None = None) -> dict:
        """Keyword arguments for :func:`optbench.hedge`; ``listed``: the chain's
        expiries (ISO), to fall back to ``days`` when the saved expiry is not one."""
        out = {"portfolio_value": self.portfolio_value, "beta": self.beta,
               "floor": self.floor, "structure": self.structure}
        if self.expiry and (listed is None or self.expiry in listed):
            out["expiry"] = self.expiry
        else:
            out["days"] = self.days
        if self.structure == "put_spread" and self.lower_floor is not None:
            out["lower_floor"] = self.lower_floor
        if self.structure == "collar" and self.call_strike is not None:
            out["call_strike"] = self.call_strike
        return out


@dataclass(frozen=True)
class ModelChoice:
    model: str = "auto"
    dist: str = "t"
    mean: str = "constant"


@dataclass(frozen=True)
class Saved:
    """What was read: the planner, the model, and a notice when the file was bad."""

    planner: PlannerState = PlannerState()
    model: ModelChoice = ModelChoice()
    notice: str | None = None


def config_dir() -> Path:
    here = os.environ.get(ENV_DIR)
    if here:
        return Path(here)
    if sys.platform.startswith("win"):
        base = os.environ.get("APPDATA") or str(Path.home() / "AppData" / "Roaming")
        return Path(base) / "optbench"
    if sys.platform == "darwin":
        return Path.home() / "Library" / "Application Support" / "optbench"
    base = os.environ.get("XDG_CONFIG_HOME") or str(Path.home() / ".config")
    return Path(base) / "optbench"


def settings_path() -> Path:
    return config_dir() / FILE_NAME


def _number(table: dict, key: str, default, *, low: float | None = None,
            high: float | None = None, optional: bool = False):
    if key not in table:
        return default
    value = table[key]
    if isinstance(value, bool) or not isinstance(value, (int, float)) or \
            not math.isfinite(float(value)):
        raise ValueError(f"{key} is not a number")
    if (low is not None and value <= low) or (high is not None and value > high):
        raise ValueError(f"{key} = {value} is out of range")
    return float(value)


def _word(table: dict, key: str, default: str, allowed: tuple[str, ...]) -> str:
    value = table.get(key, default)
    if value not in allowed:
        raise ValueError(f"{key} = {value!r} is not one of {', '.join(allowed)}")
    return value


def parse(text: str) -> Saved:
    """Settings from TOML text; raises ValueError with a short reason."""
    import tomllib
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        raise ValueError(f"not TOML ({err})") from None
    p = data.get("planner", {})
    m = data.get("model", {})
    if not isinstance(p, dict) or not isinstance(m, dict):
        raise ValueError("[planner] and [model] must be tables")
    expiry = p.get("expiry")
    if expiry is not None and not isinstance(expiry, str):
        raise ValueError("expiry is not a date")
    days = p.get("days", 91)
    if isinstance(days, bool) or not isinstance(days, int) or days < 1:
        raise ValueError("days is not a whole number of days")
    planner = PlannerState(
        portfolio_value=_number(p, "portfolio_value", 10_000_000.0, low=0.0),
        beta=_number(p, "beta", 1.0, low=0.0),
        floor=_number(p, "floor", 0.90, low=0.0, high=1.0),
        structure=_word(p, "structure", "put", STRUCTURES),
        lower_floor=_number(p, "lower_floor", None, low=0.0, high=1.0),
        call_strike=_number(p, "call_strike", None, low=0.0),
        expiry=expiry, days=days)
    model = ModelChoice(model=_word(m, "model", "auto", MODELS),
                        dist=_word(m, "dist", "t", DISTS),
                        mean=_word(m, "mean", "constant", MEANS))
    return Saved(planner=planner, model=model)


def load(path: Path | None = None) -> Saved:
    """The saved settings, or defaults (with a one-line notice if the file was bad)."""
    path = path or settings_path()
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        return Saved()
    except (OSError, UnicodeDecodeError) as err:
        return Saved(notice=f"{path}: cannot be read ({type(err).__name__}); using defaults")
    try:
        return parse(text)
    except ValueError as err:
        return Saved(notice=f"{path}: {err}; using defaults")


def _toml_value(value) -> str:
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    return repr(float(value))


def dumps(planner: PlannerState, model: ModelChoice) -> str:
    lines = ["# optbench workbench settings (written by the workbench; safe to delete)",
             f"version = {VERSION}", "", "[planner]"]
    for key, value in asdict(planner).items():
        if value is not None:
            lines.append(f"{key} = {_toml_value(value)}")
    lines += ["", "[model]"]
    for key, value in asdict(model).items():
        lines.append(f"{key} = {_toml_value(value)}")
    return "\n".join(lines) + "\n"


def save(planner: PlannerState, model: ModelChoice, path: Path | None = None) -> str | None:
    """Write the settings (atomically: a temporary file renamed over the old one).
    Returns a one-line notice when they cannot be written, else None."""
    path = path or settings_path()
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp = path.with_name(path.name + ".tmp")
        tmp.write_text(dumps(planner, model), encoding="utf-8")
        os.replace(tmp, path)
    except OSError as err:
        return f"{path}: settings not saved ({err.strerror or type(err).__name__})"
    return None


def reset(path: Path | None = None) -> str | None:
    """Back to defaults: remove the settings file. A notice if it cannot be removed."""
    path = path or settings_path()
    try:
        path.unlink()
    except FileNotFoundError:
        pass
    except OSError as err:
        return f"{path}: settings not removed ({err.strerror or type(err).__name__})"
    return None


def with_model(saved: Saved, model: str | None, dist: str | None,
               mean: str | None) -> ModelChoice:
    """The model to start with: the command line's choice where given, else the saved."""
    m = saved.model
    return replace(m, **{k: v for k, v in (("model", model), ("dist", dist), ("mean", mean))
                         if v is not None})


__all__ = ["PlannerState", "ModelChoice", "Saved", "config_dir", "settings_path", "load",
           "save", "reset", "parse", "dumps", "with_model"]
