"""`tiltfe campaign select`: the runs of a campaign that meet every requirement, ranked by a
material quantity. Checked on a 16-sample springs-only campaign (about 5 s) against the
stored checks themselves (the feasible set is the hand filter "status ok and every check
passed"), the ranking against the stored quantities, and the re-check against another
requirements file against the checks the runs made on their full curves."""

from __future__ import annotations

import csv
from pathlib import Path

import pytest
from conftest import springs_space_text

from femcore.workflows import cli
from femcore.workflows.campaign import Store, run_campaign
from femcore.workflows.campaign.select import select

ROOT = Path(__file__).resolve().parents[1]
SMALL = ROOT / "examples" / "small_group_springs.toml"


@pytest.fixture(scope="module")
def campaign(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("select")
    space = tmp / "space.toml"
    space.write_text(springs_space_text(SMALL, size=16, lengths=(10.0, 12.0, 15.0), seed=5))
    store = tmp / "runs.sqlite"
    run_campaign(space, store, workers=1, quiet=True)
    return tmp, store


def _hand_filter(store, min_margin=0.0):
    rows = Store(store, mode="read").rows()
    out = []
    for r in rows:
        reqs = r["requirements"] or {}
        if r["status"] == "ok" and reqs and all(
                c["passed"] and (c["margin"] is None or c["margin"] >= min_margin)
                for c in reqs.values()):
            out.append((r["quantities"]["pile_concrete_volume"], r["sample_id"]))
    return [sid for _, sid in sorted(out)]


def test_feasible_runs_lightest_first(campaign):
    _, store = campaign
    cols, rows, summ = select(store)
    assert summ["runs"] == 16
    expected = _hand_filter(store)
    assert [r["sample_id"] for r in rows] == expected
    assert 3 <= len(expected) < 16
    vols = [r["pile_concrete_volume"] for r in rows]
    assert vols == sorted(vols)
    for r in rows:  # pile concrete by hand: count x length x width^2 (0.4 m square piles)
        assert r["pile_concrete_volume"] == pytest.approx(
            r["piles.rings.0.count"] * r["piles.length"] * 0.4**2, rel=1e-12)
        assert r["req.static_stiffness.passed"] is True
        assert r["least_margin"] == pytest.approx(min(r["req.static_stiffness.margin"],
                                                      r["req.dynamic_stiffness.margin"]))
    assert sum(summ["reasons"].values()) == 16 - len(rows)
    assert {"cap.diameter", "pile_count", "kp.initial_stiffness", "least_margin"} <= set(cols)


def test_min_margin_and_ranking_by_another_quantity(campaign):
    _, store = campaign
    _, all_rows, _ = select(store)
    least = sorted(r["least_margin"] for r in all_rows)
    cut = least[len(least) // 2]  # the median least margin: about half the runs stay
    _, rows, summ = select(store, by="cap_concrete_volume", min_margin=cut)
    kept = sorted((r for r in all_rows if r["least_margin"] >= cut),
                  key=lambda r: (r["cap_concrete_volume"], r["sample_id"]))
    assert [r["sample_id"] for r in rows] == [r["sample_id"] for r in kept]
    assert 0 < len(rows) < len(all_rows)
    assert sum(n for why, n in summ["reasons"].items() if "margin" in why) == \
        len(all_rows) - len(rows)
    assert set(_hand_filter(store, cut)) == {r["sample_id"] for r in rows}


def test_requirements_from_another_file(campaign, tmp_path):
    """The same requirements again: the same feasible runs, the static stiffness from the
    stored 40-point curve within 1 % of the check the run made on its full curve; a
    stricter minimum drops exactly the runs below it."""
    _, store = campaign
    _, own, _ = select(store)
    same = tmp_path / "same.toml"
    same.write_text("[requirements]\nstatic_stiffness_min = 2.0e6\n"
                    "static_stiffness_moment = 5.0e3\ndynamic_stiffness_min = 1.0e7\n")
    _, rows, summ = select(store, requirements=same)
    assert [r["sample_id"] for r in rows] == [r["sample_id"] for r in own]
    for a, b in zip(rows, own, strict=True):
        assert a["req.static_stiffness.value"] == pytest.approx(
            b["req.static_stiffness.value"], rel=0.01)
        assert a["req.dynamic_stiffness.value"] == b["req.dynamic_stiffness.value"]
    limit = sorted(r["req.static_stiffness.value"] for r in rows)[len(rows) // 2]
    strict = tmp_path / "strict.toml"
    strict.write_text(f"[requirements]\nstatic_stiffness_min = {limit * 1.0001:.6e}\n"
                      "static_stiffness_moment = 5.0e3\n")
    _, fewer, _ = select(store, requirements=strict)
    assert [r["sample_id"] for r in fewer] == [
        r["sample_id"] for r in rows if r["req.static_stiffness.value"] >= limit * 1.0001]
    assert summ["requirements"].endswith("same.toml")


def test_cli_select_writes_the_table(campaign, tmp_path, capsys):
    _, store = campaign
    out = tmp_path / "feasible.csv"
    assert cli.main(["campaign", "select", str(store), "--out", str(out), "--top", "2"]) == 0
    printed = capsys.readouterr().out
    expected = _hand_filter(store)
    assert f"{len(expected)} of 16 runs meet every requirement" in printed
    assert "Caution" in printed
    with out.open() as fh:
        table = list(csv.DictReader(fh))
    assert [int(t["sample_id"]) for t in table] == expected


@pytest.mark.parametrize("args, words", [
    (["--by", "weight"], ["--by 'weight'", "pile_concrete_volume"]),
    (["--by", "cost_index"], ["no [unit_rates]"]),
    (["--min-margin", "-2"], ["--min-margin -2", "above -1"]),
    (["--top", "0"], ["--top 0"]),
    (["--out", "/no/such/folder/x.csv"], ["does not exist"]),
    (["--out", "x.parquet"], [".csv"]),
    (["--requirements", "/no/such/req.toml"], ["no such file"]),
])
def test_bad_select_input_exit_2(campaign, capsys, args, words):
    _, store = campaign
    assert cli.main(["campaign", "select", str(store), *args]) == 2
    err = capsys.readouterr().err
    assert all(w in err for w in words), err
    assert "Traceback" not in err


def test_bad_requirements_file_and_missing_store(campaign, tmp_path, capsys):
    _, store = campaign
    bad = tmp_path / "bad.toml"
    bad.write_text("[requirements]\nstatic_stiffness_min = -5\n")
    assert cli.main(["campaign", "select", str(store), "--requirements", str(bad)]) == 2
    err = capsys.readouterr().err
    assert "static_stiffness_min" in err and "Traceback" not in err
    empty = tmp_path / "empty.toml"
    empty.write_text("name = 'x'\n")
    assert cli.main(["campaign", "select", str(store), "--requirements", str(empty)]) == 2
    assert "no [requirements] table" in capsys.readouterr().err
    assert cli.main(["campaign", "select", str(tmp_path / "none.sqlite")]) == 2
    assert "no such store" in capsys.readouterr().err
