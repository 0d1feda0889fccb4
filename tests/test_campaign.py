"""Training-data campaigns: the space schema and its up-front checks, bounded formulas,
sampling, local and Dask execution, crash-resume, stores of the older layout, typed records,
invalid samples, and the export with the requirement and dynamic-stiffness columns.

Expectations: a campaign stores every sample exactly once and never loses a finished run;
scrambled Sobol' points come from scipy.stats.qmc, so a fixed seed gives identical samples;
each exported result equals that of a direct run of the stored design (same code, same
inputs) and the requirement margins equal value / required - 1.
"""

import copy
import csv
import json
import math
import os
import re
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
from conftest import springs_space_text, toml_text

from benchmarks.faults import alive_of, children_of, store_rows
from femcore.foundation.design import demo_design, design_from_dict, load_design
from femcore.foundation.dynamic import dynamic_stiffness
from femcore.foundation.run import run_design
from femcore.workflows.campaign import (
    FINISHED,
    RunRecord,
    SpaceError,
    Store,
    design_dict,
    evaluate_formula,
    export,
    export_rows,
    load_space,
    run_campaign,
    run_sample,
    sample_space,
    space_json_schema,
    status_summary,
)
from femcore.workflows.campaign.space import space_from_dict
from femcore.workflows.campaign.store import StoreError

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "examples" / "fennwick_fw07.toml"
FAST = "[run]\ndesign_strength = false\n"
SMALL = ROOT / "examples" / "small_group_springs.toml"


def _space(tmp_path: Path, size=8, extra="", diameter=(19.0, 25.0), support=None,
           follow_cap=True) -> Path:
    analysis = 'mesh = "coarse"\nelement = "T6"\n' + (f'support = "{support}"\n' if support
                                                        else "")
    ring = ('[[derived]]\npath = "piles.rings.0.radius"\nformula = "cap.diameter / 2 - 1.1"\n'
            if follow_cap else "")
    text = f'''base = "{DEMO.as_posix()}"
[analysis]
{analysis}
[[parameter]]
path = "cap.diameter"
low = {diameter[0]}
high = {diameter[1]}
[[parameter]]
path = "soil.layers.2.su"
low = 8.0
high = 20.0
[[parameter]]
path = "piles.rings.1.count"
distribution = "choice"
values = [12, 16]
[[derived]]
path = "soil.layers.4.thickness"
formula = "40.0"
{ring}{extra}
[sampling]
method = "sobol"
size = {size}
seed = 3
'''
    p = tmp_path / "space.toml"
    p.write_text(text)
    return p


def test_sampling_is_reproducible_and_in_range(tmp_path):
    sp = load_space(_space(tmp_path, size=16))
    a, b = sample_space(sp), sample_space(sp)
    assert a == b and len(a) == 16
    d = np.array([s["values"]["cap.diameter"] for s in a])
    assert np.all((d >= 19.0) & (d <= 25.0))
    assert {s["values"]["piles.rings.1.count"] for s in a} == {12, 16}
    u = np.array([s["unit"] for s in a])
    # scrambled Sobol' with n = 16 is a (t,m,s)-net: each 1/16 stratum of every coordinate
    # holds exactly one point (Owen 1995; scipy.stats.qmc)
    assert all(len(set(np.floor(u[:, k] * 16).astype(int))) == 16 for k in range(3))
    with pytest.raises(SpaceError, match="power of two"):
        load_space(_space(tmp_path, size=12))


def test_formulas_are_arithmetic_only():
    data = {"cap": {"diameter": 22.0}, "piles": {"rings": [{"radius": 9.9}], "width": 0.45}}
    assert evaluate_formula("round(2 * pi * piles.rings.0.radius / (5 * piles.width))",
                            data) == round(2 * np.pi * 9.9 / 2.25)
    assert evaluate_formula("cap.diameter / 2 - 1.1", data) == pytest.approx(9.9)
    assert evaluate_formula("-2 ** 2 + max(1, 3) * 1e3", data) == -4 + 3000.0
    for bad, why in [("__import__('os')", "unknown function '__import__'"),
                     ("cap.diameter.__class__", "cap.diameter is the value 22.0"),
                     ("open('x')", "unknown function 'open'"), ("[1, 2]", "not allowed"),
                     ("(1).real", "not allowed"), ("cap.diameter if 1 else 2", "not allowed"),
                     ("diameter / 2", "unknown name 'diameter'"),
                     ("cap.radius / 2", "cap has no key 'radius'"),
                     ("cap.diameter /", "not a valid expression"),
                     ("1 / (cap.diameter - 22)", "ZeroDivisionError"),
                     ("(-8) ** 0.5", "not a real number")]:
        with pytest.raises(SpaceError, match=re.escape(why)):
            evaluate_formula(bad, data)


@pytest.mark.parametrize("formula, why", [
    ("10 ** 10 ** 10", "exponent 1e+10 exceeds 64"),  # unbounded, this would never finish
    ("2 ** 65", "exponent 65 exceeds 64"),
    ("(10 ** 60) ** 6", "beyond the bound of 1e+300"),
    ("1e300 * 10", "beyond the bound of 1e+300"),
    ("round(1.5, 10 ** 20)", "round(x, n) needs an integer n"),
    ("-" * 60 + "1", "too complex"),
    ("+".join(["1"] * 120), "too complex"),
    ("(" * 300 + "1" + ")" * 300, "nested parentheses"),
    ("1" * 3000, "at most 2000"),
], ids=["tower", "pow65", "pow_result", "product", "round_digits", "unary_chain", "long_sum",
        "parentheses", "length"])
def test_formulas_are_bounded(formula, why):
    t = time.perf_counter()
    with pytest.raises(SpaceError, match=re.escape(why)):
        evaluate_formula(formula, {})
    assert time.perf_counter() - t < 0.5
    assert evaluate_formula("2 ** 64", {}) == 18446744073709551616  # the largest exponent


@pytest.fixture(scope="module")
def local_store(tmp_path_factory):
    """Eight coarse samples of the demo space, characteristic pushover only (FAST)."""
    tmp = tmp_path_factory.mktemp("camp")
    store = tmp / "local.sqlite"
    summary = run_campaign(_space(tmp, extra=FAST), store, workers=2, quiet=True)
    return tmp, store, summary


def test_local_campaign_runs_every_sample(local_store):
    _, store, summary = local_store
    assert summary["finished"] == 8 and summary["remaining"] == 0
    rows = Store(store).rows()
    assert sorted(r["sample_id"] for r in rows) == list(range(8))
    assert all(r["status"] in ("ok", "censored") for r in rows)
    r = rows[0]
    assert len(r["curve"]["rotation"]) == 40 and r["provenance"]["element"] == "T6"
    assert r["keypoints"]["initial_stiffness"] > 0
    # every capacity label says whether it is a bound; no factored run was asked for
    assert all(x["keypoints"]["ultimate_censored"] in (0.0, 1.0) for x in rows)
    assert all("design_strength.ultimate" not in x["keypoints"] for x in rows)


def test_record_carries_the_design_strength_capacity():
    """A base design with [design_strength]: the record's labels are the result's own
    values (the factored ultimate, its rotation, the censored flags) [identity]."""
    from femcore.workflows.campaign.execution import record_from_result

    d = run_design(demo_design(support="springs"), dynamic=False).to_dict()
    rec = record_from_result(d, 1, 1.0, 0.05)
    ds = d["design_strength"]["keypoints"]["ultimate"]
    assert rec.keypoints["design_strength.ultimate"] == ds["value"]
    assert rec.keypoints["design_strength.ultimate_rotation"] == ds["extra"]["rotation"]
    assert rec.keypoints["ultimate_censored"] == 0.0
    assert rec.keypoints["ultimate"] == d["keypoints"]["ultimate"]["value"]


def test_dask_local_cluster_gives_identical_results(local_store, tmp_path):
    distributed = pytest.importorskip("distributed")
    tmp, store, _ = local_store
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  host="127.0.0.1", dashboard_address=None) as cluster:
        other = tmp_path / "dask.sqlite"
        run_campaign(_space(tmp, extra=FAST), other, scheduler=cluster.scheduler_address,
                     quiet=True)
    a = {r["sample_id"]: r for r in Store(store).rows()}
    b = {r["sample_id"]: r for r in Store(other).rows()}
    assert a.keys() == b.keys()
    for k in a:
        assert a[k]["status"] == b[k]["status"]
        assert a[k]["keypoints"] == b[k]["keypoints"]  # bitwise: same code, same inputs
        assert a[k]["curve"] == b[k]["curve"]


def test_resume_skips_finished_rows(local_store):
    tmp, store, _ = local_store
    before = {r["sample_id"]: r["finished_at"] for r in Store(store).rows()}
    summary = run_campaign(_space(tmp, extra=FAST), store, workers=2, quiet=True)
    after = {r["sample_id"]: r["finished_at"] for r in Store(store).rows()}
    assert summary["finished"] == 8 and before == after


def test_export_round_trip(local_store, tmp_path):
    _, store, _ = local_store
    rows = Store(store).rows()
    out = export(store, tmp_path / "t.csv")
    with out.open() as fh:
        table = list(csv.DictReader(fh))
    assert len(table) == len(rows)
    for t, r in zip(table, rows, strict=True):
        assert int(t["sample_id"]) == r["sample_id"]
        assert float(t["kp.initial_stiffness"]) == pytest.approx(
            r["keypoints"]["initial_stiffness"], rel=1e-12)
        assert float(t["cap.diameter"]) == pytest.approx(r["inputs"]["cap"]["diameter"],
                                                         rel=1e-12)
    pq = pytest.importorskip("pyarrow.parquet")
    table = pq.read_table(export(store, tmp_path / "t.parquet")).to_pydict()
    assert table["sample_id"] == [r["sample_id"] for r in rows]
    assert np.allclose(table["moment_10"], [r["curve"]["moment"][10] for r in rows])
    # pile forces, timings, model size and provenance travel with every row
    for t, r in zip(table["sample_id"], rows, strict=True):
        assert t == r["sample_id"]
    for k, r in enumerate(rows):
        for pile in r["piles"]:
            for part in ("max_compression", "max_tension", "max_bending_moment"):
                assert table[f"pile.{pile['row']}.{part}"][k] == pytest.approx(pile[part],
                                                                             rel=1e-12)
        assert table["time.total_s"][k] == pytest.approx(r["timings"]["total_s"], rel=1e-12)
        assert table["model.dofs"][k] == r["model"]["dofs"]
        assert table["prov.tiltfe"][k] == r["provenance"]["tiltfe"]
        assert table["finished_at"][k] == pytest.approx(r["finished_at"], rel=1e-12)


def _wait_for(cond, timeout: float) -> bool:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if cond():
            return True
        time.sleep(0.05)
    return False


@pytest.mark.skipif(not Path("/proc/self/stat").exists(), reason="needs Linux /proc to see "
                    "the worker processes")
def test_sigint_lock_and_killed_coordinator(tmp_path):
    """The campaign's fault behaviour (issue: bad input and faults), with two local workers
    on coarse continuum runs of a few seconds each:

    * a second coordinator on the same store is refused (exit 2) while the first runs;
    * SIGINT stops the first within 10 s (exit 130, a one-line summary), every row finished
      before the signal is kept, and no worker process is left;
    * after SIGKILL of the coordinator its workers leave by themselves within seconds, and
      the lock goes with the killed process (a new run may start at once).
    """
    space = _space(tmp_path, size=16, extra=FAST)
    store = tmp_path / "faults.sqlite"
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    cmd = [sys.executable, "-m", "femcore", "campaign", "run", str(space), "--store",
           str(store), "--workers", "2"]
    proc = subprocess.Popen(cmd + ["--quiet"], env=env, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)
    try:
        assert _wait_for(lambda: store_rows(store) >= 1 and len(children_of(proc.pid)) >= 2,
                         120), "no run finished within 120 s"
        workers = children_of(proc.pid)
        second = subprocess.run(cmd + ["--limit", "1"], env=env, capture_output=True,
                                text=True, timeout=60)
        assert second.returncode == 2, second.stderr
        assert "another campaign run is writing this store" in second.stderr
        assert "Traceback" not in second.stderr
        kept = store_rows(store)
        assert proc.poll() is None, "the campaign ended before the signal"
        t = time.monotonic()
        proc.send_signal(signal.SIGINT)
        out, err = proc.communicate(timeout=60)
        stop_s = time.monotonic() - t
    finally:
        if proc.poll() is None:
            proc.kill()
    assert stop_s <= 10.0, f"SIGINT took {stop_s:.1f} s to stop the campaign"
    assert proc.returncode == 130, err
    assert "stopped by SIGINT" in err and "the same command resumes" in err
    assert "Traceback" not in err
    rows = Store(store, mode="read").rows()
    assert kept <= len(rows) < 16  # finished rows kept, the rest not run
    assert all(r["status"] in FINISHED for r in rows)
    assert _wait_for(lambda: not alive_of(workers), 3.0), "worker processes left behind"

    # SIGKILL of the coordinator: its workers notice and leave; the lock is released
    proc = subprocess.Popen(cmd + ["--quiet"], env=env, stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL)
    try:
        assert _wait_for(lambda: len(children_of(proc.pid)) >= 2, 60)
        workers = children_of(proc.pid)
        proc.kill()
        proc.wait()
        assert _wait_for(lambda: not alive_of(workers), 5.0), "workers outlived a killed " \
            "coordinator"
    finally:
        if proc.poll() is None:
            proc.kill()
    again = subprocess.run(cmd + ["--limit", "0"], env=env, capture_output=True, text=True,
                           timeout=60)
    assert again.returncode == 0, again.stderr


class _FullDisk:
    """An SQLite connection stand-in whose every write fails as on a full disk."""

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False

    def execute(self, *args):
        raise sqlite3.OperationalError("database or disk is full")

    def close(self):
        pass


def test_read_only_store_and_full_disk_are_named(tmp_path):
    """SQLite's own errors become one message naming the store and what to do."""
    path = tmp_path / "ro.sqlite"
    Store(path).close()
    rec = RunRecord("ok", "fine")
    sample = {"id": 0, "set": "train", "unit": [0.5]}
    with Store(path, mode="read") as ro, pytest.raises(
            StoreError, match=r"ro.sqlite: cannot be written \(the file or its folder is "
                              r"read-only\)"):
        ro.add(sample, {}, rec, {})
    st = Store(path)
    st.db.close()
    st.db = _FullDisk()
    with pytest.raises(StoreError, match="the disk is full .every run finished before is "
                       "kept"):
        st.add(sample, {}, rec, {})
    assert Store(path, mode="read").rows() == []


def test_store_lock_is_held_until_close(tmp_path):
    path = tmp_path / "locked.sqlite"
    first = Store(path)
    first.lock()
    with pytest.raises(StoreError, match=r"another campaign run is writing this store \(pid "
                       rf"{os.getpid()} on"):
        Store(path).lock()
    first.close()
    with Store(path) as again:  # released with the first handle
        again.lock()


def test_invalid_samples_are_recorded_not_run(tmp_path):
    # cap diameters down to 10 m put the 9.9 m pile ring outside the cap for most samples
    store = tmp_path / "inv.sqlite"
    run_campaign(_space(tmp_path, size=4, diameter=(10.0, 30.0), support="springs",
                        follow_cap=False), store, workers=1, quiet=True)
    rows = Store(store).rows()
    assert len(rows) == 4
    invalid = [r for r in rows if r["status"] == "invalid_input"]
    assert invalid and all("piles.rings.0.radius" in r["message"] for r in invalid)
    assert all(r["keypoints"] is None for r in invalid)


def test_sigkill_then_resume_loses_nothing(tmp_path):
    space = _space(tmp_path, size=8, extra=FAST)  # coarse continuum runs: killed mid-way
    store = tmp_path / "crash.sqlite"
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    cmd = [sys.executable, "-m", "femcore", "campaign", "run", str(space), "--store",
           str(store), "--workers", "1", "--quiet"]
    proc = subprocess.Popen(cmd, env=env, start_new_session=True, stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL)
    deadline = time.time() + 120
    n = 0
    while time.time() < deadline:
        if store.exists():
            try:
                n = sqlite3.connect(store).execute("SELECT COUNT(*) FROM runs").fetchone()[0]
            except sqlite3.OperationalError:
                n = 0
        if n >= 2 or proc.poll() is not None:
            break
        time.sleep(0.05)
    assert proc.poll() is None, "the campaign finished before it could be killed"
    os.killpg(proc.pid, signal.SIGKILL)
    proc.wait()
    kept = {r["sample_id"]: (r["finished_at"], json.dumps(r["keypoints"]))
            for r in Store(store).rows()}
    assert 2 <= len(kept) < 8
    run_campaign(space, store, workers=1, quiet=True)
    rows = Store(store).rows()
    ids = [r["sample_id"] for r in rows]
    assert sorted(ids) == list(range(8))  # every sample exactly once
    for r in rows:  # finished rows untouched by the resume
        if r["sample_id"] in kept:
            assert kept[r["sample_id"]] == (r["finished_at"], json.dumps(r["keypoints"]))


def test_campaign_cli_status_and_bad_space(tmp_path, capsys):
    from femcore.workflows import cli

    space = _space(tmp_path, size=2, support="springs")
    store = tmp_path / "cli.sqlite"
    assert cli.main(["campaign", "run", str(space), "--store", str(store), "--workers", "1",
                     "--quiet"]) == 0
    assert cli.main(["campaign", "status", str(store)]) == 0
    assert "finished 2 of 2" in capsys.readouterr().out
    bad = tmp_path / "bad.toml"
    bad.write_text(space.read_text().replace('distribution = "choice"',
                                              'distribution = "normal"'))
    assert cli.main(["campaign", "run", str(bad), "--store", str(tmp_path / "x.sqlite")]) == 2
    assert "distribution" in capsys.readouterr().err
    assert cli.main(["campaign", "export", str(store), "--out", str(tmp_path / "t.xlsx")]) == 2


# ----------------------------------------------------------------------------- the schema
GOOD = {"base": SMALL.as_posix(),
        "parameter": [{"path": "cap.diameter", "low": 7.6, "high": 9.0},
                      {"path": "soil.layers.0.su", "distribution": "loguniform", "low": 15.0,
                       "high": 25.0},
                      {"path": "piles.length", "distribution": "choice", "values": [12.0, 15.0]}],
        "derived": [{"path": "piles.rings.0.radius", "formula": "cap.diameter / 2 - 0.8"}],
        "sampling": {"method": "sobol", "size": 4, "seed": 5},
        "run": {"retries": 1}}


def _set(where, key, value):
    def change(d):
        node = d
        for k in where:
            node = node[k]
        if value is _DROP:
            node.pop(key)
        else:
            node[key] = value
    return change


_DROP = object()
BAD_SPACES = {  # id: (change, the message's field = value, what is allowed)
    "top_key": (_set((), "sise", 4), "sise = 4: unknown key", "base, analysis, parameter"),
    "sampling_key": (_set(("sampling",), "sise", 4), "sampling.sise = 4: unknown key",
                     "method, size, seed, holdout, holdout_seed"),
    "parameter_key": (_set(("parameter", 0), "hihg", 9.0), "parameter.0.hihg = 9.0: unknown",
                      "path, distribution, low, high, values"),
    "derived_key": (_set(("derived", 0), "formla", "1"), "derived.0.formla = '1': unknown",
                    "path, formula"),
    "run_key": (_set(("run",), "time_limt", 5), "run.time_limt = 5: unknown",
                "time_limit, retries, dynamic"),
    "distribution": (_set(("parameter", 2), "distribution", "normal"),
                     "parameter.2.distribution = 'normal'", "'uniform', 'loguniform' or "
                     "'choice'"),
    "size_text": (_set(("sampling",), "size", "8"), "sampling.size = '8'",
                  "an integer from 1 to 1048576 samples"),
    "size_zero": (_set(("sampling",), "size", 0), "sampling.size = 0", "from 1 to 1048576"),
    "size_sobol": (_set(("sampling",), "size", 12), "sampling.size = 12", "power of two"),
    "seed_float": (_set(("sampling",), "seed", 1.5), "sampling.seed = 1.5",
                   "an integer from 0 to 4294967295"),
    "holdout_negative": (_set(("sampling",), "holdout", -1), "sampling.holdout = -1",
                         "from 0 to 1048576 samples"),
    "holdout_seed": (lambda d: d["sampling"].update(holdout=2, holdout_seed=5),
                     "sampling.holdout_seed = 5", "must differ from seed = 5"),
    "retries_negative": (_set(("run",), "retries", -1), "run.retries = -1",
                         "an integer from 0 to 5"),
    "retries_high": (_set(("run",), "retries", 6), "run.retries = 6", "from 0 to 5"),
    "retries_bool": (_set(("run",), "retries", True), "run.retries = True", "from 0 to 5"),
    "time_limit_zero": (_set(("run",), "time_limit", 0), "run.time_limit = 0",
                        "> 0 and <= 86400 s"),
    "time_limit_text": (_set(("run",), "time_limit", "fast"), "run.time_limit = 'fast'",
                        "> 0 and <= 86400 s"),
    "dynamic_text": (_set(("run",), "dynamic", "no"), "run.dynamic = 'no'", "true or false"),
    "low_nan": (_set(("parameter", 0), "low", math.nan), "parameter.0.low = nan",
                "a finite number below high"),
    "high_below_low": (_set(("parameter", 0), "high", 7.0), "parameter.0.high = 7.0",
                       "greater than low = 7.6"),
    "high_missing": (_set(("parameter", 0), "high", _DROP), "parameter.0.high: required",
                     "finite number"),
    "loguniform_zero": (_set(("parameter", 1), "low", 0.0), "parameter.1.low = 0.0",
                        "loguniform needs low > 0"),
    "choice_empty": (_set(("parameter", 2), "values", []), "parameter.2.values = []",
                     "a non-empty list"),
    "choice_missing": (_set(("parameter", 2), "values", _DROP), "parameter.2.values: required",
                       "non-empty list"),
    "unknown_path": (_set(("parameter", 0), "path", "cap.diamter"),
                     "parameter.0.path = 'cap.diamter'", "cap has no key 'diamter'; it is a "
                     "table with keys: E, centre_thickness, contact, diameter"),
    "index_out_of_range": (_set(("parameter", 1), "path", "soil.layers.7.su"),
                           "parameter.1.path = 'soil.layers.7.su'",
                           "soil.layers has no entry 7; it is a list of 2 entries (indices 0 "
                           "to 1)"),
    "integer_field": (_set(("parameter", 0), "path", "piles.rings.0.count"),
                      "parameter.0.distribution = 'uniform'", "is an integer (base value 8)"),
    "derived_path": (_set(("derived", 0), "path", "piles.ring.0.radius"),
                     "derived.0.path = 'piles.ring.0.radius'", "piles has no key 'ring'"),
    "formula_syntax": (_set(("derived", 0), "formula", "cap.diameter / "),
                       "derived.0.formula = 'cap.diameter / '", "not a valid expression"),
    "formula_name": (_set(("derived", 0), "formula", "diameter / 2"),
                     "derived.0.formula = 'diameter / 2'", "unknown name 'diameter'"),
    "formula_path": (_set(("derived", 0), "formula", "cap.radius - 0.8"),
                     "derived.0.formula = 'cap.radius - 0.8'", "reads 'cap.radius', which is "
                     "no value of the base design"),
    "formula_power": (_set(("derived", 0), "formula", "10 ** 10 ** 10"),
                      "derived.0.formula = '10 ** 10 ** 10'", "exponent 1e+10 exceeds 64"),
    "analysis_key": (_set((), "analysis", {"mesh_size": 3}), "analysis.mesh_size",
                     "unknown key (value 3)"),
    "no_parameters": (_set((), "parameter", _DROP), "parameter: required",
                      "one or more [[parameter]] tables"),
}


@pytest.mark.parametrize("case", list(BAD_SPACES))
def test_bad_space_names_field_value_and_allowed(case):
    change, field, allowed = BAD_SPACES[case]
    data = copy.deepcopy(GOOD)
    change(data)
    t = time.perf_counter()
    with pytest.raises(SpaceError) as info:
        space_from_dict(data)
    assert time.perf_counter() - t < 1.0  # refused up front, before any run
    assert field in str(info.value) and allowed in str(info.value), str(info.value)


@pytest.mark.parametrize("case", list(BAD_SPACES))
def test_bad_space_on_the_command_line_exit_2(tmp_path, capsys, case):
    """The same bad spaces through ``tiltfe campaign run``: exit 2, no traceback, the field
    named, and no store created."""
    from femcore.workflows import cli

    change, field, _ = BAD_SPACES[case]
    data = copy.deepcopy(GOOD)
    change(data)
    path = tmp_path / "bad_space.toml"
    path.write_text(toml_text(data))
    store = tmp_path / "never.sqlite"
    assert cli.main(["campaign", "run", str(path), "--store", str(store)]) == 2
    err = capsys.readouterr().err
    assert field in err and "Traceback" not in err, err
    assert not store.exists()


def test_good_space_and_json_schema(tmp_path):
    sp = space_from_dict(copy.deepcopy(GOOD))
    assert (sp.size, sp.seed, sp.retries, sp.time_limit, sp.dynamic) == (4, 5, 1, 600.0, True)
    schema = space_json_schema()
    assert set(schema["properties"]) == {"base", "analysis", "parameter", "derived",
                                         "sampling", "run"}
    assert all(d["additionalProperties"] is False for d in schema["$defs"].values())
    assert "0 to 5" in schema["$defs"]["RunSpec"]["properties"]["retries"]["description"]
    # the same through a TOML file: a NaN bound is refused there too
    text = (f'base = "{SMALL.as_posix()}"\n[[parameter]]\npath = "cap.diameter"\n'
            "low = nan\nhigh = 9.0\n")
    (tmp_path / "nan.toml").write_text(text)
    with pytest.raises(SpaceError, match=re.escape("parameter.0.low = nan")):
        load_space(tmp_path / "nan.toml")


# ----------------------------------------------------------------------------- springs runs
def _springs_space(tmp_path: Path, name="springs.toml", run="", size=4, base=SMALL) -> Path:
    """A tiny space on the springs-only example (about 0.1 s per run)."""
    p = tmp_path / name
    p.write_text(springs_space_text(base, size=size, run=run))
    return p


@pytest.fixture(scope="module")
def springs_stores(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("springs")
    with_dyn, without = tmp / "dyn.sqlite", tmp / "nodyn.sqlite"
    run_campaign(_springs_space(tmp), with_dyn, workers=1, quiet=True)
    run_campaign(_springs_space(tmp, "nodyn.toml", "dynamic = false"), without, workers=1,
                 quiet=True)
    return tmp, with_dyn, without


def test_derived_values_follow_the_formulas(springs_stores):
    _, store, _ = springs_stores
    rows = Store(store).rows()
    assert len(rows) == 4
    for r in rows:
        d = r["inputs"]
        radius = d["cap"]["diameter"] / 2 - 0.8
        assert d["piles"]["rings"][0]["radius"] == radius
        assert d["piles"]["rings"][0]["count"] == round(2 * math.pi * radius / (5 * 0.4))
        assert d["requirements"]["dynamic_stiffness_min"] == 1.0e7
        assert 15.0 <= d["soil"]["layers"][0]["su"] <= 25.0
        assert d["piles"]["length"] in (12.0, 15.0)


def test_export_has_dynamic_and_requirement_columns(springs_stores, tmp_path):
    _, store, _ = springs_stores
    rows = Store(store).rows()
    with export(store, tmp_path / "t.csv").open() as fh:
        table = list(csv.DictReader(fh))
    assert {"dynamic_stiffness", "req.static_stiffness.value", "req.static_stiffness.passed",
            "req.static_stiffness.margin", "req.dynamic_stiffness.margin"} <= set(table[0])
    for t, r in zip(table, rows, strict=True):
        assert r["status"] in ("ok", "censored")
        design = design_from_dict(r["inputs"])
        direct = run_design(design).to_dict()  # the same design run outside the campaign
        k_dyn = dynamic_stiffness(design).value
        assert float(t["dynamic_stiffness"]) == pytest.approx(k_dyn, rel=1e-12)
        # the static check: secant M / theta at M = 5000 kNm, interpolated on the direct curve
        th = np.concatenate([[0.0], direct["curve"]["rotation"]])
        m = np.concatenate([[0.0], direct["curve"]["moment"]])
        k_static = 5000.0 / np.interp(5000.0, m, th)
        assert float(t["req.static_stiffness.value"]) == pytest.approx(k_static, rel=1e-9)
        assert float(t["req.static_stiffness.margin"]) == pytest.approx(k_static / 2.0e6 - 1,
                                                                        rel=1e-9)
        assert t["req.static_stiffness.passed"] == str(k_static >= 2.0e6)
        assert float(t["req.dynamic_stiffness.margin"]) == pytest.approx(k_dyn / 1.0e7 - 1,
                                                                         rel=1e-9)
        # the material quantities under their own names (hand values: counts x lengths)
        n = sum(ring["count"] for ring in r["inputs"]["piles"]["rings"])
        assert int(t["pile_count"]) == n == direct["quantities"]["pile_count"]
        assert float(t["pile_total_length"]) == pytest.approx(
            n * r["inputs"]["piles"]["length"], rel=1e-12)
        assert r["quantities"] == direct["quantities"] and t["cost_index"] == ""
        assert k_dyn > k_static  # small-strain moduli G0 are stiffer than the operational E
        for i in (0, 10, 39):
            assert float(t[f"theta_{i:02d}"]) == pytest.approx(
                np.geomspace(1e-6, load_design(SMALL).loading.rotation_max, 40)[i],
                rel=1e-12)


def test_dynamic_false_skips_the_dynamic_stiffness(springs_stores):
    _, with_dyn, without = springs_stores
    cols, rows = export_rows(without)
    _, ref = export_rows(with_dyn)
    assert "dynamic_stiffness" in cols and len(rows) == 4
    for a, b in zip(rows, ref, strict=True):
        assert a["dynamic_stiffness"] is None and b["dynamic_stiffness"] > 0
        assert a["req.dynamic_stiffness.value"] is None
        assert a["req.dynamic_stiffness.passed"] is None  # not decided without the analysis
        # the pushover and its static check do not depend on the switch (same samples; to
        # round-off, since under the PARDISO backend a pattern's first factorization is
        # SuperLU's and the dynamic analysis adds factorizations)
        assert a["cap.diameter"] == b["cap.diameter"]
        assert a["req.static_stiffness.value"] == pytest.approx(
            b["req.static_stiffness.value"], rel=1e-9)
    assert all(r.dynamic is None for r in Store(without).records().values())


def test_resume_runs_only_the_missing_samples(tmp_path):
    base = tmp_path / "base.toml"
    base.write_text(SMALL.read_text())
    space = _springs_space(tmp_path, base=base)
    store = tmp_path / "resume.sqlite"
    first = run_campaign(space, store, workers=1, quiet=True, limit=2)
    assert (first["finished"], first["remaining"], first["planned"]) == (2, 2, 4)
    before = {r["sample_id"]: r["finished_at"] for r in Store(store).rows()}
    assert sorted(before) == [0, 1]
    run_campaign(space, store, workers=1, quiet=True)
    after = {r["sample_id"]: r["finished_at"] for r in Store(store).rows()}
    assert sorted(after) == [0, 1, 2, 3]
    assert all(after[k] == before[k] for k in before)  # finished rows not run again
    other = _springs_space(tmp_path, "other.toml", "retries = 2", base=base)
    with pytest.raises(SpaceError, match="belongs to another space"):
        run_campaign(other, store, workers=1, quiet=True)
    base.write_text(SMALL.read_text().replace("vertical = 2000.0", "vertical = 2100.0"))
    with pytest.raises(SpaceError, match=re.escape("the base design changed since this store "
                                                   "was started (loading.vertical 2000.0 -> "
                                                   "2100.0)")):
        run_campaign(space, store, workers=1, quiet=True)
    base.write_text("# a comment only changes nothing\n" + SMALL.read_text())
    assert run_campaign(space, store, workers=1, quiet=True)["finished"] == 4


OLD_LAYOUT = """
CREATE TABLE meta (key TEXT PRIMARY KEY, value TEXT);
CREATE TABLE runs (
    sample_id INTEGER PRIMARY KEY, sample_set TEXT, unit TEXT, inputs TEXT,
    status TEXT, message TEXT, attempts INTEGER, seconds REAL, keypoints TEXT,
    curve TEXT, piles TEXT, timings TEXT, model TEXT, provenance TEXT, finished_at REAL);
"""


def test_store_of_the_old_layout_reopens_and_resumes(tmp_path):
    space_path = _springs_space(tmp_path)
    space = load_space(space_path)
    s0 = sample_space(space)[0]
    store = tmp_path / "old.sqlite"
    db = sqlite3.connect(store)
    db.executescript(OLD_LAYOUT)
    db.execute("INSERT INTO meta VALUES ('space_digest', ?)", (json.dumps(space.digest()),))
    db.execute("INSERT INTO meta VALUES ('space', ?)", (json.dumps(space.source),))
    db.execute("INSERT INTO runs VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)",
               (0, "train", json.dumps(s0["unit"]), json.dumps(design_dict(space, s0)), "ok",
                "", 1, 0.25, json.dumps({"initial_stiffness": 123.0}), "null", "null", "null",
                "null", json.dumps({"tiltfe": "old"}), 1000.0))
    db.commit()
    db.close()
    summary = status_summary(store)  # planned from the stored space file
    assert (summary["planned"], summary["finished"], summary["remaining"]) == (4, 1, 3)
    run_campaign(space_path, store, workers=1, quiet=True)
    cols = {c[1] for c in sqlite3.connect(store).execute("PRAGMA table_info(runs)")}
    assert {"requirements", "dynamic", "dynamic_stiffness"} <= cols
    rows = Store(store).rows()
    assert [r["sample_id"] for r in rows] == [0, 1, 2, 3]
    assert (rows[0]["finished_at"], rows[0]["keypoints"]) == (1000.0, {"initial_stiffness":
                                                                        123.0})
    assert rows[0]["requirements"] is None and rows[0]["dynamic_stiffness"] is None
    assert all(r["dynamic_stiffness"] > 0 and "static_stiffness" in r["requirements"]
               for r in rows[1:])
    _, table = export_rows(store)
    assert table[0]["dynamic_stiffness"] is None and table[0]["kp.initial_stiffness"] == 123.0
    assert table[1]["req.static_stiffness.margin"] == pytest.approx(
        table[1]["req.static_stiffness.value"] / 2.0e6 - 1, rel=1e-12)


def test_run_record_round_trip_through_the_store(tmp_path):
    rec = RunRecord("censored", "no plateau", 2, 0.5, {"ultimate": 9.5e4, "yield": None},
                    {"capacity": {"value": 1.0, "required": 2.0, "unit": "kNm", "passed": False,
                                  "margin": -0.5, "detail": "d"}},
                    {"value": 3.0e7, "moduli": "G0", "reason": None},
                    {"rotation": [1e-6, 1e-3], "moment": [1.0, None]}, [{"row": 1}],
                    {"total_s": 0.5}, {"dofs": 10})
    assert RunRecord.from_row(rec.to_row()) == rec
    assert rec.to_row()["dynamic_stiffness"] == 3.0e7
    with Store(tmp_path / "r.sqlite") as st:
        st.add({"id": 7, "set": "holdout", "unit": [0.5]}, {"x": 1}, rec, {"git": None})
        assert st.records() == {7: rec}
        assert st.rows()[0]["dynamic_stiffness"] == 3.0e7


class _FakeResult:
    def __init__(self, status, failed_stage="pushover"):
        self.status = status
        names = ["at-rest stresses", "self-weight", "vertical load", "pushover"]
        k = names.index(failed_stage) if status == "diverged" else len(names) - 1
        self.stages = [{"name": n, "status": "diverged" if status == "diverged" and i == k
                        else "ok"} for i, n in enumerate(names[:k + 1])]

    def to_dict(self):
        return {"status": self.status, "message": f"{self.status} run", "keypoints": {},
                "curve": {}, "piles": [], "model": {}, "timings": {}, "stages": self.stages}


def test_run_sample_retries_timeouts_and_failures(monkeypatch, tmp_path):
    import femcore.foundation.run as run_module

    space = load_space(_springs_space(tmp_path))
    data = design_dict(space, sample_space(space)[0])
    # every outcome is a record: a design the schema refuses, a run over its time limit
    bad = run_sample({"name": "x"}, 10.0, 1)
    assert bad.status == "invalid_input" and "soil: required field is missing" in bad.message
    slow = run_sample(data, 1e-3, 1)
    assert (slow.status, slow.attempts) == ("timeout", 1) and "time limit of 0.001 s" in \
        slow.message
    seen = []

    def diverging(design, progress=None, dynamic=True):
        seen.append(design.loading.initial_increment)
        return _FakeResult("diverged" if len(seen) < 3 else "ok")

    monkeypatch.setattr(run_module, "run_design", diverging)
    rec = run_sample(data, 10.0, 2)
    assert (rec.status, rec.attempts, rec.message) == ("ok", 3, "ok run")
    assert seen == pytest.approx([2e-6, 5e-7, 1.25e-7], rel=1e-12)  # 4x smaller each retry
    seen.clear()
    rec = run_sample(data, 10.0, 1)
    assert (rec.status, rec.attempts, len(seen)) == ("diverged", 2, 2)
    # a weight stage that diverged is not retried: a smaller first pushover increment
    # would repeat the identical failing stage
    seen.clear()

    def weight_fails(design, progress=None, dynamic=True):
        seen.append(design.loading.initial_increment)
        return _FakeResult("diverged", failed_stage="self-weight")

    monkeypatch.setattr(run_module, "run_design", weight_fails)
    rec = run_sample(data, 10.0, 3)
    assert (rec.status, rec.attempts, len(seen)) == ("diverged", 1, 1)

    def broken(design, progress=None, dynamic=True):
        raise RuntimeError("boom")

    monkeypatch.setattr(run_module, "run_design", broken)
    rec = run_sample(data, 10.0, 1)
    assert (rec.status, rec.message, rec.attempts) == ("error", "RuntimeError: boom", 1)


def test_failing_derived_value_is_recorded_as_invalid_input(tmp_path):
    space = tmp_path / "sqrt.toml"
    extra = ('formula = "1.0e7"\n[[derived]]\npath = "soil.layers.0.su_gradient"\n'
             'formula = "sqrt(cap.diameter - 8.25)"')
    space.write_text(_springs_space(tmp_path).read_text().replace('formula = "1.0e7"', extra))
    store = tmp_path / "sqrt.sqlite"
    run_campaign(space, store, workers=1, quiet=True)
    expected = {s["id"] for s in sample_space(load_space(space))
                if s["values"]["cap.diameter"] < 8.25}  # sqrt of a negative number
    _, rows = export_rows(store)
    invalid = {r["sample_id"] for r in rows if r["status"] == "invalid_input"}
    assert invalid == expected and 0 < len(invalid) < 4
    for r in rows:
        assert r["cap.diameter"] is not None  # the sampled inputs are kept
        if r["sample_id"] in invalid:
            assert "math domain error" in r["message"] and r["kp.initial_stiffness"] is None
        else:
            assert r["soil.layers.0.su_gradient"] == pytest.approx(
                math.sqrt(r["cap.diameter"] - 8.25), rel=1e-12)


def test_campaign_of_harmonic_designs(tmp_path):
    """geometry = "harmonic" in a campaign: every sample runs the harmonic pushover and its
    record has the curve and a capacity; the stored ultimate is the one run_design gives
    for the same sample (to 1e-9)."""
    space = _space(tmp_path, size=2, extra=FAST).read_text().replace(
        'element = "T6"\n', 'element = "T6"\ngeometry = "harmonic"\nharmonics = 2\n')
    p = tmp_path / "harmonic.toml"
    p.write_text(space)
    store = tmp_path / "h.sqlite"
    summary = run_campaign(p, store, workers=1, quiet=True)
    assert summary["finished"] == 2
    rows = Store(store).rows()
    assert all(r["status"] in ("ok", "censored") for r in rows)
    assert all(len(r["curve"]["rotation"]) == 40 for r in rows)
    s = load_space(p)
    d = design_from_dict(design_dict(s, sample_space(s)[0])).model_copy(
        update={"design_strength": None})
    ref = run_design(d).keypoints["ultimate"].value
    assert rows[0]["keypoints"]["ultimate"] == pytest.approx(ref, rel=1e-9)
