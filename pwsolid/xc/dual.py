"""Forward-mode dual numbers over numpy arrays (layer 1).

A :class:`Dual` carries a value array and its first derivatives with respect to a
few independent variables (``d[k]`` is the derivative by variable ``k``). Writing
a functional's energy density once with duals gives the energy and all its partial
derivatives exactly (to rounding), without a hand-written derivative for every
formula and without finite differences. Used by the meta-GGA kernels
(:mod:`pwsolid.xc.meta_gga`), whose formulas have many branches.

Only what those kernels need is here: arithmetic, powers, ``exp``, ``log``,
``log1p``, ``sqrt`` and a branch ``where``.
"""

from __future__ import annotations

import numpy as np

__all__ = ["Dual", "variables", "exp", "log", "log1p", "sqrt", "where", "value"]


class Dual:
    """``v + sum_k d[k] e_k`` with ``v`` of any shape and ``d`` of shape ``(k, *v.shape)``."""

    __slots__ = ("v", "d")
    __array_priority__ = 1000

    def __init__(self, v, d):
        self.v = v
        self.d = d

    # -- arithmetic ------------------------------------------------------------
    def __add__(self, other):
        if isinstance(other, Dual):
            return Dual(self.v + other.v, self.d + other.d)
        return Dual(self.v + other, self.d)

    __radd__ = __add__

    def __neg__(self):
        return Dual(-self.v, -self.d)

    def __sub__(self, other):
        if isinstance(other, Dual):
            return Dual(self.v - other.v, self.d - other.d)
        return Dual(self.v - other, self.d)

    def __rsub__(self, other):
        return Dual(other - self.v, -self.d)

    def __mul__(self, other):
        if isinstance(other, Dual):
            return Dual(self.v * other.v, self.d * other.v + other.d * self.v)
        return Dual(self.v * other, self.d * other)

    __rmul__ = __mul__

    def __truediv__(self, other):
        if isinstance(other, Dual):
            inv = 1.0 / other.v
            v = self.v * inv
            return Dual(v, (self.d - other.d * v) * inv)
        return Dual(self.v / other, self.d / other)

    def __rtruediv__(self, other):
        inv = 1.0 / self.v
        v = other * inv
        return Dual(v, -self.d * (v * inv))

    def __pow__(self, exponent):
        if isinstance(exponent, Dual):
            return exp(exponent * log(self))
        if exponent == 2:
            return self * self
        v = self.v ** exponent
        return Dual(v, self.d * (exponent * self.v ** (exponent - 1)))

    def __rpow__(self, base):
        v = base ** self.v
        return Dual(v, self.d * (v * np.log(base)))

    # comparisons act on the value (for branches)
    def __lt__(self, other):
        return self.v < value(other)

    def __le__(self, other):
        return self.v <= value(other)

    def __gt__(self, other):
        return self.v > value(other)

    def __ge__(self, other):
        return self.v >= value(other)

    def __repr__(self) -> str:  # pragma: no cover - debugging aid
        return f"Dual(v={self.v!r}, d={self.d!r})"


def value(x):
    """The value of a dual, or ``x`` itself."""
    return x.v if isinstance(x, Dual) else x


def variables(*arrays) -> list[Dual]:
    """Independent variables: dual ``i`` has derivative 1 by variable ``i`` only."""
    arrays = [np.asarray(a, dtype=np.float64) for a in arrays]
    shape = np.broadcast_shapes(*(a.shape for a in arrays))
    out = []
    for i, a in enumerate(arrays):
        d = np.zeros((len(arrays), *shape))
        d[i] = 1.0
        out.append(Dual(np.broadcast_to(a, shape).copy(), d))
    return out


def exp(x):
    if isinstance(x, Dual):
        v = np.exp(x.v)
        return Dual(v, x.d * v)
    return np.exp(x)


def log(x):
    if isinstance(x, Dual):
        return Dual(np.log(x.v), x.d / x.v)
    return np.log(x)


def log1p(x):
    if isinstance(x, Dual):
        return Dual(np.log1p(x.v), x.d / (1.0 + x.v))
    return np.log1p(x)


def sqrt(x):
    if isinstance(x, Dual):
        v = np.sqrt(x.v)
        return Dual(v, x.d * (0.5 / v))
    return np.sqrt(x)


def where(condition, a, b):
    """``a`` where ``condition`` else ``b`` (values and derivatives alike)."""
    if not isinstance(a, Dual) and not isinstance(b, Dual):
        return np.where(condition, a, b)
    if not isinstance(a, Dual):
        a = Dual(np.broadcast_to(a, b.v.shape), np.zeros_like(b.d))
    if not isinstance(b, Dual):
        b = Dual(np.broadcast_to(b, a.v.shape), np.zeros_like(a.d))
    return Dual(np.where(condition, a.v, b.v), np.where(condition, a.d, b.d))
