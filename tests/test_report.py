"""The calculation note (report.pdf) and the terminal summary of ``tiltfe run``: the PDF is
rendered by matplotlib and read back with pypdf (a text extractor independent of the
writer). Checked: page 1 carries the title block, the requirement table with the required
and computed values in the engineers' units, no e-notation anywhere; every figure has a
numbered caption and its PNG; the numbers printed equal result.json's values rounded to
four significant digits (the display rule, common practice for a calculation note)."""

from __future__ import annotations

import hashlib
import json
import re
from pathlib import Path

import pytest
from conftest import toml_text

try:
    import tomllib
except ModuleNotFoundError:  # Python 3.10
    import tomli as tomllib

from femcore.workflows import cli
from femcore.workflows.report import FIGURES
from femcore.workflows.summary import num

pypdf = pytest.importorskip("pypdf", reason="pypdf is in the dev extra (pip install -e .[dev])")

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "examples" / "fennwick_fw07.toml"
E_NOTATION = re.compile(r"\d[eE][+-]\d")  # as Python writes it: 1.0247e+08


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    """The demo on the coarse T6 mesh through the CLI: (folder, printed text, result)."""
    tmp = tmp_path_factory.mktemp("report")
    d = tomllib.loads(DEMO.read_text(encoding="utf-8"))
    d.setdefault("analysis", {}).update(mesh="coarse", element="T6")
    path = tmp / "demo_coarse.toml"
    path.write_text(toml_text(d), encoding="utf-8")
    out = tmp / "out"
    capture = pytest.MonkeyPatch()
    import io
    import sys

    buf = io.StringIO()
    capture.setattr(sys, "stdout", buf)
    try:
        code = cli.main(["run", str(path), "--out", str(out)])
    finally:
        capture.undo()
    assert code == 0
    res = json.loads((out / "result.json").read_text())
    return out, buf.getvalue(), res, path


def _pages(out: Path) -> list[str]:
    reader = pypdf.PdfReader(str(out / "report.pdf"))
    return [p.extract_text() for p in reader.pages]


def test_page_one_is_a_title_block_and_a_requirement_table(demo_run):
    out, _, res, path = demo_run
    page1 = _pages(out)[0]
    assert "Moment-rotation calculation note" in page1
    assert res["design"] in page1
    assert res["model"]["versions"]["source_revision"] is None or \
        res["model"]["versions"]["source_revision"] in page1
    assert path.name in page1
    assert hashlib.sha256(path.read_bytes()).hexdigest() in page1
    for head in ("Requirement", "Required", "Computed", "Margin", "Result"):
        assert head in page1
    assert "Caution" in page1 and "IEC 61400-6" in page1 and "EN 1997-1" in page1
    req = res["requirements"]
    # the required and computed values, in GNm/rad, MNm and kN, four significant digits
    st = req["static_stiffness"]
    assert f"{num(st['required'] / 1e6)} GNm/rad" in page1
    assert f"{num(st['value'] / 1e6)} GNm/rad" in page1
    cap = req["capacity"]
    assert f"{num(cap['required'] / 1e3)} MNm" in page1
    assert f"{num(cap['value'] / 1e3)} MNm" in page1
    assert f"{num(req['no_pile_tension']['value'])} kN" in page1
    for chk in req.values():
        if chk["margin"] is not None:
            assert f"{100 * chk['margin']:+.1f} %" in page1
    assert page1.count("PASS") == sum(c["passed"] is True for c in req.values())


def test_no_e_notation_and_every_figure_has_a_numbered_caption(demo_run):
    out, _, _, _ = demo_run
    pages = _pages(out)
    text = "\n".join(pages)
    assert not E_NOTATION.search(text), E_NOTATION.search(text)
    captions = [int(n) for n in re.findall(r"Figure (\d+)\. ", text)]
    assert captions == list(range(1, len(FIGURES) + 1))  # all five figures, in order
    for title in FIGURES.values():
        assert title in text
    for stem in FIGURES:
        assert (out / f"{stem}.png").stat().st_size > 10_000
    n = len(pages)
    for k, page in enumerate(pages, start=1):
        assert f"page {k} of {n}" in page
    # the sections of the note
    for heading in ("1 Summary", "2 Key points", "3 Inputs", "4 Model",
                    "5 Material quantities", "6 Figures"):
        assert re.search(heading.replace(" ", r"\s+"), text), heading


def test_inputs_and_quantities_in_the_note(demo_run):
    out, _, res, _ = demo_run
    text = "\n".join(_pages(out))
    for layer in ("clay crust", "peat", "soft organic clay", "silty clay", "dense sand"):
        assert layer in text
    q = res["quantities"]
    assert f"{q['cap_concrete_volume']:.1f}" in text  # 769.9 m3 (test_quantities by hand)
    assert f"{q['pile_total_length']:.1f}" in text
    assert "Slice length L" in text and f"{num(res['model']['slice_length_m'])} m" in text


def test_terminal_summary_uses_the_same_table(demo_run):
    _, printed, res, _ = demo_run
    table = printed.split("requirement checks")[1].split("key points")[0]
    assert "Required" in table and "Computed" in table and "Margin" in table
    cap = res["requirements"]["capacity"]
    assert f"{num(cap['value'] / 1e3)} MNm" in table
    assert f"{100 * cap['margin']:+.1f} %" in table
    assert "material quantities" in printed and "Cap concrete" in printed
    assert not E_NOTATION.search(printed.split("Caution")[0])
