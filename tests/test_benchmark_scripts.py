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


def test_collapse_script_quick_cylinder(tmp_path):
    # Hill (1950): p_c = 2 s_u ln(b/a); the script's own band check (T15 0...+1 %, T6 0...+2 %)
    rows = run_script("collapse", tmp_path, "--only", "cylinder")
    assert {r["case"] for r in rows} == {"cylinder_T15", "cylinder_T6"}
    for r in rows:
        assert r["passed"] and r["band"][0] <= r["error"] <= r["band"][1]


@pytest.mark.slow
def test_collapse_script_full():
    """Every collapse case of docs/validation.md, C1-C5, D1, D2, E5 on its standard mesh."""
    res = subprocess.run([sys.executable, "-m", "benchmarks.collapse"], cwd=ROOT,
                         capture_output=True, text=True, timeout=3600)
    assert res.returncode == 0, res.stdout + res.stderr


def test_return_map_and_newton_scripts_quick(tmp_path):
    rm = run_script("perf_return_map", tmp_path)
    assert all(v > 0 for k, v in rm.items() if k.endswith("_points_per_s"))
    nw = run_script("perf_newton", tmp_path)
    rec = nw["8k"]
    # the phases add up to the iteration, and the state is genuinely elastoplastic
    phases = sum(v for k, v in rec.items() if k.startswith("t_") and k.endswith("_ms")
                 and k not in ("t_iteration_ms", "t_outside_solver_ms"))
    assert phases == pytest.approx(rec["t_iteration_ms"], rel=1e-9)
    assert 0.02 < rec["plastic_fraction"] < 0.9


def test_bench_runner_detects_regressions():
    """The comparison rules of `tiltfe bench` (issue contract): newly failing, an error moved
    by more than half the band, a speed-up ratio below half the baseline."""
    from benchmarks.runner import compare

    base = {"a": {"kind": "validation", "error": 0.001, "passed": True},
            "b": {"kind": "validation", "error": 0.001, "passed": True},
            "c": {"kind": "ratio", "computed": 20.0, "passed": True}}
    rows = [{"case": "a", "kind": "validation", "error": 0.0012, "band": [0.0, 0.02],
             "passed": True},
            {"case": "b", "kind": "validation", "error": 0.015, "band": [0.0, 0.02],
             "passed": True},
            {"case": "c", "kind": "ratio", "computed": 9.0, "passed": True}]
    msgs = compare(rows, base)
    assert len(msgs) == 2 and msgs[0].startswith("b:") and msgs[1].startswith("c:")
    rows[0]["passed"] = False
    assert any(m.startswith("a:") for m in compare(rows, base))


def test_bench_quick_suite_passes_against_baseline(tmp_path):
    """`tiltfe bench --quick`: every validation case inside its band (references and sources
    in benchmarks/collapse.py and benchmarks/validation.py) and no regression against the
    committed baseline."""
    res = subprocess.run([sys.executable, "-m", "femcore", "bench", "--quick", "--out",
                          str(tmp_path)], cwd=ROOT, capture_output=True, text=True,
                         timeout=1800)
    assert res.returncode == 0, res.stdout[-4000:] + res.stderr[-2000:]
    data = json.loads((tmp_path / "bench.json").read_text())
    validation = [r for r in data["rows"] if r["kind"] == "validation"]
    assert len(validation) >= 25 and all(r["passed"] for r in validation)
    assert (tmp_path / "convergence.png").stat().st_size > 0


def test_perf_run_split_quick(tmp_path):
    """One ``tiltfe run`` (coarse demo) in a fresh process: the parts of its split add up to
    its wall time (start-up is the remainder and cannot be negative), the ratios follow
    from the parts, and the stages record their factorizations (each Newton iteration of a
    load stage factorizes at most once)."""
    res = run_script("perf_run", tmp_path)
    parts = ("startup_s", "elastic_3d_s", "calibration_s", "build_s", "stages_s",
             "pushover_s", "design_strength_s", "postprocess_s", "outputs_s", "other_s")
    assert all(res[k] >= 0 for k in parts if k != "other_s")
    assert abs(res["other_s"]) < 0.05 * res["wall_s"]
    assert sum(res[k] for k in parts) == pytest.approx(res["wall_s"], rel=1e-9)
    assert res["wall_over_pushover"] == pytest.approx(res["wall_s"] / res["pushover_s"])
    assert 0 < res["pushover_solver_share"] <= 1
    f = res["stage_factorizations"]
    assert f["at-rest stresses"] == 0 and 1 <= f["self-weight"] <= 12
    assert f["pushover"] >= 1
