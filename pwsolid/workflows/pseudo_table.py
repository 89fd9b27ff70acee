"""Regenerate files of pwsolid's fitted pseudopotential table (layer 5).

:func:`fit_pseudopotential` fits one element of one set (``lda``: Perdew-Zunger 1981,
``pbe``) from its recorded targets (:mod:`pwsolid.pseudo.table`), writes the file with
its record, then measures the cutoff at which the energy per atom of the element's
reference solid is converged to 1 meV and 0.1 meV (against the largest cutoff of the
targets' list, at the solid's fixed lattice constant and k-point mesh) and rewrites the
file with that measurement and the 1 meV cutoff as its suggested cutoff.

Resume: a file whose recorded fingerprint equals that of the present targets and
functional is not refitted; if its cutoff measurement is there too, nothing is done
(unless ``refit``). A PBE fit starts from the LDA file's parameters when that exists
(the targets' start otherwise).
"""

from __future__ import annotations

import datetime
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

from .. import crystal as crystal_builders
from .._version import __version__
from ..errors import ConvergenceWarning, InputError
from ..pseudo.files import Pseudopotential
from ..pseudo.fitting import separable_form
from ..pseudo.separable import SeparablePart
from ..pseudo.table import (TABLE_SETS, FitTargets, TableFit, entry_file_text, entry_record,
                            evaluate_entry, fit_entry, load_targets, read_record, table_file,
                            targets_fingerprint)
from ..safe_files import atomic_write_bytes
from ..scf import ground_state
from ..settings import GroundStateSettings
from ..units import BOHR_ANGSTROM, HARTREE_EV

__all__ = ["TableEntryResult", "fit_pseudopotential", "cutoff_convergence", "STRUCTURES"]

#: reference-solid builders by the name used in the targets
STRUCTURES = {"diamond": crystal_builders.diamond,
              "face_centred_cubic": crystal_builders.face_centred_cubic,
              "body_centred_cubic": crystal_builders.body_centred_cubic,
              "simple_cubic": crystal_builders.simple_cubic}
_MEV = 1e-3 / HARTREE_EV


@dataclass
class TableEntryResult:
    """What :func:`fit_pseudopotential` did.

    Attributes
    ----------
    element, set_name : str
    path : Path
        The written (or current) file.
    fit : TableFit or None
        None when the file was current and nothing was refitted.
    record : dict
        The file's ``[fit_record]``.
    converged : bool
        The fit converged and met its goals, and the cutoff measurement (if asked) ran.
    messages : list of str
    """

    element: str
    set_name: str
    path: Path
    fit: TableFit | None
    record: dict
    converged: bool
    messages: list = field(default_factory=list)


def _pseudopotential(targets: FitTargets, parameters) -> Pseudopotential:
    local, channels = separable_form(targets.valence, parameters)
    return Pseudopotential(element=targets.element, valence=targets.valence, local=local,
                           form="goedecker-teter-hutter", separable=SeparablePart(channels))


def cutoff_convergence(targets: FitTargets, functional: str, parameters, *,
                       progress: Callable | None = None) -> dict:
    """Energy per atom of the reference solid over the targets' cutoffs.

    Returns the record: structure, lattice (angstrom), mesh, smearing, ``energies_eV``
    (pairs cutoff Ha, E - E(largest cutoff) in meV per atom) and the smallest cutoffs
    from which on every larger one stays within 1 meV and 0.1 meV.
    """
    solid = dict(targets.solid)
    if solid.get("structure") not in STRUCTURES:
        raise InputError(f"reference solid structure must be one of {', '.join(STRUCTURES)}",
                         key=f"{targets.element}.solid.structure", value=solid.get("structure"))
    if not targets.cutoffs:
        raise InputError("no cutoffs to measure", key=f"{targets.element}.cutoffs")
    crystal = STRUCTURES[solid["structure"]](float(solid["lattice"]) / BOHR_ANGSTROM,
                                             targets.element)
    pp = _pseudopotential(targets, parameters)
    cutoffs = sorted(targets.cutoffs)
    energies = []
    for i, cutoff in enumerate(cutoffs):
        settings = GroundStateSettings(
            cutoff=cutoff, kpoint_mesh=(int(solid.get("mesh", 2)),) * 3,
            smearing=solid.get("smearing", "none"), smearing_width=0.01, functional=functional,
            pseudopotentials={targets.element: pp}, max_iterations=80, energy_tolerance=1e-9)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            gs = ground_state(crystal, settings)
        energies.append(gs.free_energy / crystal.n_atoms)
        if progress is not None:
            progress(i + 1, len(cutoffs), f"{cutoff:g} Ha")
    reference = energies[-1]
    changes = [e - reference for e in energies]

    def converged_from(tolerance):
        best = cutoffs[-1]
        for c, d in reversed(list(zip(cutoffs, changes))):
            if abs(d) > tolerance:
                break
            best = c
        return best

    return {"structure": solid["structure"], "lattice_angstrom": float(solid["lattice"]),
            "mesh": int(solid.get("mesh", 2)), "smearing": solid.get("smearing", "none"),
            "energy_change_meV_per_atom": [[c, round(d / _MEV, 5)] for c, d in zip(cutoffs, changes)],
            "reference_cutoff_Ha": cutoffs[-1],
            "cutoff_1meV_Ha": converged_from(_MEV),
            "cutoff_0p1meV_Ha": converged_from(0.1 * _MEV),
            "note": "the last cutoff is the reference: a converged cutoff equal to it is "
                    "not demonstrated"}


def _write(path: Path, targets, set_name, parameters, record, suggested) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    atomic_write_bytes(path, entry_file_text(targets, set_name, parameters, record,
                                             suggested).encode())


def fit_pseudopotential(element: str, set_name: str = "lda", *, targets_file=None,
                        output=None, refit: bool = False, measure_cutoff: bool = True,
                        log: Callable[[str], None] | None = None,
                        progress: Callable | None = None) -> TableEntryResult:
    """Fit (or resume) one table file; see the module notes.

    Parameters
    ----------
    element : str
    set_name : {"lda", "pbe"}
    targets_file : path, optional
        Target specifications (default the bundled ``fitted-table/targets.toml``).
    output : path, optional
        Where to write (default the bundled table directory).
    refit : bool
        Fit again even when the file is current.
    measure_cutoff : bool
        Run the reference-solid cutoff measurement.
    log : callable(str), optional
        Fit progress lines.
    progress : callable(done, total, note), optional
    """
    if set_name not in TABLE_SETS:
        raise InputError(f"unknown table set; accepted: {', '.join(TABLE_SETS)}", key="set",
                         value=set_name)
    functional = TABLE_SETS[set_name]
    targets = load_targets(element, targets_file)
    path = Path(output) if output else table_file(element, set_name)
    fingerprint = targets_fingerprint(targets, functional)
    say = log or (lambda text: None)
    existing = read_record(path) if path.is_file() else None
    current = (existing is not None and not refit
               and existing["record"].get("summary", {}).get("fingerprint") == fingerprint)
    messages = []
    date = datetime.date.today().isoformat()
    if current:
        parameters = existing["parameters"]
        record = existing["record"]
        fit = None
        say(f"{path}: current (fingerprint matches); fit not repeated")
        if "cutoff" in record or not measure_cutoff:
            return TableEntryResult(element, set_name, path, None, record,
                                    bool(record["summary"].get("meets_goals")), ["current"])
        fit = evaluate_entry(targets, functional, parameters)
    else:
        start = None
        if set_name != "lda":
            lda = read_record(table_file(element, "lda"))
            if lda is not None and set(lda["parameters"]) == set(targets.start):
                start = lda["parameters"]
                say("starting from the LDA file's parameters")
        fit = fit_entry(targets, functional, start, log=say)
        parameters = fit.parameters
        record = entry_record(targets, set_name, fit, version=__version__, date=date)
        _write(path, targets, set_name, parameters, record, None)
        say(f"wrote {path} (fit; cutoff not yet measured)")
    if not fit.meets_goals:
        de, dq = fit.worst()
        messages.append(f"goals not met: worst {de * 1e3:.2f} mHa, {dq:.4f} e, ghost-free "
                        f"{fit.ghost['ghost_free']}")
    suggested = None
    if measure_cutoff:
        cutoff = cutoff_convergence(targets, functional, parameters, progress=progress)
        record = entry_record(targets, set_name, fit, cutoff, version=__version__, date=date)
        suggested = cutoff["cutoff_1meV_Ha"]
        _write(path, targets, set_name, parameters, record, suggested)
        say(f"wrote {path} (cutoff 1 meV: {cutoff['cutoff_1meV_Ha']:g} Ha, 0.1 meV: "
            f"{cutoff['cutoff_0p1meV_Ha']:g} Ha)")
    return TableEntryResult(element, set_name, path, fit, record,
                            fit.converged and fit.meets_goals, messages)
