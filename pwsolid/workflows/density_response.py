"""Static density response of jellium against Lindhard plus the functional's kernel (layer 5).

A weak external potential 2 v cos(q z) is applied to a jellium cell elongated along z;
the self-consistent density answers with delta n(q) = chi(q) v. For the uniform gas in
the local density approximation, linear response gives

    chi(q) = chi_0(q) / (1 - [4 pi / q^2 + f_xc] chi_0(q)),

with chi_0 the Lindhard function of the non-interacting gas (both spins),
chi_0(q) = -(k_F / pi^2) [1/2 + (1 - x^2)/(4x) ln|(1 + x)/(1 - x)|], x = q / 2k_F, and
f_xc = d^2(n eps_xc)/dn^2 the functional's local-field kernel. The comparison checks
the engine (kinetic response, Hartree, smearing, k-sampling) and the functional together.

References
----------
J. Lindhard, K. Dan. Vidensk. Selsk. Mat.-Fys. Medd. 28, 8 (1954).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..crystal import Crystal
from ..scf import ground_state, prepare
from ..settings import GroundStateSettings
from ..xc import get_functional

__all__ = ["RESPONSE_SCHEMA", "lindhard", "xc_kernel", "ResponsePoint", "StaticResponse",
           "static_response"]

RESPONSE_SCHEMA = "pwsolid.static-response/1"


def lindhard(q: float, k_fermi: float) -> float:
    """Static Lindhard function chi_0(q) of the unpolarised gas, both spins (bohr^-3 / Ha)."""
    x = q / (2 * k_fermi)
    if abs(x - 1) < 1e-12:
        return -k_fermi / math.pi ** 2 * 0.5
    return -k_fermi / math.pi ** 2 * (0.5 + (1 - x * x) / (4 * x) * math.log(abs((1 + x) / (1 - x))))


def xc_kernel(density: float, functional="lda-pw92") -> float:
    """f_xc = d^2(n eps_xc)/dn^2 at a uniform density, by central differences (Ha bohr^3)."""
    f = get_functional(functional)

    def energy_density(n):
        return n * float(f.evaluate(np.array([n]))[0][0])

    h = 1e-4 * density
    return (energy_density(density + h) - 2 * energy_density(density)
            + energy_density(density - h)) / (h * h)


@dataclass(frozen=True)
class ResponsePoint:
    harmonic: int
    q: float                 # 1/bohr
    measured: float          # delta n(q) / v, bohr^-3 / Ha
    measured_half_amplitude: float | None
    theory: float            # Lindhard + Hartree + f_xc
    random_phase: float      # Lindhard + Hartree only

    @property
    def relative_error(self) -> float:
        return self.measured / self.theory - 1


@dataclass(frozen=True)
class StaticResponse:
    rs: float
    functional: str
    k_fermi: float
    points: tuple[ResponsePoint, ...]

    def as_document(self) -> dict:
        return {
            "schema": RESPONSE_SCHEMA, "wigner_seitz_radius_bohr": self.rs,
            "functional": self.functional, "fermi_wavevector_per_bohr": self.k_fermi,
            "rows": [{"harmonic": p.harmonic, "q_over_kF": p.q / self.k_fermi,
                      "measured": p.measured, "measured_half_amplitude": p.measured_half_amplitude,
                      "lindhard_with_kernel": p.theory, "lindhard_random_phase": p.random_phase,
                      "relative_error": p.relative_error} for p in self.points],
        }


def static_response(rs: float = 3.0, harmonics=(2, 3, 4, 5), *, elongation: int = 6,
                    mesh=(16, 16, 3), amplitude: float = 1e-3, functional="lda-pw92",
                    smearing_width: float = 0.003, check_linearity: bool = True,
                    progress=None) -> StaticResponse:
    """Measure chi(q) for q = 2 pi j / L_z, j in ``harmonics``, in a jellium cell of
    ``elongation`` simple cubes (2 electrons each) stacked along z.

    ``check_linearity`` repeats each point at half the amplitude (linear regime: the
    same chi).
    """
    electrons_per_cube = 2
    side = (electrons_per_cube * 4 * math.pi / 3 * rs ** 3) ** (1 / 3)
    cell = Crystal(np.diag([side, side, elongation * side]), (), np.zeros((0, 3)))
    n0 = 3 / (4 * math.pi * rs ** 3)
    k_f = (3 * math.pi ** 2 * n0) ** (1 / 3)
    f_xc = xc_kernel(n0, functional)
    settings = GroundStateSettings(
        cutoff=max(3.0, 15 * 0.5 * k_f ** 2), kpoint_mesh=tuple(mesh), smearing="fermi-dirac",
        smearing_width=smearing_width, background_electrons=electrons_per_cube * elongation,
        functional=functional)
    points = []
    runs = len(harmonics) * (2 if check_linearity else 1)
    done = 0
    for j in harmonics:
        q = 2 * math.pi * j / (elongation * side)
        measured = []
        for amp in ((amplitude, amplitude / 2) if check_linearity else (amplitude,)):
            def potential(shape, amp=amp):
                z = np.arange(shape[2]) / shape[2]
                return np.broadcast_to(2 * amp * np.cos(2 * math.pi * j * z), shape).copy()
            setup = prepare(cell, settings, external_potential=potential)
            gs = ground_state(cell, settings, setup=setup)
            coeff = np.fft.fftn(gs.density)[0, 0, j] / gs.density.size
            measured.append(float(coeff.real) / amp)
            done += 1
            if progress is not None:
                progress(done, runs)
        chi0 = lindhard(q, k_f)
        points.append(ResponsePoint(
            j, q, measured[0], measured[1] if check_linearity else None,
            chi0 / (1 - (4 * math.pi / q ** 2 + f_xc) * chi0),
            chi0 / (1 - 4 * math.pi / q ** 2 * chi0)))
    name = functional if isinstance(functional, str) else get_functional(functional).name
    return StaticResponse(float(rs), name, k_f, tuple(points))
