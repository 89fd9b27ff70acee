"""The benchmark suite runs and produces its table (a smoke test: nothing is timed)."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

SUITE = Path(__file__).resolve().parents[2] / "benchmarks" / "run_suite.py"


@pytest.mark.slow
def test_quick_suite_writes_one_table_and_the_figures(tmp_path):
    env = dict(os.environ)
    env.pop("PWSOLID_THREADS", None)
    proc = subprocess.run([sys.executable, str(SUITE), "--quick", "--no-mpi",
                           "--out-dir", str(tmp_path)],
                          capture_output=True, text=True, timeout=180, env=env)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    table = (tmp_path / "results.md").read_text()
    assert table in proc.stdout
    header = [line for line in table.splitlines() if line.startswith("| case |")]
    assert len(header) == 1
    doc = json.loads((tmp_path / "results.json").read_text())
    assert set(doc["cases"]) == {"silicon", "aluminium", "si8", "si16", "jellium"}
    rows = [line for line in table.splitlines() if line.startswith("| ") and "---" not in line]
    assert len(rows) == 1 + len(doc["cases"])
    for name, case in doc["cases"].items():
        assert case["converged"], name
        assert case["scf_iterations"] >= 1 and case["peak_memory_mib"] > 0
        assert 0 <= case["fft_plus_blas_share"] <= 1.0 + 1e-9
        assert case["fft_transforms_per_second"] > 0 and case["matmul_gflops"] > 0
    assert doc["cases"]["jellium"]["atoms"] == 0
    assert doc["summary"]["scaling_exponent"] is not None
    assert {t["target"] for t in doc["targets"]} == {
        "fft_blas_silicon", "fft_blas_si64", "scaling", "memory_si64", "mpi_speedup"}
    assert "Targets" in table
