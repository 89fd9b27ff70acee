"""The restart file of a volume scan: finished points in the one store (layer 5).

A scan's finished points go into a :class:`pwsolid.store.RecordLog` of kind
``volume-points`` under the fingerprint of the input crystal and its settings
(the FFT grid left to the settings, since it changes with the volume). Each
point is written the moment it is finished; a re-run with the same file skips
the points it finds converged at tolerances at least as tight as the run's, and
a file of another calculation is refused with the differing fields named
(:mod:`pwsolid.store`), unless the mismatch is accepted on request.
"""

from __future__ import annotations

import math

from ..crystal import Crystal
from ..preflight import load_pseudopotentials
from ..settings import GroundStateSettings
from ..store import RecordLog, fingerprint
from .volume_scan_result import ScanPoint, stress_of_record

__all__ = ["ScanRestart"]

#: Relative tolerance for matching stored volumes and c/a ratios to planned ones.
_KEY_RTOL = 1e-9


def _at(volume: float, c_over_a: float | None):
    """A test for the entry of the point at (volume, c/a)."""
    def match(rec: dict) -> bool:
        if not math.isclose(float(rec["volume_bohr3"]), volume, rel_tol=_KEY_RTOL):
            return False
        q = rec.get("c_over_a")
        if (q is None) != (c_over_a is None):
            return False
        return q is None or math.isclose(float(q), c_over_a, rel_tol=_KEY_RTOL)
    return match


class ScanRestart:
    """Finished points of one scan, read from and written to a restart file.

    Parameters
    ----------
    path
        The restart file (JSON; created at the first finished point).
    crystal, settings
        The scan's input crystal and settings: they make the fingerprint.
    accept_mismatch
        Reuse the points of a file made for another calculation instead of
        refusing it; :attr:`mismatches` then lists the differences.
    """

    def __init__(self, path, crystal: Crystal, settings: GroundStateSettings, *,
                 accept_mismatch: bool = False):
        pps = load_pseudopotentials(crystal.species, settings.pseudopotentials)
        self.settings = settings
        self.log = RecordLog(path, "volume-points", fingerprint(crystal, settings, pps),
                             accept_mismatch=accept_mismatch)
        for i, rec in enumerate(self.log.entries):
            try:
                float(rec["volume_bohr3"]), float(rec["energy_Ha"])
            except (TypeError, KeyError, ValueError):
                from ..errors import InputError
                raise InputError(f"point {i + 1} of the restart file lacks its volume or "
                                 "energy", source=str(path)) from None

    @property
    def mismatches(self) -> tuple[str, ...]:
        return self.log.mismatches

    def reusable(self, volume: float, c_over_a: float | None, stage: int) -> ScanPoint | None:
        """The stored point at (volume, c/a) if it converged at least as tightly as asked.

        A point stored without a stress (a file written before the scan recorded
        the pressure) is reused with ``stress = None``: recomputing the stress
        needs the point's orbitals, that is its whole SCF, so it is left missing.
        """
        rec = self.log.find(_at(volume, c_over_a))
        if rec is None or not rec.get("converged", False):
            return None
        s = self.settings
        if (float(rec.get("energy_tolerance_Ha", math.inf)) > s.energy_tolerance
                or float(rec.get("density_tolerance", math.inf)) > s.density_tolerance):
            return None
        return ScanPoint(volume, c_over_a, float(rec["energy_Ha"]), True,
                         int(rec.get("iterations", 0)), float(rec.get("seconds", 0.0)),
                         resumed=True, stage=stage, notes=tuple(rec.get("notes", ())),
                         stress=stress_of_record(rec))

    def add(self, point: ScanPoint) -> None:
        """Write a finished point (replacing a stored one at the same volume and c/a)."""
        rec = point.as_record()
        rec.pop("reused_from_restart_file")
        rec["energy_tolerance_Ha"] = self.settings.energy_tolerance
        rec["density_tolerance"] = self.settings.density_tolerance
        self.log.add(rec, replaces=_at(point.volume, point.c_over_a))
