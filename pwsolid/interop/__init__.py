"""Bridges to other libraries of the Python materials ecosystem (layer 6).

Each optional library is imported only inside its own adapter module, so the core
installs and imports without it; a missing one raises :class:`MissingExtraError`
naming the extra to install (``pip install "pwsolid[atomistic]"``).
"""

from __future__ import annotations

__all__ = ["MissingExtraError", "require"]

import importlib

from ..errors import PwsolidError


class MissingExtraError(PwsolidError, ImportError):
    """An optional library that this feature needs is not installed."""


def require(module: str, extra: str, feature: str):
    """Import ``module`` or raise :class:`MissingExtraError` naming the pwsolid extra."""
    try:
        return importlib.import_module(module)
    except ImportError:
        raise MissingExtraError(
            f"{feature} needs the optional library '{module.split('.')[0]}'; install it with "
            f"pip install \"pwsolid[{extra}]\"") from None
