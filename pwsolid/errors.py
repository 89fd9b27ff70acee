"""Error and warning types shared by the whole package (layer 0).

User mistakes raise :class:`InputError`, whose message names the file, the key,
the offending value and what is accepted. Numerical trouble that the user can act
on raises :class:`ConvergenceError` or warns with :class:`ConvergenceWarning`.
"""

from __future__ import annotations

__all__ = [
    "PwsolidError",
    "InputError",
    "ConvergenceError",
    "ConvergenceWarning",
    "EXIT_OK",
    "EXIT_USAGE",
    "EXIT_INVALID_INPUT",
    "EXIT_NOT_CONVERGED",
    "EXIT_INTERNAL",
]

#: Exit codes of the command line (documented in the README).
EXIT_OK = 0
EXIT_USAGE = 2
EXIT_INVALID_INPUT = 3
EXIT_NOT_CONVERGED = 4
EXIT_INTERNAL = 70


class PwsolidError(Exception):
    """Base class of every error the package raises on purpose."""


class InputError(PwsolidError, ValueError):
    """A user mistake in an input file, a setting or an argument.

    Parameters
    ----------
    message
        What is wrong and what is accepted.
    key
        Dotted key of the offending setting, e.g. ``"basis.cutoff"``.
    value
        The offending value as given by the user.
    source
        File the value came from (or ``None`` for the Python API).
    """

    def __init__(self, message: str, *, key: str | None = None, value=None,
                 source: str | None = None, has_value: bool | None = None):
        self.reason = message
        self.key = key
        self.value = value
        self.source = source
        self._has_value = has_value if has_value is not None else value is not None
        super().__init__(self._compose())

    def _compose(self) -> str:
        where = []
        if self.source:
            where.append(str(self.source))
        if self.key:
            where.append(f"key '{self.key}'")
        head = ": ".join(where)
        val = f" (got {self.value!r})" if self._has_value else ""
        return f"{head}: {self.reason}{val}" if head else f"{self.reason}{val}"

    def with_source(self, source: str) -> "InputError":
        """Return the same error attributed to ``source`` (a file name)."""
        return InputError(self.reason, key=self.key, value=self.value, source=source,
                          has_value=self._has_value)


class ConvergenceError(PwsolidError, RuntimeError):
    """An iterative procedure failed in a way the caller asked to be fatal."""


class ConvergenceWarning(UserWarning):
    """An iterative procedure stopped before meeting its tolerance."""
