"""Benchmark suite: every speed figure of pwsolid in one table, from one run.

Run:  python benchmarks/run_suite.py [--quick] [--cases NAME,...] [--out-dir DIR]

Each case runs in a fresh Python process (so its peak memory is its own) and
reports, from that one run: SCF iterations, seconds per SCF iteration,
Hamiltonian applications per band, the shares of the SCF wall time spent inside
FFTs and inside dense linear algebra (the engine's own counters), the peak
resident memory of the process, and this machine's FFT and matrix-multiply
throughput on the case's own grid and subspace shape, measured in the same
process right after the SCF. The suite then fits the growth of the time per
SCF iteration with the atom count of the silicon supercells, runs the silicon
k-mesh case under ``mpiexec -n 1`` and ``-n 2`` for the MPI speed-up, checks
the targets, and writes the table to ``results.md`` and every figure to
``results.json`` (in ``--out-dir``, default: beside this file).

The machines here are shared and noisy: read ratios and counts, and quote the
command with every figure. ``--quick`` runs small versions of the cases (a
smoke test of the suite itself, not a measurement).
"""

from __future__ import annotations

import argparse
import json
import math
import os
import platform
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent

# --------------------------------------------------------------------------- cases
#
# Every case is a dict of plain values, so that the parent process can list and
# describe cases without importing the engine. ``kind`` picks the crystal builder.

_LOCAL_SI = "Si-appelbaum-hamann.toml"   # the setting the silicon targets were set for

FULL_CASES = {
    "silicon": dict(kind="silicon", title="Si, 2 atoms, 15 Ha, 8x8x8 half-offset",
                    cutoff=15.0, mesh=(8, 8, 8), shift=(0.5, 0.5, 0.5)),
    "aluminium": dict(kind="aluminium", title="Al, 1 atom, 8 Ha, 12x12x12, cold smearing",
                      cutoff=8.0, mesh=(12, 12, 12), shift=(0.5, 0.5, 0.5)),
    "si8": dict(kind="supercell", repeats=(1, 1, 1), title="Si, 8 atoms, 12 Ha, Gamma",
                cutoff=12.0, mesh=(1, 1, 1), shift=(0, 0, 0)),
    "si8-k222": dict(kind="supercell", repeats=(1, 1, 1),
                     title="Si, 8 atoms, 12 Ha, 2x2x2 through Gamma",
                     cutoff=12.0, mesh=(2, 2, 2), shift=(0, 0, 0)),
    "si16": dict(kind="supercell", repeats=(2, 1, 1), title="Si, 16 atoms, 12 Ha, Gamma",
                 cutoff=12.0, mesh=(1, 1, 1), shift=(0, 0, 0)),
    "si32": dict(kind="supercell", repeats=(2, 2, 1), title="Si, 32 atoms, 12 Ha, Gamma",
                 cutoff=12.0, mesh=(1, 1, 1), shift=(0, 0, 0)),
    "si64": dict(kind="supercell", repeats=(2, 2, 2), title="Si, 64 atoms, 12 Ha, Gamma",
                 cutoff=12.0, mesh=(1, 1, 1), shift=(0, 0, 0)),
    "jellium": dict(kind="jellium", title="jellium, 3 electrons (rs 2.07), 10 Ha, 8x8x8",
                    cutoff=10.0, mesh=(8, 8, 8), shift=(0.5, 0.5, 0.5)),
}

QUICK_CASES = {
    "silicon": dict(FULL_CASES["silicon"], title="Si, 2 atoms, 5 Ha, 2x2x2 half-offset",
                    cutoff=5.0, mesh=(2, 2, 2)),
    "aluminium": dict(FULL_CASES["aluminium"], title="Al, 1 atom, 4 Ha, 4x4x4, cold smearing",
                      cutoff=4.0, mesh=(4, 4, 4)),
    "si8": dict(FULL_CASES["si8"], title="Si, 8 atoms, 4 Ha, Gamma", cutoff=4.0),
    "si16": dict(FULL_CASES["si16"], title="Si, 16 atoms, 4 Ha, Gamma", cutoff=4.0),
    "jellium": dict(FULL_CASES["jellium"], title="jellium, 3 electrons, 4 Ha, 2x2x2",
                    cutoff=4.0, mesh=(2, 2, 2)),
}

#: The case whose k-points the MPI speed-up is measured on.
MPI_CASE = "silicon"
#: A Gamma-only cell (one k-point) whose bands and plane waves two processes share.
BAND_MPI_CASE = "si16"
#: Cases of the size-scaling fit (Gamma-only supercells).
SCALING_CASES = ("si8", "si16", "si32", "si64")

TARGETS = (
    # (key, case, figure, operator, limit, description)
    ("fft_blas_silicon", "silicon", "fft_plus_blas_share", ">=", 0.70,
     "FFT + dense linear algebra >= 70% of the SCF wall time (silicon)"),
    ("fft_blas_si64", "si64", "fft_plus_blas_share", ">=", 0.70,
     "FFT + dense linear algebra >= 70% of the SCF wall time (64 atoms)"),
    ("scaling", None, "scaling_exponent", "<=", 2.3,
     "time per SCF iteration grows no faster than N^2.3 from 8 to 64 atoms"),
    ("memory_si64", "si64", "peak_memory_mib", "<=", 4096.0,
     "64-atom silicon at 12 Ha fits in 4 GiB"),
    ("mpi_speedup", None, "mpi_speedup", ">=", 1.7,
     "2 MPI processes at least 1.7x faster than 1 (silicon k-mesh)"),
)


# --------------------------------------------------------------------------- worker

def _build(case: dict):
    """The crystal and settings of a case."""
    import numpy as np

    import pwsolid
    from pwsolid.crystal import Crystal, face_centred_cubic

    common = dict(cutoff=case["cutoff"], kpoint_mesh=tuple(case["mesh"]),
                  kpoint_shift=tuple(case["shift"]), energy_tolerance=1e-8)
    kind = case["kind"]
    if kind == "silicon":
        crystal = pwsolid.diamond(pwsolid.angstrom(5.431), "Si")
        settings = pwsolid.GroundStateSettings(pseudopotentials={"Si": _LOCAL_SI}, **common)
    elif kind == "supercell":
        a = pwsolid.angstrom(5.431)
        cubic = Crystal(a * np.eye(3), ("Si",) * 8,
                        [[0, 0, 0], [0, .5, .5], [.5, 0, .5], [.5, .5, 0],
                         [.25, .25, .25], [.25, .75, .75], [.75, .25, .75], [.75, .75, .25]])
        crystal = cubic.supercell(case["repeats"])
        settings = pwsolid.GroundStateSettings(pseudopotentials={"Si": _LOCAL_SI}, **common)
    elif kind == "aluminium":
        crystal = face_centred_cubic(pwsolid.angstrom(4.05), "Al")
        settings = pwsolid.GroundStateSettings(pseudopotentials={"Al": "Al-empty-core.toml"},
                                               smearing="cold", smearing_width=0.01, **common)
    elif kind == "jellium":
        # the aluminium cell emptied of its ion: three electrons on a uniform background
        lattice = face_centred_cubic(pwsolid.angstrom(4.05), "Al").lattice
        crystal = Crystal(lattice, (), np.zeros((0, 3)))
        settings = pwsolid.GroundStateSettings(background_electrons=3.0, smearing="cold",
                                               smearing_width=0.01, **common)
    else:  # pragma: no cover - the case tables above are the only callers
        raise ValueError(f"unknown case kind {kind!r}")
    return crystal, settings


def fft_throughput(fft_grid, grid_index, seconds: float) -> float:
    """Single 3-D transforms per second of the engine's fused V psi kernel on this grid.

    Uses a fresh :class:`~pwsolid.fft.FFTGrid` with the case's batch and threads and
    the case's own plane-wave sphere, so the figure is what the SCF could reach.
    """
    import numpy as np

    from pwsolid.fft import make_fft_grid

    fft = make_fft_grid(fft_grid.shape, batch=fft_grid.batch, threads=fft_grid.threads)
    rng = np.random.default_rng(0)
    coeffs = (rng.standard_normal((fft.batch, grid_index.size))
              + 1j * rng.standard_normal((fft.batch, grid_index.size)))
    potential = rng.standard_normal(fft.shape)
    fft.apply_potential(coeffs, grid_index, potential)      # plan outside the timing
    fft.reset_counters()
    t0 = time.perf_counter()
    while time.perf_counter() - t0 < seconds or fft.n_transforms < 4 * fft.batch:
        fft.apply_potential(coeffs, grid_index, potential)
    return fft.n_transforms / fft.seconds


def matmul_gflops(n_bands: int, n_pw: int, seconds: float) -> float:
    """GFLOP/s of one-thread complex products of the Davidson subspace shape.

    The shape is the Rayleigh-Ritz rotation (n x 2n) @ (2n x n_pw), 8 n 2n n_pw
    real flops, with BLAS on one thread as inside the SCF.
    """
    import numpy as np
    from threadpoolctl import threadpool_limits

    rng = np.random.default_rng(1)
    c = rng.standard_normal((n_bands, 2 * n_bands)) + 0j
    v = rng.standard_normal((2 * n_bands, n_pw)) + 1j * rng.standard_normal((2 * n_bands, n_pw))
    flops = 8.0 * n_bands * 2 * n_bands * n_pw
    with threadpool_limits(limits=1, user_api="blas"):
        c @ v
        count, t0 = 0, time.perf_counter()
        while time.perf_counter() - t0 < seconds or count < 3:
            c @ v
            count += 1
        elapsed = time.perf_counter() - t0
    return flops * count / elapsed / 1e9


def _peak_memory_mib() -> float:
    import resource

    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    return rss / 1024.0 if sys.platform != "darwin" else rss / 2 ** 20   # KiB on Linux


def run_case(name: str, case: dict, *, measure_seconds: float = 1.0,
             throughput: bool = True) -> dict:
    """Run one case in this process and return its figures (rank 0's under MPI)."""
    import pwsolid
    from pwsolid.parallel import world

    baseline = _peak_memory_mib()
    crystal, settings = _build(case)
    comm = world()
    t0 = time.perf_counter()
    setup = pwsolid.prepare(crystal, settings, comm=comm)
    setup_seconds = time.perf_counter() - t0
    gs = pwsolid.ground_state(crystal, settings, setup=setup)
    peak = _peak_memory_mib()
    wall = gs.wall_seconds
    n_pw = max(b.size for b in setup.bases)
    out = {
        "case": name, "title": case["title"], "atoms": crystal.n_atoms,
        "electrons": setup.n_electrons, "kpoints": len(setup.bases),
        "fft_grid": list(setup.grid_shape), "bands": setup.n_bands, "plane_waves": n_pw,
        "fft_batch": setup.fft.batch, "fft_threads": setup.fft.threads,
        "processes": comm.size,
        "converged": bool(gs.converged), "total_energy_Ha": float(gs.total_energy),
        "energy_per_atom_Ha": (float(gs.total_energy) / crystal.n_atoms
                               if crystal.n_atoms else None),
        "setup_seconds": setup_seconds, "scf_wall_seconds": wall,
        "scf_iterations": gs.iterations, "seconds_per_iteration": wall / gs.iterations,
        "hamiltonian_applications_per_band": gs.applications_per_band,
        "fft_seconds": gs.fft_seconds, "blas_seconds": gs.blas_seconds,
        "fft_share": gs.fft_seconds / wall, "blas_share": gs.blas_seconds / wall,
        "fft_plus_blas_share": (gs.fft_seconds + gs.blas_seconds) / wall,
        "fft_transforms": setup.fft.n_transforms,
        "peak_memory_mib": peak, "memory_after_imports_mib": baseline,
    }
    if throughput:
        rate = fft_throughput(setup.fft, setup.bases[0].grid_index, measure_seconds)
        out["fft_transforms_per_second"] = rate
        # how close the SCF's own transforms came to the rate measured in isolation
        out["fft_rate_in_scf_over_measured"] = (setup.fft.n_transforms / gs.fft_seconds / rate
                                                if gs.fft_seconds > 0 else None)
        out["matmul_gflops"] = matmul_gflops(setup.n_bands, n_pw, measure_seconds)
    if comm.size > 1:
        out["scf_wall_seconds_per_process"] = comm.allgather(wall)
    return out


def _worker(argv) -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--worker", required=True)
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--json-out", required=True)
    ap.add_argument("--no-throughput", action="store_true")
    args = ap.parse_args(argv)
    cases = QUICK_CASES if args.quick else FULL_CASES
    figures = run_case(args.worker, cases[args.worker],
                       measure_seconds=0.1 if args.quick else 1.0,
                       throughput=not args.no_throughput)
    from pwsolid.parallel import world

    if world().rank == 0:
        Path(args.json_out).write_text(json.dumps(figures, indent=1))
    return 0


# --------------------------------------------------------------------------- driver

def _start(name: str, quick: bool, tmp: str, *, ranks: int | None = None,
           throughput: bool = True, tag: str = "") -> tuple:
    """Start one case in a fresh process (under ``mpiexec -n ranks`` if given)."""
    out = Path(tmp) / f"{name}{tag}.json"
    cmd = [sys.executable, str(Path(__file__).resolve()), "--worker", name,
           "--json-out", str(out)]
    cmd += ["--quick"] if quick else []
    cmd += [] if throughput else ["--no-throughput"]
    if ranks is not None:
        cmd = [mpi_launcher(), "-n", str(ranks)] + cmd
    env = dict(os.environ, PYTHONWARNINGS="ignore")
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            env=env)
    return proc, cmd, out, time.perf_counter()


def _collect(started, timeout: float = 3600.0) -> dict:
    proc, cmd, out, t0 = started
    stdout, stderr = proc.communicate(timeout=timeout)
    elapsed = time.perf_counter() - t0
    if proc.returncode != 0 or not out.exists():
        raise RuntimeError(f"case failed ({' '.join(cmd)}):\n{stdout}\n{stderr}")
    figures = json.loads(out.read_text())
    figures["process_seconds"] = elapsed
    return figures


def _launch(name: str, quick: bool, **kwargs) -> dict:
    with tempfile.TemporaryDirectory() as tmp:
        return _collect(_start(name, quick, tmp, **kwargs))


def _mpi_figures(quick: bool, launcher: str) -> dict:
    """The k-mesh MPI case (see :func:`_speedup_figures`)."""
    return dict(_speedup_figures(MPI_CASE, quick), launcher=launcher)


def _speedup_figures(case: str, quick: bool) -> dict:
    """``case`` on 1 and 2 processes, and two independent serial copies at once.

    The copies measure what this machine gives two processes at the moment (other
    users, shared caches and memory bandwidth): their combined throughput over one
    copy alone is the most any two-process run could gain, so the MPI speed-up is
    also reported as a fraction of it.
    """
    with tempfile.TemporaryDirectory() as tmp:
        one = _collect(_start(case, quick, tmp, ranks=1, throughput=False, tag="-1"))
        two = _collect(_start(case, quick, tmp, ranks=2, throughput=False, tag="-2"))
        alone = _collect(_start(case, quick, tmp, throughput=False, tag="-alone"))
        pair = [_start(case, quick, tmp, throughput=False, tag=f"-copy{i}") for i in (0, 1)]
        copies = [_collect(p) for p in pair]
    speedup = one["scf_wall_seconds"] / two["scf_wall_seconds"]
    capacity = 2.0 * alone["scf_wall_seconds"] / (
        0.5 * sum(c["scf_wall_seconds"] for c in copies))
    return {"case": case, "one_process": one, "two_processes": two,
            "serial_alone": alone, "serial_copies_at_once": copies,
            "energy_difference_Ha": abs(one["total_energy_Ha"] - two["total_energy_Ha"]),
            "speedup": speedup, "machine_two_process_capacity": capacity,
            "speedup_over_capacity": speedup / capacity}


def mpi_launcher() -> str | None:
    """Path of ``mpiexec`` (beside this Python first, then on PATH) when mpi4py imports too."""
    try:
        import mpi4py  # noqa: F401
    except ImportError:
        return None
    here = Path(sys.executable).parent / "mpiexec"
    if here.exists():
        return str(here)
    return shutil.which("mpiexec")


def scaling_exponent(atoms, seconds) -> float | None:
    """Least-squares slope of log(seconds) against log(atoms)."""
    pts = [(math.log(a), math.log(s)) for a, s in zip(atoms, seconds) if a > 0 and s > 0]
    if len(pts) < 2:
        return None
    mx = sum(x for x, _ in pts) / len(pts)
    my = sum(y for _, y in pts) / len(pts)
    sxx = sum((x - mx) ** 2 for x, _ in pts)
    return sum((x - mx) * (y - my) for x, y in pts) / sxx if sxx > 0 else None


def _pct(x) -> str:
    return "-" if x is None else f"{100 * x:.0f}%"


def _num(x, fmt) -> str:
    return "-" if x is None else format(x, fmt)


COLUMNS = (
    ("case", "case", lambda r: r["title"]),
    ("k", "irreducible k-points", lambda r: str(r["kpoints"])),
    ("grid", "FFT grid", lambda r: "x".join(map(str, r["fft_grid"]))),
    ("bands", "bands", lambda r: str(r["bands"])),
    ("PW", "plane waves (largest k)", lambda r: str(r["plane_waves"])),
    ("iter", "SCF iterations", lambda r: str(r["scf_iterations"])),
    ("s/iter", "seconds per SCF iteration", lambda r: _num(r["seconds_per_iteration"], ".3g")),
    ("H/band", "Hamiltonian applications per band", lambda r: _num(
        r["hamiltonian_applications_per_band"], ".1f")),
    ("FFT", "share of SCF wall time in FFTs", lambda r: _pct(r["fft_share"])),
    ("BLAS", "share in dense linear algebra", lambda r: _pct(r["blas_share"])),
    ("FFT+BLAS", "sum of the two", lambda r: _pct(r["fft_plus_blas_share"])),
    ("peak MiB", "peak resident memory of the case's process", lambda r: _num(
        r["peak_memory_mib"], ".0f")),
    ("FFT/s", "measured transforms per second on the grid", lambda r: _num(
        r.get("fft_transforms_per_second"), ".3g")),
    ("GFLOP/s", "measured complex matmul, subspace shape, 1 thread", lambda r: _num(
        r.get("matmul_gflops"), ".3g")),
)


def markdown_table(rows) -> str:
    head = "| " + " | ".join(c[0] for c in COLUMNS) + " |"
    rule = "|" + "|".join("---" if i == 0 else "---:" for i in range(len(COLUMNS))) + "|"
    body = ["| " + " | ".join(c[2](r) for c in COLUMNS) + " |" for r in rows]
    return "\n".join([head, rule, *body])


def evaluate_targets(rows: dict, summary: dict) -> list[dict]:
    out = []
    for key, case, figure, op, limit, text in TARGETS:
        value = summary.get(figure) if case is None else rows.get(case, {}).get(figure)
        if value is None:
            status = "not measured"
        else:
            ok = value >= limit if op == ">=" else value <= limit
            status = "met" if ok else "missed"
        out.append({"target": key, "description": text, "value": value, "operator": op,
                    "limit": limit, "status": status})
    return out


def _fmt_target(t) -> str:
    v = t["value"]
    if v is None:
        shown = "-"
    elif t["target"].startswith("fft_blas"):
        shown = f"{100 * v:.0f}%"
    elif t["target"] == "memory_si64":
        shown = f"{v:.0f} MiB"
    elif t["target"] == "mpi_speedup":
        shown = f"{v:.2f}x"
    else:
        shown = f"{v:.2f}"
    return f"- {t['status'].upper() if t['status'] == 'missed' else t['status']}: " \
           f"{t['description']} (measured {shown})"


def main(argv=None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    if "--worker" in argv:
        return _worker(argv)
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="small versions of the cases")
    ap.add_argument("--cases", help="comma-separated subset of: " + ", ".join(FULL_CASES))
    ap.add_argument("--no-mpi", action="store_true", help="skip the MPI speed-up")
    ap.add_argument("--out-dir", default=str(HERE), help="where results.md/.json go")
    args = ap.parse_args(argv)
    table = QUICK_CASES if args.quick else FULL_CASES
    names = list(table) if not args.cases else [c.strip() for c in args.cases.split(",")]
    unknown = [n for n in names if n not in table]
    if unknown:
        ap.error(f"unknown case(s) {', '.join(unknown)}; choose from {', '.join(table)}")
    rows: dict[str, dict] = {}
    t_start = time.perf_counter()
    for name in names:
        print(f"running {name}: {table[name]['title']} ...", flush=True)
        rows[name] = _launch(name, args.quick)
        r = rows[name]
        print(f"  {r['scf_iterations']} iterations, {r['scf_wall_seconds']:.1f} s SCF, "
              f"FFT+BLAS {_pct(r['fft_plus_blas_share'])}, peak {r['peak_memory_mib']:.0f} MiB",
              flush=True)
    summary: dict = {}
    scaling = [n for n in SCALING_CASES if n in rows]
    if len(scaling) >= 2:
        summary["scaling_cases"] = scaling
        summary["scaling_exponent"] = scaling_exponent(
            [rows[n]["atoms"] for n in scaling], [rows[n]["seconds_per_iteration"] for n in scaling])
    if "si64" in rows and "si8-k222" in rows:
        # the 64-atom cell at Gamma samples the 8-atom cell's 2x2x2 mesh exactly
        summary["folding_check_energy_per_atom_difference_Ha"] = abs(
            rows["si64"]["energy_per_atom_Ha"] - rows["si8-k222"]["energy_per_atom_Ha"])
    launcher = None if args.no_mpi else mpi_launcher()
    if launcher and MPI_CASE in names:
        print(f"running {MPI_CASE} under {launcher} -n 1 and -n 2 ...", flush=True)
        summary["mpi"] = _mpi_figures(args.quick, launcher)
        summary["mpi_speedup"] = summary["mpi"]["speedup"]
        print(f"  speed-up {summary['mpi_speedup']:.2f}x (two serial copies at once: "
              f"{summary['mpi']['machine_two_process_capacity']:.2f}x the throughput of one), "
              f"energies differ by {summary['mpi']['energy_difference_Ha']:.1e} Ha", flush=True)
    elif not args.no_mpi and not launcher:
        summary["mpi_note"] = "mpiexec or mpi4py not found: install the parallel extra"
    if launcher and BAND_MPI_CASE in names:
        print(f"running {BAND_MPI_CASE} under {launcher} -n 1 and -n 2 ...", flush=True)
        summary["band_mpi"] = _speedup_figures(BAND_MPI_CASE, args.quick)
        print(f"  speed-up {summary['band_mpi']['speedup']:.2f}x (two serial copies at once: "
              f"{summary['band_mpi']['machine_two_process_capacity']:.2f}x the throughput of "
              f"one), energies differ by {summary['band_mpi']['energy_difference_Ha']:.1e} Ha",
              flush=True)
    targets = evaluate_targets(rows, summary)
    command = "python benchmarks/run_suite.py" + (" --quick" if args.quick else "") + (
        f" --cases {args.cases}" if args.cases else "")
    lines = [f"Command: `{command}`  ", f"Machine: {platform.machine()}, "
             f"{os.cpu_count()} cores, Python {platform.python_version()}; suite wall time "
             f"{time.perf_counter() - t_start:.0f} s", "", markdown_table(rows.values()), ""]
    if "scaling_exponent" in summary:
        lines.append(f"Time per SCF iteration grows as N^{summary['scaling_exponent']:.2f} over "
                     f"{', '.join(str(rows[n]['atoms']) for n in scaling)} atoms (least squares, "
                     "log-log).  ")
    if "folding_check_energy_per_atom_difference_Ha" in summary:
        lines.append("64 atoms at Gamma against 8 atoms on 2x2x2: energies per atom differ by "
                     f"{summary['folding_check_energy_per_atom_difference_Ha']:.1e} Ha.  ")
    if "mpi_speedup" in summary:
        m = summary["mpi"]
        lines.append(f"MPI ({MPI_CASE}): {m['one_process']['scf_wall_seconds']:.1f} s on 1 "
                     f"process, {m['two_processes']['scf_wall_seconds']:.1f} s on 2: speed-up "
                     f"{summary['mpi_speedup']:.2f}x; total energies differ by "
                     f"{m['energy_difference_Ha']:.1e} Ha. Two independent serial copies run "
                     f"at once got {m['machine_two_process_capacity']:.2f}x the throughput of "
                     f"one, so the MPI run reached {100 * m['speedup_over_capacity']:.0f}% of "
                     "what this machine offered two processes.  ")
    elif "mpi_note" in summary:
        lines.append(f"MPI: {summary['mpi_note']}.  ")
    if "band_mpi" in summary:
        b = summary["band_mpi"]
        lines.append(f"MPI, one k-point ({b['case']}, bands and plane waves shared): "
                     f"{b['one_process']['scf_wall_seconds']:.1f} s on 1 process, "
                     f"{b['two_processes']['scf_wall_seconds']:.1f} s on 2: speed-up "
                     f"{b['speedup']:.2f}x; total energies differ by "
                     f"{b['energy_difference_Ha']:.1e} Ha. Two serial copies at once got "
                     f"{b['machine_two_process_capacity']:.2f}x the throughput of one: "
                     f"{100 * b['speedup_over_capacity']:.0f}% of what the machine offered.  ")
    lines += ["", "Targets (--quick: small cases, not a measurement):" if args.quick
              else "Targets:", *[_fmt_target(t) for t in targets]]
    text = "\n".join(lines) + "\n"
    print()
    print(text)
    out_dir = Path(args.out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    (out_dir / "results.md").write_text(text)
    doc = {"command": command, "quick": bool(args.quick), "machine": platform.machine(),
           "cores": os.cpu_count(), "python": platform.python_version(),
           "columns": {c[0]: c[1] for c in COLUMNS}, "cases": rows, "summary": summary,
           "targets": targets}
    (out_dir / "results.json").write_text(json.dumps(doc, indent=1) + "\n")
    print(f"written: {out_dir / 'results.md'}, {out_dir / 'results.json'}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
