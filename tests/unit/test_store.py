"""The one store (pwsolid.store): one fingerprint for every saved file, refusals that
name what differs, and files that are refused whole when damaged or foreign.

Every check here is an identity of the file layer (common practice for file formats:
a record read back under another calculation, or damaged, must never be used), so
no SCF runs: records are written by the real writers from prepared set-ups with
stand-in arrays, and read back through the real readers (the SCF's resume, the
density reader, the volume scan's restart file).
"""

import dataclasses
import json
import os
import stat
import warnings
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest

import pwsolid.store as store
from conftest import LOCAL_SILICON
from pwsolid.crystal import Crystal, diamond
from pwsolid.errors import EXIT_INVALID_INPUT, ConvergenceWarning, InputError
from pwsolid.mixing import PulayMixer
from pwsolid.pseudo import PartialCore, load_pseudopotential, resolve_pseudopotential
from pwsolid.scf import ground_state, prepare
from pwsolid.settings import GroundStateSettings
from pwsolid.workflows.equation_of_state import scan_volumes

SI = diamond(10.26, "Si")
BASE = GroundStateSettings(cutoff=5.0, kpoint_mesh=(2, 2, 2), kpoint_shift=(0, 0, 0),
                           pseudopotentials=LOCAL_SILICON)
SI_FILE = resolve_pseudopotential("Si", "Si-appelbaum-hamann.toml")


def _model_solver(crystal, settings, warm):
    # a parabola in volume with its minimum inside the scan: no range extension
    e = -7.9 + 1e-4 * (crystal.volume - SI.volume) ** 2
    return SimpleNamespace(total_energy=e, converged=True, iterations=1, density=None)


# --- writers of each kind, from a crystal and settings -------------------------------

def _write_checkpoint(path, crystal, settings):
    setup = prepare(crystal, settings)
    shape = setup.grid_shape if setup.n_spin == 1 else (2, *setup.grid_shape)
    state = SimpleNamespace(density=np.full(shape, 0.03), wavefunctions=None, eigenvalues=None,
                            iteration=1, applications=10,
                            history=[{"iteration": 1, "density_residual": 0.1,
                                      "free_energy_Ha": -7.9, "energy_change_Ha": None}])
    store.save_checkpoint(path, setup, state, PulayMixer(0.5, 4))


def _read_checkpoint(path, crystal, settings, **kw):
    # the SCF resumes (or refuses) before its first iteration; the checkpoint holds
    # iteration 1, so max_iterations = 2 stops an accepted run after one more
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        return ground_state(crystal, settings.replace(max_iterations=2), checkpoint=path, **kw)


def _write_density(path, crystal, settings):
    setup = prepare(crystal, settings)
    store.save_density(path, SimpleNamespace(setup=setup, density=np.full(setup.grid_shape, 0.03),
                                             spin_densities=None))


def _read_density(path, crystal, settings, **kw):
    return store.load_density(path, prepare(crystal, settings), **kw)


def _write_points(path, crystal, settings):
    scan_volumes(crystal, settings, n_points=5, solver=_model_solver, store=path)


def _read_points(path, crystal, settings, **kw):
    return scan_volumes(crystal, settings, n_points=5, solver=_model_solver, store=path, **kw)


KINDS = {
    "checkpoint": (".npz", _write_checkpoint, _read_checkpoint),
    "density": (".npz", _write_density, _read_density),
    "scan points": (".json", _write_points, _read_points),
}


# --- what defines a calculation ------------------------------------------------------

def test_every_setting_is_either_physics_or_path_only():
    read = {s for f in store.IDENTITY_FIELDS for s in f.settings}
    fields = {f.name for f in dataclasses.fields(GroundStateSettings)}
    assert read.isdisjoint(store.PATH_ONLY_SETTINGS)
    assert read | set(store.PATH_ONLY_SETTINGS) == fields


def _edited_pseudopotential(tmp_path):
    # the same parameters, one more comment line: other file contents
    path = tmp_path / "Si-edited.toml"
    path.write_text(Path(SI_FILE).read_text() + "\n# edited\n")
    return {"Si": str(path)}


def _with_core(tmp_path):
    pp = load_pseudopotential(SI_FILE)
    return {"Si": dataclasses.replace(pp, partial_core=PartialCore(0.5, 1.0))}


def _shifted_atoms():
    return Crystal(SI.lattice, SI.species, SI.positions + [0.01, 0.0, 0.0])


SMEARED = dict(smearing="cold", smearing_width=0.01)
SPIN = dict(smearing="cold", smearing_width=0.01, spin_polarized=True)
# field -> (base crystal, base settings changes, changed crystal, changed settings changes)
PHYSICS = {
    "lattice_bohr": (None, {}, SI.scaled(1.01), {}),
    "species": (None, {}, diamond(10.26, "Ge"),
                {"pseudopotentials": {"Ge": "Ge-hartwigsen-goedecker-hutter.toml"}}),
    "fractional_positions": (None, {}, _shifted_atoms(), {}),
    "cutoff_Ha": (None, {}, None, {"cutoff": 6.0}),
    "fft_grid": (None, {}, None, {"fft_grid": (18, 18, 18)}),
    "kpoint_mesh": (None, {}, None, {"kpoint_mesh": (3, 3, 3)}),
    "kpoint_shift": (None, {}, None, {"kpoint_shift": (0.5, 0.5, 0.5)}),
    "use_symmetry": (None, {}, None, {"use_symmetry": False}),
    "functional": (None, {}, None, {"functional": "lda-pw92"}),
    "pseudopotentials": (None, {}, None, "edited"),
    "partial_core": (None, {}, None, "core"),
    "smearing": (None, SMEARED, None, {"smearing": "gaussian"}),
    "smearing_width_Ha": (None, SMEARED, None, {"smearing_width": 0.02}),
    "smearing_order": (None, dict(smearing="methfessel-paxton"), None, {"smearing_order": 2}),
    "spin_polarized": (None, SMEARED, None, {"spin_polarized": True}),
    "initial_moment": (None, SPIN, None, {"initial_moment": 1.0}),
    "fixed_moment": (None, SPIN, None, {"fixed_moment": 2.0}),
    "background_electrons": (None, {}, None, {"background_electrons": 2.0}),
    "result_schema": (None, {}, None, "schema"),
}


def test_the_table_covers_every_identity_field():
    assert set(PHYSICS) == {f.name for f in store.IDENTITY_FIELDS}


@pytest.mark.parametrize("kind", KINDS)
@pytest.mark.parametrize("field", PHYSICS)
def test_a_changed_physics_field_is_refused_by_name(field, kind, tmp_path, monkeypatch):
    suffix, write, read = KINDS[kind]
    base_crystal, base_changes, crystal, changes = PHYSICS[field]
    base = BASE.replace(**base_changes)
    path = tmp_path / f"record{suffix}"
    write(path, base_crystal or SI, base)
    before = path.read_bytes()
    if changes == "edited":
        changes = {"pseudopotentials": _edited_pseudopotential(tmp_path)}
    elif changes == "core":
        changes = {"pseudopotentials": _with_core(tmp_path)}
    elif changes == "schema":
        monkeypatch.setattr(store, "RESULT_SCHEMA", "pwsolid.ground-state/2")
        changes = {}
    with pytest.raises(InputError) as err:
        read(path, crystal or base_crystal or SI, base.replace(**changes))
    message = str(err.value)
    assert f"{field} differs: file " in message and str(path) in message
    assert "different calculation" in message
    assert path.read_bytes() == before                     # nothing overwritten


def test_the_message_gives_both_values():
    fp = store.fingerprint(SI, BASE, {"Si": load_pseudopotential(SI_FILE)})
    stored = dict(fp.values, functional="lda-pz81")
    mine = store.fingerprint(SI, BASE.replace(functional="lda-pw92"),
                             {"Si": load_pseudopotential(SI_FILE)})
    assert mine.differences(stored) == ("functional differs: file lda-pz81, input lda-pw92",)


@pytest.mark.parametrize("kind", KINDS)
def test_changes_that_do_not_touch_the_physics_are_accepted(kind, tmp_path):
    suffix, write, read = KINDS[kind]
    path = tmp_path / f"record{suffix}"
    write(path, SI, BASE)
    # another output name for the same file, the same pseudopotential contents under
    # another file name, and path-only settings (iteration cap, mixing, bands)
    moved = tmp_path / "sub" / f"renamed{suffix}"
    moved.parent.mkdir()
    path.rename(moved)
    copy = tmp_path / "Si-copy.toml"
    copy.write_bytes(Path(SI_FILE).read_bytes())
    settings = BASE.replace(pseudopotentials={"Si": str(copy)}, mixing_weight=0.3,
                            mixing_history=5, empty_bands=6, max_iterations=77)
    read(moved, SI, settings)


@pytest.mark.parametrize("kind", KINDS)
def test_an_accepted_mismatch_is_reported(kind, tmp_path):
    suffix, write, read = KINDS[kind]
    path = tmp_path / f"record{suffix}"
    write(path, SI, BASE)
    out = read(path, SI, BASE.replace(functional="lda-pw92"), accept_mismatch=True)
    lines = out["mismatches"] if kind == "density" else out.messages
    assert any("functional differs: file lda-pz81, input lda-pw92" in m for m in lines)
    if kind == "scan points":
        # nothing new was written: the file is still the other calculation's
        with pytest.raises(InputError, match="functional differs"):
            read(path, SI, BASE.replace(functional="lda-pw92"))
        # more points written into it: it holds points of two calculations and says so
        # from then on
        pw92 = BASE.replace(functional="lda-pw92")
        scan_volumes(SI, pw92, n_points=7, solver=_model_solver, store=path,
                     accept_mismatch=True)
        again = read(path, SI, pw92)
        assert any("functional differs: file lda-pz81" in m for m in again.messages)


# --- damaged and foreign files -------------------------------------------------------

def _future(path: Path):
    """The same file with a schema version one above this program's."""
    if path.suffix == ".json":
        doc = json.loads(path.read_text())
        entries = doc.pop("points")
        doc.pop("checksum")
        doc["schema_version"] += 1
        doc["checksum"] = store.hashlib.sha256(store._canonical(doc)).hexdigest()
        doc["points"] = entries
        path.write_text(json.dumps(doc))
        return
    with np.load(path, allow_pickle=False) as data:
        arrays = {k: data[k] for k in data.files}
    header = json.loads(str(arrays.pop("header")))
    header.pop("checksum")
    header["schema_version"] += 1
    header["checksum"] = store._seal(arrays, header)
    np.savez_compressed(path, header=np.array(json.dumps(header)), **arrays)


def _damage(path: Path, how: str, tmp_path):
    raw = bytearray(path.read_bytes())
    if how == "truncated":
        path.write_bytes(bytes(raw[: len(raw) // 2]))
    elif how == "bit-flipped":
        if path.suffix == ".json":
            at = raw.index(b'"energy_Ha": ') + len(b'"energy_Ha": -7.9')
        else:
            at = len(raw) // 2
        raw[at] ^= 0x01
        path.write_bytes(bytes(raw))
    elif how == "random bytes":
        path.write_bytes(np.random.default_rng(3).bytes(len(raw)))
    elif how == "another kind":
        other = tmp_path / "other.npz"
        store.save_record(other, "phonon-displacements", store.Fingerprint({}),
                          {"x": np.zeros(3)})
        if path.suffix == ".json":
            path.unlink()
            store.RecordLog(path, "relaxation-trajectory", store.Fingerprint({})).add({"step": 0})
        else:
            path.write_bytes(other.read_bytes())
    elif how == "future schema":
        _future(path)


DAMAGE = ("truncated", "bit-flipped", "random bytes", "another kind", "future schema")
WORDS = {"truncated": "corrupted", "bit-flipped": "corrupted", "random bytes": "corrupted",
         "another kind": "not a", "future schema": "newer pwsolid"}


@pytest.mark.parametrize("kind", KINDS)
@pytest.mark.parametrize("how", DAMAGE)
def test_damaged_or_foreign_files_are_refused_and_kept(kind, how, tmp_path):
    suffix, write, read = KINDS[kind]
    path = tmp_path / f"record{suffix}"
    write(path, SI, BASE)
    _damage(path, how, tmp_path)
    before = path.read_bytes()
    with pytest.raises(InputError) as err:
        read(path, SI, BASE)
    message = str(err.value)
    assert str(path) in message and WORDS[how] in message
    assert "pickle" not in message                       # never advise unsafe loading
    assert path.read_bytes() == before                   # nothing overwritten


def test_files_of_the_first_layout_are_refused_as_older(tmp_path):
    # the layout before the one store: a density archive with its own format name, and
    # a restart file with only a digest of the settings
    old = tmp_path / "old.density.npz"
    np.savez_compressed(old, density=np.zeros((2, 2, 2)), metadata=np.array(json.dumps(
        {"format": "pwsolid.density/1", "checksum": "0"})))
    with pytest.raises(InputError, match="older pwsolid"):
        store.load_density(old)
    points = tmp_path / "old.eos-points.json"
    points.write_text(json.dumps({"format": "pwsolid.volume-points/1", "points": []}))
    with pytest.raises(InputError, match="older pwsolid"):
        _read_points(points, SI, BASE)


@pytest.mark.parametrize("kind", ["relaxation-step", "phonon-displacements"])
@pytest.mark.parametrize("how", DAMAGE)
def test_records_of_the_coming_kinds_are_checked_the_same_way(kind, how, tmp_path):
    fp = store.fingerprint(SI, BASE, {"Si": load_pseudopotential(SI_FILE)})
    path = tmp_path / "record.npz"
    store.save_record(path, kind, fp, {"positions": np.arange(6.0).reshape(2, 3)},
                      {"step": 3})
    back = store.load_record(path, kind, fp)
    assert back.metadata == {"step": 3} and np.array_equal(back.arrays["positions"],
                                                           np.arange(6.0).reshape(2, 3))
    _damage(path, how, tmp_path)
    if how == "another kind" and kind == "phonon-displacements":
        # _damage's foreign record is itself a displacement set: use a relaxation step
        store.save_record(path, "relaxation-step", store.Fingerprint({}), {"x": np.zeros(2)})
    with pytest.raises(InputError, match=WORDS[how]):
        store.load_record(path, kind, fp)


def _pushed_apart(crystal, previous=None):
    """A stand-in evaluation (no SCF): opposite forces of 0.1 Ha/bohr on the two atoms,
    never below a threshold, so that a relaxation leaves its checkpoint behind."""
    from pwsolid.workflows.relaxation import Evaluation

    return Evaluation(-7.9, np.array([[0.1, 0.0, 0.0], [-0.1, 0.0, 0.0]]), np.zeros((3, 3)))


def _relaxation_with(path, crystal, settings, relax=None):
    from pwsolid.workflows.relaxation import RelaxationSettings, relax_structure

    relax = relax or RelaxationSettings(max_steps=1, keep_symmetry=False)
    return relax_structure(crystal, settings, relax, evaluator=_pushed_apart, checkpoint=path)


@pytest.mark.parametrize("how", DAMAGE)
def test_damaged_or_foreign_relaxation_checkpoints_are_refused_and_kept(how, tmp_path):
    # written and read by the relaxation workflow itself (a relaxation-step record)
    path = tmp_path / "relax.npz"
    _relaxation_with(path, SI, BASE)
    assert store.load_record(path, "relaxation-step", None).metadata["history"]
    _damage(path, how, tmp_path)
    before = path.read_bytes()
    with pytest.raises(InputError) as err:
        _relaxation_with(path, SI, BASE)
    assert str(path) in str(err.value) and WORDS[how] in str(err.value)
    assert "pickle" not in str(err.value)
    assert path.read_bytes() == before


@pytest.mark.parametrize("field", ["functional", "cutoff_Ha", "fractional_positions",
                                   "relaxation.moves", "relaxation.force_threshold_Ha_per_bohr"])
def test_a_relaxation_checkpoint_of_another_calculation_is_refused_by_name(field, tmp_path):
    from pwsolid.workflows.relaxation import RelaxationSettings

    path = tmp_path / "relax.npz"
    _relaxation_with(path, SI, BASE)
    before = path.read_bytes()
    crystal, settings = SI, BASE
    relax = RelaxationSettings(max_steps=1, keep_symmetry=False)
    if field == "functional":
        settings = BASE.replace(functional="lda-pw92")
    elif field == "cutoff_Ha":
        settings = BASE.replace(cutoff=6.0)
    elif field == "fractional_positions":
        crystal = _shifted_atoms()
    elif field == "relaxation.moves":
        relax = RelaxationSettings(moves="both", max_steps=1, keep_symmetry=False)
    else:
        relax = RelaxationSettings(max_steps=1, keep_symmetry=False, force_threshold=1e-3)
    with pytest.raises(InputError) as err:
        _relaxation_with(path, crystal, settings, relax)
    assert f"{field} differs: file " in str(err.value) and str(path) in str(err.value)
    assert path.read_bytes() == before


def test_a_trajectory_log_survives_being_cut_and_refuses_edits(tmp_path):
    fp = store.fingerprint(SI, BASE, {"Si": load_pseudopotential(SI_FILE)})
    path = tmp_path / "trajectory.json"
    log = store.RecordLog(path, "relaxation-trajectory", fp)
    for step in range(3):
        log.add({"step": step, "energy_Ha": -7.9 - 0.001 * step})
    doc = json.loads(path.read_text())
    doc["steps"] = doc["steps"][:2]                   # cut back, as after an interruption
    path.write_text(json.dumps(doc))
    assert [e["step"] for e in store.RecordLog(path, "relaxation-trajectory", fp).entries] == [0, 1]
    doc["steps"][1]["energy_Ha"] = -8.0               # an edited value
    path.write_text(json.dumps(doc))
    with pytest.raises(InputError, match="entry 2 fails its checksum"):
        store.RecordLog(path, "relaxation-trajectory", fp)


TINY_INPUT = """
[crystal]
prototype = "diamond"
lattice_constant = "5.43 angstrom"
species = "Si"
[basis]
cutoff = "5 Ha"
[brillouin_zone]
mesh = [2, 2, 2]
shift = [0, 0, 0]
[pseudopotentials]
Si = "Si-appelbaum-hamann.toml"
"""


def test_the_band_structure_command_refuses_a_damaged_density_with_exit_3(tmp_path, capsys):
    from pwsolid.cli import main
    from pwsolid.config import load_input

    inp = tmp_path / "si.toml"
    inp.write_text(TINY_INPUT)
    run = load_input(inp)
    for how in DAMAGE:
        path = tmp_path / f"{how.replace(' ', '-')}.density.npz"
        _write_density(path, run.crystal, run.settings)
        _damage(path, how, tmp_path)
        before = path.read_bytes()
        capsys.readouterr()
        code = main(["band-structure", str(inp), "--density-file", str(path), "--quiet",
                     "--output-dir", str(tmp_path / "out")])
        err = capsys.readouterr().err
        assert code == EXIT_INVALID_INPUT, how
        assert str(path) in err and "Traceback" not in err
        assert path.read_bytes() == before and not (tmp_path / "out").exists()


def test_the_ground_state_command_refuses_a_foreign_checkpoint_with_exit_3(tmp_path, capsys):
    from pwsolid.cli import main

    inp = tmp_path / "si.toml"
    inp.write_text(TINY_INPUT)
    ckpt = tmp_path / "si.checkpoint.npz"
    ckpt.write_bytes(np.random.default_rng(5).bytes(4000))
    before = ckpt.read_bytes()
    assert main(["ground-state", str(inp), "--quiet"]) == EXIT_INVALID_INPUT
    err = capsys.readouterr().err
    assert str(ckpt) in err and "SCF checkpoint" in err and "Traceback" not in err
    assert ckpt.read_bytes() == before and not (tmp_path / "si.result.json").exists()


def test_output_names_and_verbosity_do_not_enter_the_fingerprint(tmp_path, capsys):
    # a quiet run stopped after two iterations leaves its checkpoint; the same input run
    # with another result file and density file, and printing its iterations, resumes it
    from pwsolid.cli import main

    inp = tmp_path / "si.toml"
    inp.write_text(TINY_INPUT + "[self_consistency]\nmax_iterations = 2\n")
    assert main(["ground-state", str(inp), "--quiet"]) == 4        # not converged: kept
    assert (tmp_path / "si.checkpoint.npz").exists()
    inp.write_text(TINY_INPUT)
    capsys.readouterr()
    assert main(["ground-state", str(inp), "--result-file", str(tmp_path / "other.json"),
                 "--density-file", str(tmp_path / "other.density.npz")]) == 0
    assert "resuming from" in capsys.readouterr().out
    doc = json.loads((tmp_path / "other.json").read_text())
    assert any(m.startswith("resumed from") for m in doc["messages"])
    assert not any("another calculation" in m for m in doc["messages"])


def test_a_density_of_another_functional_is_used_on_request_and_documented(tmp_path, capsys):
    from pwsolid.cli import main
    from pwsolid.config import load_input

    inp = tmp_path / "si.toml"
    inp.write_text(TINY_INPUT)
    density = tmp_path / "lda.density.npz"
    _write_density(density, load_input(inp).crystal, load_input(inp).settings)
    other = tmp_path / "pw92.toml"
    other.write_text(TINY_INPUT + '[exchange_correlation]\nfunctional = "lda-pw92"\n')
    args = ["band-structure", str(other), "--density-file", str(density), "--quiet",
            "--points", "12", "--formats", "svg", "--output-dir", str(tmp_path / "out")]
    assert main(args) == EXIT_INVALID_INPUT
    assert "functional differs: file lda-pz81, input lda-pw92" in capsys.readouterr().err
    assert main(args + ["--accept-mismatch"]) == 0
    doc = json.loads((tmp_path / "out" / "pw92.bands.json").read_text())
    assert doc["details"]["accepted_mismatches"] == [
        "functional differs: file lda-pz81, input lda-pw92"]
    assert "another calculation" in doc["source"]


# --- file modes ----------------------------------------------------------------------

@pytest.mark.parametrize("umask, mode", [(0o022, 0o644), (0o002, 0o664), (0o077, 0o600)])
def test_saved_files_get_the_mode_of_the_umask(tmp_path, umask, mode):
    from pwsolid.results import write_json

    old = os.umask(umask)
    try:
        write_json(tmp_path / "r.json", {"a": 1})
        _write_density(tmp_path / "d.npz", SI, BASE)
        _write_points(tmp_path / "p.json", SI, BASE)
    finally:
        os.umask(old)
    for name in ("r.json", "d.npz", "p.json"):
        assert stat.S_IMODE((tmp_path / name).stat().st_mode) == mode, name
