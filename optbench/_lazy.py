"""Lazy public names for a package: imported on first use, so that importing the
package stays fast (``import optbench`` must not pay for the volatility models)."""
from __future__ import annotations

import importlib
from collections.abc import Callable
from typing import Any


def lazy_names(package: str, names: dict[str, str],
               namespace: dict[str, Any]) -> tuple[Callable[[str], Any], Callable[[], list]]:
    """``(__getattr__, __dir__)`` for a package whose public ``names`` map to the
    modules that define them; a value is cached in ``namespace`` once imported."""
    public = sorted(names)

    def __getattr__(name: str) -> Any:
        module = names.get(name)
        if module is None:
            raise AttributeError(f"module {package!r} has no attribute {name!r}")
        value = getattr(importlib.import_module(module), name)
        namespace[name] = value
        return value

    def __dir__() -> list[str]:
        return public

    return __getattr__, __dir__
