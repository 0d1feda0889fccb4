"""The `tiltfe` command end to end, bad input handling and a property-based robustness test.

References: the command-line and result-file contract described in README.md
(docs/validation.md, F9): exit 0 on success, 2 on bad input with one message per problem naming
the field; result.json validates against its schema and its numbers equal the Python API's for
the same design (1e-9 relative).
"""

import copy
import hashlib
import json
import re
import subprocess
import sys

try:
    import tomllib
except ImportError:  # Python 3.10
    import tomli as tomllib
from pathlib import Path

import numpy as np
import pytest
from conftest import toml_text

from femcore.foundation.design import Design, demo_design, load_design
from femcore.foundation.run import run_design
from femcore.workflows import cli
from femcore.workflows.results import result_file_model
from femcore.workflows.summary import num

ROOT = Path(__file__).resolve().parents[1]
SMALL = ROOT / "examples" / "small_group_springs.toml"
DEMO = ROOT / "examples" / "fennwick_fw07.toml"


def test_run_end_to_end_matches_python_api(tmp_path, capsys):
    out = tmp_path / "out"
    code = cli.main(["run", str(SMALL), "--out", str(out)])
    assert code == 0
    printed = capsys.readouterr().out
    assert "Caution" in printed and "Initial rotational stiffness" in printed
    for name in ("result.json", "curve.csv", "fields.vtu", "report.pdf", "moment_rotation.png"):
        assert (out / name).stat().st_size > 0, name
    data = json.loads((out / "result.json").read_text())
    result_file_model().model_validate(data)  # the file matches its schema
    # provenance: the input file's name and the SHA-256 of its bytes (FIPS 180-4 via hashlib)
    assert data["input"] == {"file": SMALL.name,
                             "sha256": hashlib.sha256(SMALL.read_bytes()).hexdigest()}
    api = run_design(load_design(SMALL))
    assert data["keypoints"]["initial_stiffness"]["value"] == pytest.approx(
        api.keypoints["initial_stiffness"].value, rel=1e-9)
    # the summary prints it in GNm/rad to four significant digits
    k0 = num(api.keypoints["initial_stiffness"].value / 1e6)
    assert re.search(rf"Initial rotational stiffness\s+{re.escape(k0)} GNm/rad", printed), \
        printed
    assert np.allclose(data["curve"]["moment"], api.curve["moment"], rtol=1e-9)
    csv = (out / "curve.csv").read_text().splitlines()
    assert csv[0].startswith("rotation [rad]") and len(csv) == len(api.curve["rotation"]) + 1


def test_check_and_schema(capsys):
    assert cli.main(["check", str(DEMO)]) == 0
    out = capsys.readouterr().out
    assert "13 rows" in out and "L = 18.674 m" in out
    assert cli.main(["schema"]) == 0
    schema = json.loads(capsys.readouterr().out)
    props = schema["$defs"]["Cap"]["properties"]
    assert "m" in props["diameter"]["description"]  # units in every description
    for defn in schema["$defs"].values():
        for name, prop in defn.get("properties", {}).items():
            assert prop.get("description"), f"{name} has no description"


def test_help_is_fast_and_module_entry_point():
    res = subprocess.run([sys.executable, "-m", "femcore", "--help"], capture_output=True,
                         text=True, timeout=60)
    assert res.returncode == 0 and "tiltfe" in res.stdout
    res = subprocess.run([sys.executable, "-c", "import femcore.workflows.cli, sys; "
                          "print('matplotlib' in sys.modules, 'gmsh' in sys.modules)"],
                         capture_output=True, text=True, timeout=60)
    assert res.stdout.split() == ["False", "False"]  # imported lazily


BASE = tomllib.loads(DEMO.read_text())


def _bad(path_value):
    """A copy of the demo with one dotted path set (or deleted with value ...)."""
    data = copy.deepcopy(BASE)
    path, value = path_value
    keys = path.split(".")
    node = data
    for k in keys[:-1]:
        node = node[int(k)] if k.isdigit() else node[k]
    last = keys[-1]
    if value is Ellipsis:
        del node[last]
    elif last.isdigit():
        node[int(last)] = value
    else:
        node[last] = value
    return data


BAD_INPUTS = [
    (("cap.diameter", "large"), "cap.diameter"),
    (("cap.diameter", -22.0), "cap.diameter"),
    (("cap", ...), "cap"),
    (("piles.width", 0.0), "piles.width"),
    (("piles.length", -5.0), "piles.length"),
    (("soil.layers.0.nu", 0.5), "soil.layers.0.nu"),
    (("soil.layers.4.phi", 75.0), "soil.layers.4.phi"),
    (("soil.layers.4.psi", 40.0), "psi"),
    (("soil.layers.0.su", ...), "su"),
    (("soil.layers.4.E", ...), "E"),
    (("soil.layers.0.model", "cam_clay"), "soil.layers.0.model"),
    (("piles.rings.0.radius", 12.0), "piles.rings.0.radius"),
    (("piles.rings.1.radius", 9.5), "overlap"),
    (("piles.rings.0.count", 200), "piles.rings.0.count"),
    (("piles.rings.0.rake", 0.8), "piles.rings.0.rake"),
    (("soil.layers.4.thickness", 5.0), "soil.layers"),
    (("soil.water_table", -1.0), "soil.water_table"),
    (("cap.colour", "grey"), "cap.colour"),
    (("loading.lever_arm", ...), "lever_arm"),
    (("loading.control", "force"), "loading.control"),
    (("analysis.element", "Q8"), "analysis.element"),
    (("cap.edge_thickness", 4.0), "edge_thickness"),
    (("loading.rotation_max", 2.0), "loading.rotation_max"),
    (("name", ...), "name"),
    (("analysis.harmonics", 0), "analysis.harmonics"),
    (("analysis.harmonics", 13), "analysis.harmonics"),
    (("analysis.geometry", "3d"), "analysis.geometry"),
    (("analysis.slice_length", "auto"), "analysis.slice_length"),
    (("piles.rings.0.radius", -1.0), "piles.rings.0.radius"),
    (("loading.lever_arm", 0.01), "loading.lever_arm = 0.01 m is too short"),
    (("loading.rotation_max", 0.004), "loading.rotation_max = 0.004 rad is below"),
    (("design_strength.su", 0.9), "design_strength.su"),
    (("design_strength.tan_phi", 0.5), "design_strength.tan_phi"),
    (("cap.diameter", "22"), "cap.diameter: expected a number in m (> 2, <= 60), got '22'"),
    (("soil.layers.0.thickness", True), "soil.layers.0.thickness: expected a number"),
    (("piles.rings.1.count", "16"), "piles.rings.1.count: expected a number (>= 1, <= 200)"),
    (("requirements.static_stiffness_moment", ...), "static_stiffness_min needs "
     "static_stiffness_moment"),
]


@pytest.mark.parametrize("change,field", BAD_INPUTS, ids=[c[0][0] for c in BAD_INPUTS])
def test_bad_input_exit_2_names_the_field(tmp_path, capsys, change, field):
    path = tmp_path / "bad.toml"
    path.write_text(toml_text(_bad(change)))
    code = cli.main(["check", str(path)])
    err = capsys.readouterr().err
    assert code == 2
    assert field in err, err
    assert "Traceback" not in err


@pytest.mark.parametrize("path,value", [("loading.horizontal", float("nan")),
                                        ("loading.vertical", float("inf")),
                                        ("cap.E", float("-inf"))])
def test_nan_and_inf_are_refused(tmp_path, capsys, path, value):
    """TOML's nan / inf in any number: exit 2 naming the field (a finite number needed)."""
    bad = tmp_path / "nan.toml"
    bad.write_text(toml_text(_bad((path, value))))
    assert f"= {value!r}" in bad.read_text()  # written as TOML's own nan / inf
    assert cli.main(["check", str(bad)]) == 2
    err = capsys.readouterr().err
    assert path in err and "finite number" in err and "Traceback" not in err
    assert "must be" not in err  # not "must be <= 60 (got nan)"


def test_nan_message_states_unit_and_bounds(tmp_path, capsys):
    bad = tmp_path / "nan.toml"
    bad.write_text(toml_text(_bad(("cap.diameter", float("nan")))))
    assert cli.main(["check", str(bad)]) == 2
    assert "cap.diameter: expected a finite number in m (> 2, <= 60), got nan" in \
        capsys.readouterr().err


def test_byte_order_mark_folder_and_non_utf8(tmp_path, capsys):
    """A UTF-8 byte-order mark is read as text; a folder and a non-UTF-8 file are named
    as such (exit 2)."""
    bom = tmp_path / "bom.toml"
    bom.write_bytes(b"\xef\xbb\xbf" + DEMO.read_bytes())
    assert cli.main(["check", str(bom)]) == 0
    capsys.readouterr()
    assert cli.main(["check", str(tmp_path)]) == 2
    assert "is a folder, not a design file" in capsys.readouterr().err
    latin = tmp_path / "latin.toml"
    latin.write_bytes(DEMO.read_bytes().replace(b"Fennwick", b"Fennw\xefck"))
    assert cli.main(["check", str(latin)]) == 2
    assert "not UTF-8 text" in capsys.readouterr().err


def test_malformed_and_missing_files(tmp_path, capsys):
    bad = tmp_path / "broken.toml"
    bad.write_text("name = 'x'\n[cap\n")
    assert cli.main(["check", str(bad)]) == 2
    assert "not valid TOML" in capsys.readouterr().err
    assert cli.main(["run", str(tmp_path / "nowhere.toml")]) == 2
    assert "no such design file" in capsys.readouterr().err


def test_demo_file_equals_builtin_demo():
    from femcore.foundation.design import demo_design

    file_design = load_design(DEMO)
    builtin = demo_design()
    assert isinstance(file_design, Design)
    assert file_design.cap == builtin.cap and file_design.loading == builtin.loading
    assert [r.count for r in file_design.piles.rings] == [28, 16]


hypothesis = pytest.importorskip("hypothesis")
st = hypothesis.strategies


def _leaves(d, prefix=""):
    if isinstance(d, dict):
        for k, v in d.items():
            yield from _leaves(v, f"{prefix}.{k}" if prefix else k)
    elif isinstance(d, list) and d and isinstance(d[0], dict):
        for i, v in enumerate(d):
            yield from _leaves(v, f"{prefix}.{i}")
    else:
        yield prefix


LEAVES = [p for p in _leaves(BASE)]
WEIRD = st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.integers(-10**6, 10**6),
                  st.text(max_size=5), st.booleans(), st.lists(st.floats(), max_size=3))


@hypothesis.settings(max_examples=30, deadline=None,
                     suppress_health_check=[hypothesis.HealthCheck.function_scoped_fixture])
@hypothesis.given(path=st.sampled_from(LEAVES), value=WEIRD)
def test_random_perturbations_never_traceback(tmp_path, path, value):
    """Any single-value perturbation of the demo file gives exit 0 or 2, never an exception."""
    data = _bad((path, value))
    data.setdefault("analysis", {})["support"] = "springs"  # keep each example fast
    f = tmp_path / "p.toml"
    try:
        f.write_text(toml_text(data))
    except (TypeError, ValueError):
        return
    code = cli.main(["check", str(f)])
    assert code in (0, 2)


def test_harmonic_run_end_to_end(tmp_path, capsys):
    """geometry = "harmonic": the 3D pushover of the coupled harmonics. Exit 0, result.json
    valid, the initial stiffness equals the Python API's linear harmonic solve (to 1e-9),
    every check decided (the capacity from the curve's plateau), the curve written; the
    summary says so."""
    from femcore.foundation.elastic3d import harmonic_stiffness

    data = _bad(("analysis.geometry", "harmonic"))
    data["analysis"].update(element="T6", mesh="coarse", harmonics=2)
    path = tmp_path / "harm.toml"
    path.write_text(toml_text(data))
    out = tmp_path / "out"
    assert cli.main(["run", str(path), "--out", str(out)]) == 0
    printed = capsys.readouterr().out
    assert "harmonics 0-2 on 5 planes" in printed and "Caution" in printed
    res = json.loads((out / "result.json").read_text())
    result_file_model().model_validate(res)
    ref = harmonic_stiffness(load_design(path))
    assert res["keypoints"]["initial_stiffness"]["value"] == pytest.approx(ref.value, rel=1e-9)
    assert res["requirements"]["capacity"]["passed"] is not None
    assert res["requirements"]["dynamic_stiffness"]["passed"] is not None
    assert res["elastic"]["K_R"] > 0 and res["dynamic"]["method"].startswith("harmonic")
    assert (out / "curve.csv").stat().st_size > 0 and res["design_strength"]["keypoints"]
    # the note of a harmonic run: its model section, the section figures and all captions
    pypdf = pytest.importorskip("pypdf")
    text = "\n".join(p.extract_text() for p in pypdf.PdfReader(str(out / "report.pdf")).pages)
    assert re.findall(r"Figure (\d+)\. ", text) == ["1", "2", "3", "4", "5"]
    assert "circumferential harmonics 0-2" in text and "planes 0 and 180" in text


def test_harmonic_with_a_two_pile_ring_is_refused(tmp_path, capsys):
    data = _bad(("analysis.geometry", "harmonic"))
    data["piles"]["rings"][1]["count"] = 2
    data["piles"]["rings"][1]["radius"] = 3.0
    path = tmp_path / "bad.toml"
    path.write_text(toml_text(data))
    assert cli.main(["run", str(path)]) == 2
    err = capsys.readouterr().err
    assert "piles.rings.1.count = 2" in err and "at least 3" in err and "Traceback" not in err


def test_report_keeps_matplotlib_warnings_off_the_console(tmp_path):
    """A CJK design name (glyphs the report font lacks): the report is written and no
    warning reaches the user [common practice: library noise is not a user message]."""
    import warnings

    from femcore.workflows.report import write_report

    d = demo_design(support="springs").model_copy(
        update={"name": "风电基础 FW-07", "design_strength": None})
    r = run_design(d, dynamic=False)
    with warnings.catch_warnings(record=True) as seen:
        warnings.simplefilter("always")
        files = write_report(r, tmp_path)
    assert len(files) >= 5 and all(f.stat().st_size > 0 for f in files)
    assert [str(w.message) for w in seen] == []


def test_bench_bad_options_exit_2_before_running(tmp_path, capsys):
    """`bench --only` matching nothing and `--baseline` that is not JSON: exit 2 with the
    option named on stderr, before any case runs."""
    assert cli.main(["bench", "--quick", "--only", "no-such-case"]) == 2
    io = capsys.readouterr()
    assert "--only 'no-such-case'" in io.err and io.out == ""
    bad = tmp_path / "base.json"
    bad.write_text("not json")
    assert cli.main(["bench", "--quick", "--baseline", str(bad), "--out",
                     str(tmp_path / "o")]) == 2
    io = capsys.readouterr()
    assert f"--baseline {bad}" in io.err and "Traceback" not in io.err
    assert not (tmp_path / "o" / "bench.json").exists()


# ------------------------------------------------------------ environment and campaign files
def _tiny_space(tmp: Path) -> Path:
    """A valid four-sample space on the springs example (never run by these tests)."""
    p = tmp / "space.toml"
    p.write_text(f'base = "{SMALL.as_posix()}"\n[[parameter]]\npath = "cap.diameter"\n'
                 'low = 7.6\nhigh = 9.0\n[sampling]\nsize = 4\n')
    return p


def _not_sqlite(tmp: Path) -> Path:
    p = tmp / "notes.sqlite"
    p.write_text("these are notes, not a store\n")
    return p


def _other_sqlite(tmp: Path) -> Path:
    import sqlite3

    p = tmp / "other.db"
    with sqlite3.connect(p) as db:
        db.execute("CREATE TABLE inventory (item TEXT)")
    db.close()
    return p


def _store(tmp: Path) -> Path:
    from femcore.workflows.campaign import Store

    p = tmp / "empty.sqlite"
    Store(p).close()
    return p


def _latin1(tmp: Path) -> Path:
    p = tmp / "latin1.toml"
    p.write_bytes('base = "d\u00e9sign.toml"\n'.encode("latin-1"))
    return p


def _space_without_base(tmp: Path) -> Path:
    p = tmp / "nobase.toml"
    p.write_text(_tiny_space(tmp).read_text().replace(SMALL.as_posix(), "gone.toml"))
    return p


ENVIRONMENT = {  # id: (argv from the tmp folder, text the message must hold)
    "status_not_sqlite": (lambda t: ["campaign", "status", str(_not_sqlite(t))],
                          "notes.sqlite: is not a campaign store (not an SQLite database"),
    "status_other_db": (lambda t: ["campaign", "status", str(_other_sqlite(t))],
                        "other.db: an SQLite file but not a campaign store (its tables: "
                        "inventory)"),
    "status_missing": (lambda t: ["campaign", "status", str(t / "none.sqlite")],
                       "none.sqlite: no such store file"),
    "status_folder": (lambda t: ["campaign", "status", str(t)],
                      "is a folder, not a store file"),
    "export_not_sqlite": (lambda t: ["campaign", "export", str(_not_sqlite(t)), "--out",
                                     str(t / "x.csv")], "is not a campaign store"),
    "export_missing_folder": (lambda t: ["campaign", "export", str(_store(t)), "--out",
                                         str(t / "no" / "x.csv")],
                              "x.csv: the folder"),
    "export_into_folder": (lambda t: ["campaign", "export", str(_store(t)), "--out",
                                      str(t)], "is a folder"),
    "export_suffix": (lambda t: ["campaign", "export", str(_store(t)), "--out",
                                 str(t / "x.xlsx")], "use a .csv or .parquet file name"),
    "run_store_missing_folder": (lambda t: ["campaign", "run", str(_tiny_space(t)),
                                            "--store", str(t / "no" / "s.sqlite")],
                                 "does not exist (create it first)"),
    "run_store_folder": (lambda t: ["campaign", "run", str(_tiny_space(t)), "--store",
                                    str(t)], "is a folder, not a store file"),
    "run_store_not_sqlite": (lambda t: ["campaign", "run", str(_tiny_space(t)), "--store",
                                        str(_not_sqlite(t))], "is not a campaign store"),
    "run_store_other_db": (lambda t: ["campaign", "run", str(_tiny_space(t)), "--store",
                                      str(_other_sqlite(t))], "not a campaign store"),
    "run_limit_negative": (lambda t: ["campaign", "run", str(_tiny_space(t)), "--store",
                                      str(t / "s.sqlite"), "--limit", "-1"],
                           "--limit -1: must be 0 or more"),
    "run_workers_zero": (lambda t: ["campaign", "run", str(_tiny_space(t)), "--store",
                                    str(t / "s.sqlite"), "--workers", "0"],
                         "--workers 0: must be 1 or more"),
    "run_space_missing": (lambda t: ["campaign", "run", str(t / "nope.toml"), "--store",
                                     str(t / "s.sqlite")], "nope.toml: no such file"),
    "run_space_not_toml": (lambda t: ["campaign", "run", str(_not_sqlite(t)), "--store",
                                      str(t / "s.sqlite")], "notes.sqlite: not valid TOML"),
    "run_space_folder": (lambda t: ["campaign", "run", str(t), "--store",
                                    str(t / "s.sqlite")], "is a folder, not a TOML file"),
    "run_space_not_utf8": (lambda t: ["campaign", "run", str(_latin1(t)), "--store",
                                      str(t / "s.sqlite")], "latin1.toml: not UTF-8 text"),
    "run_base_missing": (lambda t: ["campaign", "run", str(_space_without_base(t)),
                                    "--store", str(t / "s.sqlite")],
                         "base = 'gone.toml': no such file"),
    "run_out_is_file": (lambda t: ["run", str(SMALL), "--out", str(_not_sqlite(t))],
                        "cannot create the folder"),
    "run_design_folder": (lambda t: ["run", str(t)], "is a folder, not a design file"),
    "check_design_missing": (lambda t: ["check", str(t / "none.toml")], "none.toml"),
}


@pytest.mark.parametrize("case", list(ENVIRONMENT))
def test_environment_errors_exit_2_naming_the_path(tmp_path, capsys, case):
    make, text = ENVIRONMENT[case]
    code = cli.main(make(tmp_path))
    err = capsys.readouterr().err
    assert code == 2, err
    assert text in err, err
    assert "Traceback" not in err
    assert not (tmp_path / "s.sqlite").exists()  # refused before a store is made


def test_unreachable_scheduler_is_refused_within_seconds(tmp_path, capsys):
    pytest.importorskip("distributed")
    import socket
    import time

    with socket.socket() as s:  # a free local port nobody listens on
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    t = time.monotonic()
    code = cli.main(["campaign", "run", str(_tiny_space(tmp_path)), "--store",
                     str(tmp_path / "d.sqlite"), "--scheduler", f"tcp://127.0.0.1:{port}"])
    waited = time.monotonic() - t
    err = capsys.readouterr().err
    assert code == 2 and f"--scheduler tcp://127.0.0.1:{port}: cannot reach" in err, err
    assert waited < 30.0  # the 5 s connection timeout, not the default minute or a hang
    assert not (tmp_path / "d.sqlite").exists()


def test_run_stopped_in_the_weight_stage_claims_no_pass(tmp_path, capsys):
    """Short piles in very soft clay cannot carry the cap under its own weight: the run ends
    in the self-weight stage. The capacity check then fails (no moment capacity: the
    mechanism is the capacity, common practice) and no other check may read PASS or FAIL."""
    d = tomllib.loads(DEMO.read_text())
    d.setdefault("analysis", {}).update(mesh="coarse", element="T6")
    d.pop("design_strength", None)
    d["piles"]["length"] = 12.0
    d["soil"]["layers"][2].update(su=8.0, E=1500.0)
    path = tmp_path / "short.toml"
    path.write_text(toml_text(d))
    out = tmp_path / "short-results"
    assert cli.main(["run", str(path), "--out", str(out)]) == 0
    text = capsys.readouterr().out
    assert "mechanism under the weights alone" in text
    table = text.split("requirement checks")[1].split("key points")[0].splitlines()
    verdicts = {label: next(ln for ln in table if ln.strip().startswith(label)).rstrip()
                for label in ("Static rotational", "Dynamic rotational", "Moment capacity",
                              "No pile in tension")}
    assert verdicts["Moment capacity"].endswith("FAIL"), text
    for label in ("Static rotational", "Dynamic rotational", "No pile in tension"):
        assert verdicts[label].endswith("not decided"), text
    assert "PASS" not in text
    res = json.loads((out / "result.json").read_text())
    assert res["requirements"]["capacity"]["margin"] == pytest.approx(-1.0, abs=1e-12)
    assert "stopped in the self-weight stage" in res["requirements"]["static_stiffness"][
        "detail"]
    assert (out / "report.pdf").stat().st_size > 0


def test_unknown_solver_in_the_environment_exits_2(monkeypatch, capsys):
    """TILTFE_SOLVER outside auto / superlu / pardiso: exit code 2 naming the variable, the
    value and the choices (before any work)."""
    from femcore.workflows import cli

    monkeypatch.setenv("TILTFE_SOLVER", "mumps")
    assert cli.main(["info"]) == 2
    err = capsys.readouterr().err
    assert "TILTFE_SOLVER" in err and "'mumps'" in err and "auto, superlu, pardiso" in err
