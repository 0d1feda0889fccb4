"""Benchmark scripts run in their quick mode as subprocesses, so they keep working.

Speed is never asserted here (it is reported by the scripts); what is asserted are the
numbers the scripts check internally: our elastic stiffness equals scikit-fem's on the same
mesh (trace and Frobenius norm are invariant under DOF numbering; 1e-10 relative).
"""

import json
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def run_script(module: str, tmp_path: Path, *args: str) -> dict:
    out = tmp_path / f"{module}.json"
    subprocess.run([sys.executable, "-m", f"benchmarks.{module}", "--quick", "--json", str(out),
                    *args], cwd=ROOT, check=True, capture_output=True, text=True, timeout=600)
    return json.loads(out.read_text())


def test_perf_elastic_assembly_quick(tmp_path):
    pytest.importorskip("skfem")
    res = run_script("perf_elastic_assembly", tmp_path)
    assert res["n_dofs"] > 1000
    assert res["trace_rel_diff"] < 1e-10
    assert res["frobenius_rel_diff"] < 1e-10
    assert res["n_qp"] == res["n_qp_skfem"]  # same integration rule size
