"""`tiltfe size`: the direct search for the design with the least pile concrete that meets
every requirement. Checked on the small springs-only group with pinned heads (about 0.1 s
a run; its capacity and stiffness grow with pile length and count) against a brute-force
reference: every pile count of the box and pile lengths on a 0.5 m grid, run one by one.
The search must find a feasible design (re-checked) whose pile concrete is at most that of
the best grid design plus the search's length tolerance, within its run budget."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from conftest import toml_text

try:
    import tomllib
except ModuleNotFoundError:  # Python 3.10
    import tomli as tomllib

from femcore.foundation.design import design_from_dict
from femcore.foundation.run import run_design
from femcore.workflows import cli
from femcore.workflows.sizing import TOLERANCE, size_design

ROOT = Path(__file__).resolve().parents[1]
SMALL = ROOT / "examples" / "small_group_springs.toml"
AREA = 0.4**2  # square piles of 0.4 m


@pytest.fixture(scope="module")
def design(tmp_path_factory):
    d = tomllib.loads(SMALL.read_text(encoding="utf-8"))
    d["piles"]["head"] = "pinned"  # pinned heads: the curve reaches its plateau
    d["loading"]["rotation_max"] = 0.1
    d["requirements"]["design_moment"] = 15000.0
    path = tmp_path_factory.mktemp("size") / "pinned.toml"
    path.write_text(toml_text(d), encoding="utf-8")
    return path, d


def _feasible(d: dict, length: float, count: int, margin: float) -> bool:
    x = json.loads(json.dumps(d))
    x["piles"]["length"] = length
    x["piles"]["rings"][0]["count"] = count
    res = run_design(design_from_dict(x))
    return res.status == "ok" and all(
        c.passed and (c.margin is None or c.margin >= margin) for c in res.requirements.values())


def test_search_beats_the_brute_force_grid(design):
    path, d = design
    result = size_design(path, ["piles.length=8:20", "piles.rings.0.count=6:14"],
                         "pile_concrete_volume", budget=30, min_margin=0.05)
    best = result["best"]
    assert best is not None and best["feasible"] and best["phase"] == "recheck"
    assert result["search_runs"] <= 30
    # the reference: for each count, the shortest feasible length on a 0.5 m grid
    grid_best = None
    for n in range(6, 15):
        for length in [8.0 + 0.5 * k for k in range(25)]:
            if length * n * AREA >= (grid_best or 1e9):
                break
            if _feasible(d, length, n, 0.05):
                grid_best = length * n * AREA
                break
    assert grid_best is not None
    tol = TOLERANCE * (20 - 8)  # the search stops bisecting at this length step
    best_n = best["values"]["piles.rings.0.count"]
    assert best["quantity"] <= grid_best + tol * best_n * AREA + 1e-9, (best, grid_best)
    assert best["quantity"] == pytest.approx(
        best["values"]["piles.length"] * best_n * AREA, rel=1e-12)
    # the result is on the boundary: one tolerance step shorter fails the search margin
    assert not _feasible(d, best["values"]["piles.length"] - 1.5 * tol, best_n, 0.05)
    # every run is in the box and the trail is complete
    for r in result["runs"]:
        assert 8 <= r["values"]["piles.length"] <= 20
        assert 6 <= r["values"]["piles.rings.0.count"] <= 14
    assert result["baseline"]["quantity"] == pytest.approx(15.0 * 8 * AREA)


def _size_cli(path, out) -> int:
    """`tiltfe size` on the pinned group: pile length 8-20 m and count 6-14, 20 runs."""
    return cli.main(["size", str(path), "--vary", "piles.length=8:20", "--vary",
                     "piles.rings.0.count=6:14", "--budget", "20", "--out", str(out)])


def test_cli_writes_json_and_report(design, tmp_path, capsys):
    path, _ = design
    out = tmp_path / "sizing"
    code = _size_cli(path, out)
    assert code == 0
    printed = capsys.readouterr().out
    assert "less than the baseline" in printed and "Caution" in printed
    data = json.loads((out / "sizing.json").read_text())
    assert {"best", "runs", "recheck", "settings", "baseline"} <= set(data)
    assert len(data["runs"]) <= 20 and data["best"]["feasible"]
    import pypdf

    text = "\n".join(p.extract_text() for p in pypdf.PdfReader(str(out / "sizing.pdf")).pages)
    assert "Sizing search" in text and "Figure 1." in text and "Trail" in text


@pytest.mark.parametrize("args, words", [
    (["--vary", "piles.lenght=8:20"], ["piles.lenght", "no such design value"]),
    (["--vary", "piles.length=20:8"], ["LOW = 20", "below HIGH"]),
    (["--vary", "piles.length=8-20"], ["PATH=LOW:HIGH"]),
    (["--vary", "piles.rings.0.count=6.5:14"], ["whole"]),
    (["--vary", "piles.shape=1:2"], ["not a number"]),
    (["--vary", "piles.length=8:20", "--minimize", "steel"], ["--minimize 'steel'"]),
    (["--vary", "piles.length=8:20", "--minimize", "cost_index"], ["[unit_rates]"]),
    (["--vary", "piles.length=8:20", "--vary", "piles.rings.0.count=6:14", "--budget", "2"],
     ["--budget 2", "3"]),
    (["--vary", "piles.length=8:20", "--min-margin", "-0.1"], ["--min-margin"]),
])
def test_bad_size_input_exit_2(design, tmp_path, capsys, args, words):
    path, _ = design
    assert cli.main(["size", str(path), *args, "--out", str(tmp_path / "o")]) == 2
    err = capsys.readouterr().err
    assert all(w in err for w in words), err
    assert "Traceback" not in err


def test_ctrl_c_keeps_the_finished_runs(design, tmp_path, capsys, monkeypatch):
    """Ctrl-C during the search: the finished runs are written to sizing.json, no re-check
    is made, the exit code is 130 (as a campaign's) and no traceback is printed."""
    import femcore.foundation.run as run_module

    real, calls = run_module.run_design, [0]

    def interrupted_after_three(*args, **kwargs):
        calls[0] += 1
        if calls[0] > 3:
            raise KeyboardInterrupt
        return real(*args, **kwargs)

    monkeypatch.setattr(run_module, "run_design", interrupted_after_three)
    path, _ = design
    out = tmp_path / "stopped"
    code = _size_cli(path, out)
    assert code == 130
    err = capsys.readouterr().err
    assert "3 finished runs are kept" in err and "Traceback" not in err
    data = json.loads((out / "sizing.json").read_text())
    assert data["interrupted"] and len(data["runs"]) == 3 and data["recheck"] == []
