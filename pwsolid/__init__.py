"""pwsolid: plane-wave Kohn-Sham density-functional calculations for simple solids."""

from ._version import __version__

__all__ = ["__version__"]
