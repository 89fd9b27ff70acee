"""Where the bundled data files live (layer 0).

The repository keeps ``pseudos/`` and ``inputs/`` at its top level; a wheel carries
copies under ``pwsolid/_data/``. Both layouts are searched, so the package works
from a source checkout, an editable install and a regular install alike.
"""

from __future__ import annotations

import os
from pathlib import Path

__all__ = ["pseudopotential_dir", "inputs_dir", "demo_input"]

_PKG = Path(__file__).resolve().parent


def _data_dir(name: str) -> Path:
    for candidate in (_PKG / "_data" / name, _PKG.parent / name):
        if candidate.is_dir():
            return candidate
    return _PKG.parent / name


def pseudopotential_dir() -> Path:
    """Directory of bundled pseudopotential files (``PWSOLID_PSEUDO_DIR`` overrides)."""
    env = os.environ.get("PWSOLID_PSEUDO_DIR")
    return Path(env) if env else _data_dir("pseudos")


def inputs_dir() -> Path:
    """Directory of bundled example inputs."""
    return _data_dir("inputs")


def demo_input() -> Path:
    """The input run by ``pwsolid ground-state`` when no file is given."""
    return inputs_dir() / "silicon-substrate.toml"
