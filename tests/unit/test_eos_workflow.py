"""The volume-scan workflow (pwsolid.workflows.equation_of_state) and structure comparison.

Most checks replace the SCF with a model energy through the ``solver`` seam, so
the workflow's own logic (volumes, fits, range extension, resume, c/a scans,
documents) is tested exactly and fast. Model parameters are typical of silicon
(own choice, as in test_eos.py): V0 = 270 bohr^3, B0 = 0.0033 Ha/bohr^3,
B0' = 4.2, E0 = -7.9 Ha. Two checks run the real SCF on a tiny silicon cell.
"""

import json
import math
from types import SimpleNamespace

import numpy as np
import pytest

from conftest import LOCAL_SILICON
from pwsolid.crystal import (body_centred_cubic, diamond, face_centred_cubic,
                             hexagonal_close_packed, rocksalt, simple_cubic)
from pwsolid.eos import birch_murnaghan_energy, birch_murnaghan_pressure
from pwsolid.errors import ConvergenceWarning, InputError
from pwsolid.settings import GroundStateSettings
from pwsolid.units import BOHR_ANGSTROM, HA_PER_BOHR3_GPA, HARTREE_EV
from pwsolid.workflows.equation_of_state import (ScanPoint, WarmStart, extrapolate_density,
                                                 lattice_lengths,
                                                 scan_volumes, transfer_density)
from pwsolid.workflows.structures import compare_structures

E0, V0, B0, B0P = -7.9, 270.0, 0.0033, 4.2
SETTINGS = GroundStateSettings(cutoff=5.0, kpoint_mesh=(2, 2, 2), kpoint_shift=(0, 0, 0), pseudopotentials=LOCAL_SILICON)


def _a_for_volume(v):
    """Diamond cube edge (bohr) whose primitive cell has volume v (V = a^3 / 4)."""
    return (4.0 * v) ** (1.0 / 3.0)


class ModelSolver:
    """Birch-Murnaghan energy of the cell volume; counts and records its calls."""

    def __init__(self, v0=V0, e0=E0, b0=B0, b0p=B0P, fail_after=None, converged=True):
        self.v0, self.e0, self.b0, self.b0p = v0, e0, b0, b0p
        self.calls = []
        self.warm = []
        self.fail_after = fail_after
        self.converged = converged

    def __call__(self, crystal, settings, warm_start):
        if self.fail_after is not None and len(self.calls) >= self.fail_after:
            raise KeyboardInterrupt("simulated interruption")
        self.calls.append(crystal)
        self.warm.append(warm_start)
        e = birch_murnaghan_energy(crystal.volume, self.e0, self.v0, self.b0, self.b0p)
        return SimpleNamespace(total_energy=float(e), converged=self.converged, iterations=7,
                               density=np.full((6, 6, 6), 8.0 / crystal.volume))


# --- volumes, fits and lattice ---------------------------------------------------------

def test_scan_recovers_the_model_parameters_and_scales_the_lattice():
    a_in = _a_for_volume(1.02 * V0)
    si = diamond(a_in, "Si")
    solver = ModelSolver()
    scan = scan_volumes(si, SETTINGS, solver=solver)
    assert len(solver.calls) == 7 and not scan.extensions and scan.messages == ()
    vols = np.array([c.volume for c in solver.calls])
    # equally spaced from 0.94 V to 1.06 V, walked from the largest down (so the
    # plane-wave set of each point is nearly a subset of its neighbour's), cell
    # shape kept (uniform scaling)
    assert np.allclose(vols, si.volume * np.linspace(1.06, 0.94, 7), rtol=1e-12)
    for c in solver.calls:
        s = (c.volume / si.volume) ** (1 / 3)
        assert np.allclose(c.lattice, si.lattice * s, rtol=1e-12)
        assert np.array_equal(c.positions, si.positions)
    # Birch-Murnaghan data: that form and the order-3 polynomial are exact, so the
    # parameters come back to fitting precision (1e-7 relative is far above it).
    for form in ("birch-murnaghan", "polynomial"):
        f = scan.fits[form]
        assert f.v0 == pytest.approx(V0, rel=1e-7)
        assert f.b0 == pytest.approx(B0, rel=1e-6)
        assert f.b0_prime == pytest.approx(B0P, rel=1e-5)
        assert f.e0 == pytest.approx(E0, abs=1e-10)
    # Vinet and Murnaghan are other shapes: within 2% on +-6% data (own estimate)
    for form in ("vinet", "murnaghan"):
        assert scan.fits[form].b0 == pytest.approx(B0, rel=0.02)
        assert scan.fits[form].v0 == pytest.approx(V0, rel=1e-3)
    assert scan.v0 == scan.fits["birch-murnaghan"].v0 and scan.preferred_form == "birch-murnaghan"
    # a0 = a_in (V0 / V_in)^(1/3), the fcc cube edge
    assert scan.lattice_constants["a"] == pytest.approx(a_in * (scan.v0 / si.volume) ** (1 / 3),
                                                        rel=1e-12)
    assert scan.lattice_constants["a"] == pytest.approx(_a_for_volume(V0), rel=1e-7)
    assert scan.b0_gpa == pytest.approx(B0 * HA_PER_BOHR3_GPA, rel=1e-6)
    assert scan.converged and scan.minimum_inside_range
    assert scan.spread["v0"]["relative_spread"] < 1e-3


def test_each_point_starts_from_its_neighbours_density():
    solver = ModelSolver()
    scan_volumes(diamond(_a_for_volume(V0), "Si"), SETTINGS, solver=solver)
    assert solver.warm[0] is None
    for prev, cell, warm in zip(solver.calls, solver.calls[1:], solver.warm[1:]):
        assert isinstance(warm, WarmStart)
        assert warm.volume == pytest.approx(prev.volume, rel=1e-12)


@pytest.mark.parametrize("builder, factor, key", [
    (simple_cubic, 1.0, "a"), (face_centred_cubic, 1.0, "a"), (body_centred_cubic, 1.0, "a"),
])
def test_lattice_lengths_recognise_the_cubic_cells(builder, factor, key):
    c = builder(7.3, "Na")
    assert lattice_lengths(c.lattice) == {key: pytest.approx(7.3 * factor, rel=1e-12)}


def test_lattice_lengths_of_hexagonal_and_general_cells():
    hcp = hexagonal_close_packed(6.0, "Mg", 1.62)
    lengths = lattice_lengths(hcp.lattice)
    assert lengths["a"] == pytest.approx(6.0) and lengths["c"] == pytest.approx(6.0 * 1.62)
    cell = rocksalt(10.0, ["Na", "Cl"]).supercell((1, 1, 2))
    assert set(lattice_lengths(cell.lattice)) == {"a1", "a2", "a3"}


# --- range extension -------------------------------------------------------------------

def test_range_is_extended_when_the_minimum_lies_below_the_scan():
    si = diamond(_a_for_volume(V0 / 0.85), "Si")          # minimum at 0.85 V_in
    solver = ModelSolver()
    scan = scan_volumes(si, SETTINGS, solver=solver)
    assert scan.extensions and all(e["side"] == "smaller" for e in scan.extensions)
    assert any("extended the scan" in m for m in scan.messages)
    assert len(solver.calls) == 7 + 3 * len(scan.extensions)
    assert scan.minimum_inside_range and scan.v0 == pytest.approx(V0, rel=1e-7)
    # at least one computed volume below the minimum, none computed twice
    vols = [p.volume for p in scan.points]
    assert min(vols) < V0 and len(set(np.round(vols, 8))) == len(vols)
    assert {p.stage for p in scan.points} == set(range(len(scan.extensions) + 1))


def test_range_is_extended_upwards_too():
    si = diamond(_a_for_volume(V0 / 1.1), "Si")            # minimum at 1.10 V_in
    scan = scan_volumes(si, SETTINGS, solver=ModelSolver())
    assert scan.extensions[0]["side"] == "larger"
    assert scan.minimum_inside_range and scan.v0 == pytest.approx(V0, rel=1e-7)


def test_extension_stops_at_its_limit_and_says_so():
    si = diamond(_a_for_volume(V0 / 0.7), "Si")            # far outside
    with pytest.warns(ConvergenceWarning, match="still lies outside"):
        scan = scan_volumes(si, SETTINGS, solver=ModelSolver(), max_extensions=1)
    assert len(scan.extensions) == 1 and not scan.converged
    assert any("still lies outside" in m for m in scan.messages)


# --- resume ----------------------------------------------------------------------------

def test_resume_skips_finished_points(tmp_path):
    si = diamond(_a_for_volume(V0), "Si")
    store = tmp_path / "points.json"
    first = ModelSolver(fail_after=3)
    with pytest.raises(KeyboardInterrupt):
        scan_volumes(si, SETTINGS, solver=first, store=store)
    assert len(json.loads(store.read_text())["points"]) == 3   # each point saved at once
    second = ModelSolver()
    scan = scan_volumes(si, SETTINGS, solver=second, store=store)
    assert len(second.calls) == 4
    assert sum(p.resumed for p in scan.points) == 3
    third = ModelSolver()
    again = scan_volumes(si, SETTINGS, solver=third, store=store)
    assert third.calls == [] and all(p.resumed for p in again.points)
    assert again.v0 == pytest.approx(scan.v0, rel=1e-12)
    # path-only settings (mixing, iteration cap) do not invalidate the store
    relaxed = SETTINGS.replace(mixing_weight=0.3, max_iterations=80)
    fourth = ModelSolver()
    scan_volumes(si, relaxed, solver=fourth, store=store)
    assert fourth.calls == []
    assert not list(tmp_path.glob(".*.part"))                  # no temporary files left


def test_unconverged_points_are_recomputed_on_resume(tmp_path):
    si = diamond(_a_for_volume(V0), "Si")
    store = tmp_path / "points.json"
    with pytest.warns(ConvergenceWarning, match="did not reach SCF convergence"):
        scan_volumes(si, SETTINGS, solver=ModelSolver(converged=False), store=store)
    solver = ModelSolver()
    scan = scan_volumes(si, SETTINGS, solver=solver, store=store)
    assert len(solver.calls) == 7 and scan.all_points_converged


def test_store_of_other_settings_or_crystal_is_refused(tmp_path):
    si = diamond(_a_for_volume(V0), "Si")
    store = tmp_path / "points.json"
    scan_volumes(si, SETTINGS, solver=ModelSolver(), store=store)
    with pytest.raises(InputError, match="another crystal or with other settings"):
        scan_volumes(si, SETTINGS.replace(cutoff=6.0), solver=ModelSolver(), store=store)
    with pytest.raises(InputError, match="another crystal"):
        scan_volumes(si.scaled(1.01), SETTINGS, solver=ModelSolver(), store=store)
    bad = tmp_path / "bad.json"
    bad.write_text("{not json")
    with pytest.raises(InputError, match="cannot be read"):
        scan_volumes(si, SETTINGS, solver=ModelSolver(), store=bad)
    foreign = tmp_path / "foreign.json"
    foreign.write_text(json.dumps({"format": "something-else"}))
    with pytest.raises(InputError, match="not a restart file"):
        scan_volumes(si, SETTINGS, solver=ModelSolver(), store=foreign)


# --- hexagonal cells with c/a ----------------------------------------------------------

def test_c_over_a_scan_finds_the_optimal_ratio_at_each_volume():
    q_ref, slope, stiffness = 1.60, 0.4, 0.05   # own model: q*(V) = q_ref + slope (V/V0 - 1)
    hcp = hexagonal_close_packed(6.05, "Mg", 1.62)
    v_eq = hcp.volume * 0.99

    def solver(crystal, settings, warm):
        n = np.linalg.norm(crystal.lattice, axis=1)
        q = n[2] / n[0]
        v = crystal.volume
        q_star = q_ref + slope * (v / v_eq - 1.0)
        e = birch_murnaghan_energy(v, E0, v_eq, B0, B0P) + stiffness * (q - q_star) ** 2
        return SimpleNamespace(total_energy=float(e), converged=True, iterations=3, density=None)

    qs = (1.55, 1.60, 1.65)
    scan = scan_volumes(hcp, SETTINGS, c_over_a_values=qs, solver=solver)
    assert len(scan.points) == 7 * 3
    for p in scan.points:      # every cell has the requested volume and c/a
        assert p.c_over_a in qs
    # the parabola is exact for this model: c/a(V) and E(V) come back exactly
    expected_q = q_ref + slope * (scan.volumes / v_eq - 1.0)
    assert np.allclose(scan.optimal_c_over_a, expected_q, atol=1e-9)
    assert np.allclose(scan.energies, birch_murnaghan_energy(scan.volumes, E0, v_eq, B0, B0P),
                       atol=1e-11)
    assert scan.v0 == pytest.approx(v_eq, rel=1e-7)
    assert scan.c_over_a_at(scan.v0) == pytest.approx(q_ref, abs=1e-6)
    lat = scan.lattice_constants
    assert lat["c"] / lat["a"] == pytest.approx(scan.c_over_a_at(scan.v0), rel=1e-12)
    # hexagonal cell volume (sqrt 3 / 2) a^2 c equals V0
    assert math.sqrt(3) / 2 * lat["a"] ** 2 * lat["c"] == pytest.approx(scan.v0, rel=1e-12)
    doc = scan.as_document()
    assert doc["scan_kind"] == "volume and c/a"
    json.dumps(doc, allow_nan=False)


def test_c_over_a_optimum_outside_the_values_is_clipped_and_reported():
    hcp = hexagonal_close_packed(6.05, "Mg", 1.62)

    def solver(crystal, settings, warm):
        n = np.linalg.norm(crystal.lattice, axis=1)
        e = (birch_murnaghan_energy(crystal.volume, E0, hcp.volume, B0, B0P)
             + 0.05 * (n[2] / n[0] - 1.9) ** 2)
        return SimpleNamespace(total_energy=float(e), converged=True, iterations=3, density=None)

    scan = scan_volumes(hcp, SETTINGS, c_over_a_values=(1.55, 1.60, 1.65), solver=solver)
    assert np.allclose(scan.optimal_c_over_a, 1.65)
    assert any("clipped" in m for m in scan.messages)


def test_c_over_a_needs_a_hexagonal_cell_and_three_ratios():
    with pytest.raises(InputError, match="hexagonal"):
        scan_volumes(diamond(10.2, "Si"), SETTINGS, c_over_a_values=(1.5, 1.6, 1.7),
                     solver=ModelSolver())
    with pytest.raises(InputError, match="at least three"):
        scan_volumes(hexagonal_close_packed(6.0, "Mg"), SETTINGS, c_over_a_values=(1.5, 1.6),
                     solver=ModelSolver())


@pytest.mark.parametrize("options, key", [
    ({"volume_range": 0.0}, "volume_range"), ({"volume_range": 0.9}, "volume_range"),
    ({"n_points": 4}, "points"), ({"n_points": 7.5}, "points"),
    ({"extension_points": -1}, "extension_points"),
])
def test_bad_scan_options_are_input_errors(options, key):
    with pytest.raises(InputError) as err:
        scan_volumes(diamond(10.2, "Si"), SETTINGS, solver=ModelSolver(), **options)
    assert err.value.key == key


def test_energies_without_a_minimum_are_refused():
    def flat(crystal, settings, warm):
        return SimpleNamespace(total_energy=-crystal.volume * 1e-3, converged=True,
                               iterations=1, density=None)

    with pytest.raises(InputError, match="no equation of state can be fitted"):
        scan_volumes(diamond(10.2, "Si"), SETTINGS, solver=flat, max_extensions=0)


# --- document --------------------------------------------------------------------------

def test_document_is_json_with_units_at_the_edges():
    si = diamond(_a_for_volume(V0), "Si")
    scan = scan_volumes(si, SETTINGS, solver=ModelSolver())
    doc = json.loads(json.dumps(scan.as_document(), allow_nan=False))
    f = doc["fits"]["birch-murnaghan"]
    assert f["equilibrium_volume_angstrom3"] == pytest.approx(V0 * BOHR_ANGSTROM ** 3, rel=1e-7)
    assert f["equilibrium_energy_eV"] == pytest.approx(E0 * HARTREE_EV, rel=1e-10)
    assert f["bulk_modulus_GPa"] == pytest.approx(B0 * HA_PER_BOHR3_GPA, rel=1e-6)
    assert f["lattice_at_equilibrium_angstrom"]["a"] == pytest.approx(
        _a_for_volume(V0) * BOHR_ANGSTROM, rel=1e-7)
    assert len(doc["points"]) == 7
    p = doc["points"][0]
    assert {"volume_bohr3", "volume_angstrom3", "energy_Ha", "energy_eV", "converged",
            "iterations", "seconds"} <= set(p)
    assert doc["spread_between_forms"]["forms"] == list(scan.fits)
    assert doc["crystal"]["cell_kind"] == "fcc"


class StressedModelSolver(ModelSolver):
    """The model energy with its exact stress: sigma = -P(V) 1, P = -dE/dV of the same
    Birch-Murnaghan form (F. Birch, Phys. Rev. 71, 809 (1947)), and a small shear so
    that the tensor is seen to travel whole."""

    def __call__(self, crystal, settings, warm_start):
        out = super().__call__(crystal, settings, warm_start)
        p = birch_murnaghan_pressure(crystal.volume, self.v0, self.b0, self.b0p)
        out.stress = -float(p) * np.eye(3) + 1e-5 * np.array([[0, 1, 0], [1, 0, 0], [0, 0, 0]])
        return out


def test_document_sets_each_pressure_beside_the_fits_minus_dE_dV(tmp_path):
    si = diamond(_a_for_volume(V0), "Si")
    lines = []
    scan = scan_volumes(si, SETTINGS, solver=StressedModelSolver(), log=lines.append)
    doc = json.loads(json.dumps(scan.as_document(), allow_nan=False))
    assert all(" GPa" in line and "P = " in line for line in lines)   # the screen line
    for p, point in zip(doc["points"], scan.points):
        exact = birch_murnaghan_pressure(point.volume, V0, B0, B0P) * HA_PER_BOHR3_GPA
        assert p["pressure_GPa"] == pytest.approx(exact, rel=1e-12)
        assert np.array(p["stress_tensor_GPa"]) == pytest.approx(
            np.array(p["stress_tensor_Ha_per_bohr3"]) * HA_PER_BOHR3_GPA, rel=1e-12)
        assert p["stress_tensor_Ha_per_bohr3"][0][1] == pytest.approx(1e-5)
        # the fit of exact Birch-Murnaghan energies returns the model (to ~1e-7 in its
        # parameters, as in the first test): its -dE/dV agrees to 1e-4 GPa of ~10 GPa
        assert p["fit_pressure_GPa"] == pytest.approx(exact, abs=1e-4)
        assert p["pressure_minus_fit_GPa"] == pytest.approx(
            p["pressure_GPa"] - p["fit_pressure_GPa"], abs=1e-12)
    check = doc["pressure_check"]
    assert check["points_with_pressure"] == 7 and check["points_without_pressure"] == 0
    assert check["form"] == "birch-murnaghan" and check["largest_abs_difference_GPa"] < 1e-4
    cmp = scan.pressure_comparison()
    assert cmp["largest"] * HA_PER_BOHR3_GPA == pytest.approx(
        check["largest_abs_difference_GPa"], rel=1e-12)


def test_a_stored_point_keeps_its_pressure_and_an_older_one_loads_without(tmp_path):
    si = diamond(_a_for_volume(V0), "Si")
    store = tmp_path / "points.json"
    first = scan_volumes(si, SETTINGS, solver=StressedModelSolver(), store=store)
    never = ModelSolver(fail_after=0)         # any computation would raise
    again = scan_volumes(si, SETTINGS, solver=never, store=store)
    assert all(p.resumed for p in again.points)
    for a, b in zip(first.points, again.points):
        assert b.stress == a.stress and b.pressure == a.pressure is not None
    # a restart file written before the pressure was recorded: its points still load,
    # without a pressure (not recomputed: that needs the point's SCF)
    from pwsolid.workflows.scan_restart import ScanRestart

    old_store = tmp_path / "older-points.json"
    log = ScanRestart(old_store, si, SETTINGS).log
    for point in first.points:
        rec = {k: v for k, v in point.as_record().items()
               if k not in ("pressure_GPa", "stress_tensor_GPa", "stress_tensor_Ha_per_bohr3",
                            "reused_from_restart_file")}
        log.add({**rec, "energy_tolerance_Ha": SETTINGS.energy_tolerance,
                 "density_tolerance": SETTINGS.density_tolerance})
    older = scan_volumes(si, SETTINGS, solver=ModelSolver(fail_after=0), store=old_store)
    assert all(p.resumed and p.pressure is None for p in older.points)
    doc = json.loads(json.dumps(older.as_document(), allow_nan=False))
    assert all(p["pressure_GPa"] is None and p["pressure_minus_fit_GPa"] is None
               and p["fit_pressure_GPa"] is not None for p in doc["points"])
    assert doc["pressure_check"]["points_without_pressure"] == 7
    assert doc["pressure_check"]["largest_abs_difference_GPa"] is None
    # a figure without pressures draws no pressure panel; with them it does
    from pwsolid.plots.eos import EquationOfStatePlot
    assert "pressure" not in EquationOfStatePlot.from_scan(older).panels
    plot = EquationOfStatePlot.from_scan(first)
    assert plot.panels == ("energy", "pressure", "residuals")
    plot.save(tmp_path / "eos", formats=("png",))
    assert (tmp_path / "eos.png").stat().st_size > 1000


def test_scan_point_record_round_trip():
    p = ScanPoint(250.0, None, -7.9, True, 9, 0.5)
    r = p.as_record()
    assert r["volume_angstrom3"] == pytest.approx(250.0 * BOHR_ANGSTROM ** 3)
    assert r["energy_eV"] == pytest.approx(-7.9 * HARTREE_EV)


# --- density transfer ------------------------------------------------------------------

def test_transfer_density_keeps_the_charge_and_smooth_fields():
    rng = np.random.default_rng(7)
    shape = (12, 12, 12)
    x = np.stack(np.meshgrid(*[np.arange(n) / n for n in shape], indexing="ij"))
    smooth = 0.05 + 0.01 * np.cos(2 * np.pi * x[0]) + 0.005 * np.sin(2 * np.pi * (x[1] - 2 * x[2]))
    # same grid: exact scaling by V_old / V_new
    out = transfer_density(smooth, 250.0, shape, 260.0)
    assert np.allclose(out, smooth * 250.0 / 260.0, rtol=0, atol=1e-15)
    # another grid: the same field at the same fractional points, charge exact
    new_shape = (15, 16, 14)
    out = transfer_density(smooth, 250.0, new_shape, 240.0)
    y = np.stack(np.meshgrid(*[np.arange(n) / n for n in new_shape], indexing="ij"))
    expected = (0.05 + 0.01 * np.cos(2 * np.pi * y[0])
                + 0.005 * np.sin(2 * np.pi * (y[1] - 2 * y[2]))) * 250.0 / 240.0
    assert np.allclose(out, expected, atol=1e-13)
    assert out.mean() * 240.0 == pytest.approx(smooth.mean() * 250.0, rel=1e-13)
    # a rough positive field: still positive, charge still exact after clipping
    rough = rng.random(shape) ** 8
    out = transfer_density(rough, 250.0, (9, 10, 11), 255.0)
    assert out.min() >= 0 and out.mean() * 255.0 == pytest.approx(rough.mean() * 250.0, rel=1e-12)


def test_warm_started_point_reaches_the_cold_start_energy():
    """Real SCF, tiny silicon (5 Ha, 2x2x2): the warm start changes the path, not the answer."""
    from pwsolid.scf import ground_state
    from pwsolid.workflows.equation_of_state import _scf_solver

    si = diamond(5.05 / BOHR_ANGSTROM, "Si")
    first = ground_state(si, SETTINGS)
    bigger = si.scaled(1.05)          # another FFT grid (15^3 against 14^3): the density is moved
    warm = _scf_solver(bigger, SETTINGS, WarmStart(first.density, si.volume))
    cold = ground_state(bigger, SETTINGS)
    assert warm.setup.grid_shape != first.setup.grid_shape
    assert warm.converged and cold.converged
    # both within the SCF energy tolerance (1e-8 Ha) of the same minimum; 1e-6 Ha leaves room
    assert warm.total_energy == pytest.approx(cold.total_energy, abs=1e-6)
    assert warm.iterations <= cold.iterations


# --- structure comparison --------------------------------------------------------------

def test_compare_structures_ranks_by_energy_per_atom():
    # own model: energy per atom E0/2 (diamond, 2 atoms) against E0 + 0.01 Ha (fcc, 1 atom)
    dia = diamond(_a_for_volume(V0), "Si")
    fcc = face_centred_cubic(9.0, "Si")
    v_fcc = fcc.volume * 1.01

    def solver(crystal, settings, warm):
        if crystal.n_atoms == 2:
            e = birch_murnaghan_energy(crystal.volume, 2 * E0, V0, B0, B0P)
        else:
            e = birch_murnaghan_energy(crystal.volume, E0 + 0.01, v_fcc, 1.5 * B0, B0P)
        return SimpleNamespace(total_energy=float(e), converged=True, iterations=3, density=None)

    seen = []
    result = compare_structures({"diamond": dia, "fcc": fcc}, SETTINGS, solver=solver,
                                progress=lambda d, t: seen.append((d, t)))
    assert result.ranking == ("diamond", "fcc") and result.most_stable == "diamond"
    assert result.relative_energy_per_atom("fcc") == pytest.approx(0.01, abs=1e-9)
    rows = result.table()
    assert rows[1]["energy_above_lowest_per_atom_eV"] == pytest.approx(0.01 * HARTREE_EV, abs=1e-7)
    assert rows[0]["equilibrium_volume_per_atom_angstrom3"] == pytest.approx(
        V0 / 2 * BOHR_ANGSTROM ** 3, rel=1e-7)
    assert rows[1]["bulk_modulus_GPa"] == pytest.approx(1.5 * B0 * HA_PER_BOHR3_GPA, rel=1e-6)
    assert seen[-1] == (14, 14) and all(d <= t for d, t in seen)
    json.dumps(result.as_document(), allow_nan=False)


def test_compare_structures_refuses_incomparable_settings():
    dia = diamond(_a_for_volume(V0), "Si")
    fcc = face_centred_cubic(9.0, "Si")
    with pytest.raises(InputError, match="differ in cutoff"):
        compare_structures({"a": dia, "b": fcc},
                           {"a": SETTINGS, "b": SETTINGS.replace(cutoff=6.0)},
                           solver=ModelSolver())
    with pytest.raises(InputError, match="at least two"):
        compare_structures({"a": dia}, SETTINGS, solver=ModelSolver())


def test_two_neighbours_extrapolate_a_density_linear_in_volume():
    """A density at fixed fractional points that is linear in V is extrapolated exactly."""
    shape = (10, 10, 10)
    x = np.stack(np.meshgrid(*[np.arange(n) / n for n in shape], indexing="ij"))
    shape_field = np.cos(2 * np.pi * x[0]) * np.sin(2 * np.pi * x[2])

    def electrons_per_cell(volume):          # positive, 8 electrons, shape varying with V
        rho = 1.0 + (0.2 + 0.001 * (volume - 250.0)) * shape_field
        return 8.0 * rho / rho.mean()

    def density(volume):
        return electrons_per_cell(volume) / volume

    older, newer, target = 250.0, 255.0, 262.0
    start = WarmStart(density(newer), newer, None, WarmStart(density(older), older))
    out = extrapolate_density(start, shape, target)
    assert np.allclose(out, density(target), rtol=1e-12, atol=0)
    # one neighbour only: the transfer of that density, whose error is first order in dV
    single = extrapolate_density(WarmStart(density(newer), newer), shape, target)
    assert np.allclose(single, transfer_density(density(newer), newer, shape, target))
    assert np.abs(single - density(target)).max() > 100 * np.abs(out - density(target)).max()
    # too far beyond the neighbours: the one-point form, never a wild extrapolation
    far = extrapolate_density(start, shape, newer + 3 * (newer - older))
    assert np.allclose(far, transfer_density(density(newer), newer, shape, newer + 15.0))


def test_scan_points_start_from_two_neighbours_once_two_are_done():
    solver = ModelSolver()
    scan_volumes(diamond(_a_for_volume(V0), "Si"), SETTINGS, solver=solver)
    assert solver.warm[1].partner is None
    for w in solver.warm[2:]:
        assert w.partner is not None and w.partner.volume != w.volume


def test_orbitals_of_a_neighbouring_cell_start_the_next_one():
    """Real SCF, tiny silicon: a start from the previous volume's orbitals and density
    reaches the cold-start energy (the start changes the path, not the answer)."""
    from pwsolid.scf import WavefunctionStart, _start_wavefunctions, ground_state, prepare

    si = diamond(5.40 / BOHR_ANGSTROM, "Si")
    first = ground_state(si, SETTINGS)
    bigger = si.scaled(1.01)
    start = WavefunctionStart.of(first)
    warm = ground_state(bigger, SETTINGS, initial_density=first.density * si.volume / bigger.volume,
                        initial_wavefunctions=start)
    cold = ground_state(bigger, SETTINGS)
    assert warm.converged and cold.converged
    # both within the SCF energy tolerance (1e-8 Ha) of the same minimum; 1e-6 Ha leaves room.
    # (Whether it saves iterations is a benchmark question: benchmarks/eos_warm_start.py.)
    assert warm.total_energy == pytest.approx(cold.total_energy, abs=1e-6)
    # the first solve starts from the carried orbitals: fewer H applications than the
    # same start without them (the same first eigensolver tolerance)
    density_only = ground_state(bigger, SETTINGS,
                                initial_density=first.density * si.volume / bigger.volume)
    assert warm.history[0]["hamiltonian_applications_per_band"] < \
        density_only.history[0]["hamiltonian_applications_per_band"]
    # other k-points: the start is ignored rather than misused
    other = prepare(bigger, SETTINGS.replace(kpoint_mesh=(3, 3, 3)))
    assert _start_wavefunctions(other, start) is None


def test_three_neighbours_extrapolate_a_density_quadratic_in_volume():
    """A density at fixed fractional points that is quadratic in V is extrapolated
    exactly from three unequally spaced neighbours; from two it is not."""
    shape = (10, 10, 10)
    x = np.stack(np.meshgrid(*[np.arange(n) / n for n in shape], indexing="ij"))
    shape_field = np.cos(2 * np.pi * x[0]) * np.sin(2 * np.pi * x[2])

    def density(volume):                      # 8 electrons, amplitude quadratic in V
        dv = volume - 250.0
        return 8.0 * (1.0 + (0.2 + 0.002 * dv + 1e-4 * dv ** 2) * shape_field) / volume

    oldest, older, newer, target = 244.0, 250.0, 254.0, 259.0
    chain = WarmStart(density(newer), newer, None,
                      WarmStart(density(older), older, None, WarmStart(density(oldest), oldest)))
    out = extrapolate_density(chain, shape, target)
    assert np.allclose(out, density(target), rtol=1e-12, atol=0)
    assert out.mean() * target == pytest.approx(8.0, rel=1e-12)
    linear = extrapolate_density(WarmStart(density(newer), newer, None,
                                           WarmStart(density(older), older)), shape, target)
    assert np.abs(linear - density(target)).max() > 100 * np.abs(out - density(target)).max()


def test_scan_walks_down_from_the_largest_volume_with_up_to_three_neighbours():
    solver = ModelSolver()
    scan_volumes(diamond(_a_for_volume(V0), "Si"), SETTINGS, solver=solver)
    vols = [c.volume for c in solver.calls]
    assert vols == sorted(vols, reverse=True)
    for i, w in enumerate(solver.warm[1:], start=1):
        chain = [w]
        while chain[-1].partner is not None:
            chain.append(chain[-1].partner)
        assert len(chain) == min(i, 3)
        # nearest first: the points just computed, in the order they were computed
        assert [p.volume for p in chain] == pytest.approx(vols[i - 1::-1][:len(chain)], rel=1e-12)


def test_orbital_extrapolation_does_not_depend_on_the_phases_of_either_cell():
    """Blending a cell's orbitals with the same orbitals in another gauge (a random
    unitary mixing of the bands at every k-point) gives back those orbitals, whatever
    the weight: the rotation onto the nearest cell's orbitals removes the gauge."""
    from pwsolid.scf import WavefunctionStart, _start_wavefunctions, ground_state

    gs = ground_state(diamond(5.40 / BOHR_ANGSTROM, "Si"), SETTINGS)
    start = WavefunctionStart.of(gs)
    rng = np.random.default_rng(7)

    def scrambled(block):
        q, _ = np.linalg.qr(rng.standard_normal((len(block),) * 2)
                            + 1j * rng.standard_normal((len(block),) * 2))
        return q @ block

    other = WavefunctionStart(start.k_fractional, start.n_spin, start.miller,
                              tuple(scrambled(c) for c in start.coefficients))
    plain = _start_wavefunctions(gs.setup, start)
    for weight in (-1.0, 0.5, 2.0):
        blended = _start_wavefunctions(gs.setup, start.extrapolated([(weight, other)]))
        for a, b in zip(plain, blended):
            assert np.allclose(a, b, atol=1e-10)


def test_extrapolated_start_reaches_the_cold_energy_in_fewer_iterations():
    """Real SCF, tiny silicon: a point started from three finished neighbours (density
    quadratic and orbitals linear in volume) ends at the cold-start energy, with fewer
    SCF iterations and H applications than the cold start."""
    from pwsolid.scf import WavefunctionStart, ground_state
    from pwsolid.workflows.equation_of_state import _scf_solver

    # an offset mesh: on the unshifted one this toy's SCF wanders from any start (the
    # residual stalls for several iterations from a cold start too), which leaves the
    # iteration counts to chance
    settings = SETTINGS.replace(kpoint_shift=(0.5, 0.5, 0.5))
    si = diamond(5.40 / BOHR_ANGSTROM, "Si")
    chain = None
    for f in (1.06, 1.04, 1.02):
        cell = si.scaled(f ** (1 / 3))
        gs = ground_state(cell, settings)
        chain = WarmStart(gs.density, cell.volume, WavefunctionStart.of(gs), chain)
    warm = _scf_solver(si, settings, chain)
    cold = ground_state(si, settings)
    assert warm.converged and cold.converged
    # both within the SCF energy tolerance (1e-8 Ha) of the same minimum; 1e-6 Ha leaves room
    assert warm.total_energy == pytest.approx(cold.total_energy, abs=1e-6)
    assert warm.iterations < cold.iterations
    assert warm.hamiltonian_applications < cold.hamiltonian_applications
    # the first eigensolver pass went to the tolerance of an extrapolated start
    assert warm.history[0]["eigensolver_tolerance"] < 1e-3
