"""Lazy re-exports for package ``__init__`` modules.

A stage's public names are listed once, with the module that defines them;
the module is imported on first use, so ``import textkit`` and
``textkit --help`` never load pandas, scipy or scikit-learn.
"""

from __future__ import annotations

import importlib
from collections.abc import Callable, Mapping
from typing import Any


def lazy_exports(package: str, exports: Mapping[str, str]) -> tuple[Callable[[str], Any], Callable[[], list[str]]]:
    """``(__getattr__, __dir__)`` for ``package`` re-exporting ``name -> relative module``."""

    def get_attribute(name: str) -> Any:
        module = exports.get(name)
        if module is None:
            raise AttributeError(f"module {package!r} has no attribute {name!r}")
        return getattr(importlib.import_module(f".{module}", package), name)

    def list_names() -> list[str]:
        return sorted(set(exports) | set(importlib.import_module(package).__dict__))

    return get_attribute, list_names
