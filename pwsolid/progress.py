"""A plain-text progress bar for long work (layer 0).

Workflows take a ``progress(done, total)`` callable; the command line passes a
:class:`ProgressBar`, notebooks may pass their own. On a terminal the bar
redraws in place; elsewhere (logs, CI) it prints a line at each step.
"""

from __future__ import annotations

import sys
import time

__all__ = ["ProgressBar"]


class ProgressBar:
    """Callable ``bar(done, total, note="")`` drawing ``label [#####.....] 5/10 note``."""

    def __init__(self, label: str, *, stream=None, width: int = 28):
        self.label = label
        self.stream = stream if stream is not None else sys.stderr
        self.width = width
        self._start = time.perf_counter()
        self._tty = bool(getattr(self.stream, "isatty", lambda: False)())

    def __call__(self, done: int, total: int, note: str = "") -> None:
        total = max(int(total), 1)
        done = min(max(int(done), 0), total)
        filled = int(round(self.width * done / total))
        elapsed = time.perf_counter() - self._start
        bar = "#" * filled + "." * (self.width - filled)
        text = f"{self.label} [{bar}] {done}/{total} {elapsed:6.1f} s {note}".rstrip()
        if self._tty:
            end = "\n" if done == total else ""
            self.stream.write("\r" + text + end)
        else:
            self.stream.write(text + "\n")
        self.stream.flush()
