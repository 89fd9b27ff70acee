"""Pseudopotentials: analytic forms, form factors and files (layer 3)."""

from .files import (Pseudopotential, bundled_pseudopotentials, default_pseudopotential_file,
                    load_pseudopotential, resolve_pseudopotential)
from .core import PartialCore, fit_partial_core
from .separable import SeparablePart, ProjectorChannel, nonlocal_operator
from .atom import (VALENCE_CONFIGURATIONS, PseudoAtom, radial_basis, solve_pseudo_atom,
                   solve_radial_atom)
from .local import (LOCAL_FORMS, AppelbaumHamann, EmptyCore, EvanescentCore, GaussianLocal,
                    LocalForm)

__all__ = [
    "Pseudopotential", "load_pseudopotential", "default_pseudopotential_file",
    "resolve_pseudopotential", "bundled_pseudopotentials", "LocalForm", "EmptyCore",
    "AppelbaumHamann", "GaussianLocal", "EvanescentCore", "LOCAL_FORMS", "SeparablePart",
    "ProjectorChannel", "nonlocal_operator", "PseudoAtom", "solve_pseudo_atom",
    "solve_radial_atom", "radial_basis", "VALENCE_CONFIGURATIONS",
    "PartialCore", "fit_partial_core",
]
