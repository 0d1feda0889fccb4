"""`tiltfe campaign explore`: one self-contained HTML page. Checked: nothing is loaded from
the network (every script inline), the page carries every run of the store, and in a real
headless browser (Chromium from the operating system's packages) it loads without a console
message or script error and counts the same feasible runs as `campaign select` (the hand
filter of the stored checks) at the base design's requirements. Skipped, with the reason,
where no Chromium is installed."""

from __future__ import annotations

import json
import re
import shutil
import subprocess
from pathlib import Path

import pytest
from conftest import springs_space_text

from femcore.workflows import cli
from femcore.workflows.campaign import run_campaign
from femcore.workflows.campaign.select import select

pytest.importorskip("plotly", reason="plotly is in the dev and explore extras")

ROOT = Path(__file__).resolve().parents[1]
SMALL = ROOT / "examples" / "small_group_springs.toml"
BROWSER = next((shutil.which(b) for b in ("chromium", "chromium-browser", "google-chrome")
                if shutil.which(b)), None)


@pytest.fixture(scope="module")
def page(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("explore")
    space = tmp / "space.toml"
    space.write_text(springs_space_text(SMALL, size=8, lengths=(10.0, 12.0, 15.0), seed=3))
    store = tmp / "runs.sqlite"
    run_campaign(space, store, workers=1, quiet=True)
    out = tmp / "page.html"
    assert cli.main(["campaign", "explore", str(store), "--out", str(out)]) == 0
    return store, out


def test_page_is_self_contained_and_holds_every_run(page):
    store, out = page
    text = out.read_text(encoding="utf-8")
    assert not re.search(r"<script[^>]+src=", text)  # no external script
    assert not re.search(r"<link[^>]+href=\s*[\"']?https?:", text)  # no external style
    data = json.loads(re.search(r"var D = (\{.*?\});\n", text, re.S).group(1))
    assert len(data["runs"]) == 8
    assert {"cap.diameter", "piles.length", "pile_concrete_volume"} <= set(data["fields"])
    assert data["thresholds"]["static"] == pytest.approx(2.0)  # GNm/rad: 2.0e6 kNm/rad
    assert "IEC 61400-6" in text and "EN 1997-1" in text  # the caution in the footer


@pytest.mark.skipif(BROWSER is None, reason="no Chromium installed (Debian package "
                                            "'chromium'): the page is not opened in a browser")
def test_page_renders_in_headless_chromium(page, tmp_path):
    store, out = page
    res = subprocess.run(
        [BROWSER, "--headless=new", "--no-sandbox", "--disable-gpu",
         f"--user-data-dir={tmp_path / 'profile'}", "--virtual-time-budget=10000",
         "--enable-logging=stderr", "--v=0", "--dump-dom", out.resolve().as_uri()],
        capture_output=True, text=True, timeout=120)
    assert res.returncode == 0, res.stderr[-2000:]
    body = re.search(r"<body([^>]*)>", res.stdout).group(1)
    assert 'data-ready="1"' in body, body
    assert 'data-runs="8"' in body
    _, feasible, _ = select(store)  # the same rule as the page at the base's requirements
    assert f'data-feasible="{len(feasible)}"' in body, body
    assert re.search(r'<div id="errors"></div>', res.stdout)
    console = [ln for ln in res.stderr.splitlines() if ":CONSOLE" in ln]
    assert console == [], console
    # three plots drawn by the plotting library
    assert res.stdout.count('class="main-svg"') >= 3


@pytest.mark.skipif(BROWSER is None, reason="no Chromium installed (Debian package "
                                            "'chromium'): the page is not opened in a browser")
def test_moved_threshold_updates_the_feasible_set(page, tmp_path):
    """A stricter static stiffness minimum given to the page (its address: #static=...)
    leaves exactly the runs whose stored static stiffness reaches it (the hand filter of the
    stored checks)."""
    store, out = page
    _, feasible, _ = select(store)
    values = sorted(r["req.static_stiffness.value"] for r in feasible)
    limit = values[len(values) // 2] / 1e6  # GNm/rad: about half the runs stay
    expected = sum(v / 1e6 >= limit for v in values)
    res = subprocess.run(
        [BROWSER, "--headless=new", "--no-sandbox", "--disable-gpu",
         f"--user-data-dir={tmp_path / 'profile'}", "--virtual-time-budget=10000",
         "--dump-dom", out.resolve().as_uri() + f"#static={limit!r}"],
        capture_output=True, text=True, timeout=120)
    body = re.search(r"<body([^>]*)>", res.stdout).group(1)
    assert f'data-feasible="{expected}"' in body, (body, expected, len(feasible))
    assert 0 < expected < len(feasible)


def test_explore_bad_input_exit_2(page, tmp_path, capsys, monkeypatch):
    store, _ = page
    assert cli.main(["campaign", "explore", str(store), "--out", str(tmp_path / "x.pdf")]) == 2
    assert ".html" in capsys.readouterr().err
    assert cli.main(["campaign", "explore", str(store), "--out", "/no/such/dir/x.html"]) == 2
    assert "does not exist" in capsys.readouterr().err
    assert cli.main(["campaign", "explore", str(tmp_path / "none.sqlite"), "--out",
                     str(tmp_path / "x.html")]) == 2
    assert "no such store" in capsys.readouterr().err
    import builtins

    real_import = builtins.__import__

    def no_plotly(name, *args, **kwargs):
        if name.startswith("plotly"):
            raise ImportError(name)
        return real_import(name, *args, **kwargs)

    monkeypatch.setattr(builtins, "__import__", no_plotly)
    assert cli.main(["campaign", "explore", str(store), "--out", str(tmp_path / "y.html")]) == 2
    err = capsys.readouterr().err
    assert "plotly" in err and ".[explore]" in err and "Traceback" not in err
