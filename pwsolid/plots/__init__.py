"""Plots over computed data (layer 6).

Each plot is a thin object built from a result (``from_result(...)``) with a
``plot(ax=None)`` method; matplotlib is imported lazily, with the non-interactive
Agg backend unless the user chose another. :func:`house_style` gives every
figure pwsolid's own look: a warm off-white canvas, slate ink, a dotted
horizontal grid, open top and right frame, and the palette below.
"""

from __future__ import annotations

from pathlib import Path

__all__ = ["PALETTE", "house_style", "new_axes", "save_figure", "save_and_close"]

#: Line colours in order of use: slate blue, terracotta, moss, ochre, plum, teal.
PALETTE = ("#3b5b7a", "#c0583b", "#6b8e3e", "#c9962b", "#7d4e7a", "#2f8c8c")
_INK = "#2b2f36"
_CANVAS = "#fbfaf6"


def _pyplot():
    import matplotlib

    if matplotlib.get_backend().lower() not in ("agg", "module://matplotlib_inline.backend_inline"):
        try:
            matplotlib.use("Agg")
        except Exception:  # noqa: BLE001 - keep whatever backend the user has
            pass
    import matplotlib.pyplot as plt

    return plt


def house_style() -> dict:
    """Matplotlib rc settings of the pwsolid look (use with ``plt.rc_context``)."""
    from cycler import cycler

    return {
        "figure.facecolor": _CANVAS,
        "axes.facecolor": _CANVAS,
        "savefig.facecolor": _CANVAS,
        "axes.edgecolor": _INK,
        "axes.labelcolor": _INK,
        "axes.titleweight": "bold",
        "axes.titlesize": 11,
        "axes.labelsize": 10,
        "axes.spines.top": False,
        "axes.spines.right": False,
        "axes.grid": True,
        "axes.grid.axis": "y",
        "grid.linestyle": ":",
        "grid.color": "#b9b4a8",
        "grid.linewidth": 0.8,
        "xtick.color": _INK,
        "ytick.color": _INK,
        "xtick.direction": "in",
        "ytick.direction": "in",
        "font.family": "DejaVu Sans",
        "font.size": 9.5,
        "lines.linewidth": 1.6,
        "legend.frameon": False,
        "axes.prop_cycle": cycler(color=list(PALETTE)),
    }


def new_axes(nrows: int = 1, ncols: int = 1, **kwargs):
    """A figure and axes in the house style (returns ``(fig, axes)``)."""
    plt = _pyplot()
    with plt.rc_context(house_style()):
        fig, axes = plt.subplots(nrows, ncols, **kwargs)
    return fig, axes


def save_figure(fig, stem, formats=("png", "svg")) -> list[Path]:
    """Save ``fig`` as ``<stem>.<format>`` for each format (``si.eos`` -> ``si.eos.png``);
    return the paths written.

    Files are written to a temporary name first and renamed, so a crash never
    leaves a truncated figure.
    """
    import os

    stem = Path(stem)
    stem.parent.mkdir(parents=True, exist_ok=True)
    written = []
    plt = _pyplot()
    with plt.rc_context(house_style()):
        for fmt in formats:
            target = stem.with_name(f"{stem.name}.{fmt}")   # keeps dots in the stem
            tmp = target.with_name(f".{target.name}.part")
            fig.savefig(tmp, format=fmt, dpi=200, bbox_inches="tight")
            os.replace(tmp, target)
            written.append(target)
    return written


def save_and_close(fig, stem, formats=("png", "svg")) -> list[Path]:
    """:func:`save_figure`, then close ``fig`` (also when saving fails)."""
    try:
        return save_figure(fig, stem, formats)
    finally:
        _pyplot().close(fig)
