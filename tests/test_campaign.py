"""Training-data campaigns: sampling, local and Dask execution, crash-resume, invalid samples,
export round trip.

References: reproducibility and exactly-once storage are the contract of DESIGN 5.4 (a
campaign never loses a finished result); scrambled Sobol' points come from scipy.stats.qmc
(Roberts et al., scipy 1.7+), so a fixed seed gives identical samples.
"""

import csv
import json
import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from femcore.workflows.campaign import (
    SpaceError,
    Store,
    evaluate_formula,
    export,
    load_space,
    run_campaign,
    sample_space,
)

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "examples" / "fennwick_fw07.toml"


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
    for bad in ("__import__('os')", "cap.diameter.__class__", "open('x')", "[1, 2]"):
        with pytest.raises((SpaceError, KeyError, TypeError)):
            evaluate_formula(bad, data)


@pytest.fixture(scope="module")
def local_store(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("camp")
    store = tmp / "local.sqlite"
    summary = run_campaign(_space(tmp), store, workers=2, quiet=True)
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


def test_dask_local_cluster_gives_identical_results(local_store, tmp_path):
    distributed = pytest.importorskip("distributed")
    tmp, store, _ = local_store
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  host="127.0.0.1", dashboard_address=None) as cluster:
        other = tmp_path / "dask.sqlite"
        run_campaign(_space(tmp), other, scheduler=cluster.scheduler_address, quiet=True)
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
    summary = run_campaign(_space(tmp), store, workers=2, quiet=True)
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
    space = _space(tmp_path, size=8)  # coarse continuum runs (~1 s): killed mid-campaign
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
