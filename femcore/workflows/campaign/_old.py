"""Training-data campaigns: a sampled design space, parallel runs, a resumable SQLite store.

Space file (TOML)::

    base = "fennwick_fw07.toml"          # design file, relative to the space file
    [analysis]                           # optional overrides of the base [analysis]
    mesh = "coarse"
    [[parameter]]
    path = "cap.diameter"                # dotted path into the design
    low = 18.0
    high = 26.0
    distribution = "uniform"             # uniform | loguniform | choice (with values = [...])
    [[derived]]                          # computed from sampled values (and the base design)
    path = "piles.rings.0.count"
    formula = "round(2 * pi * piles.rings.0.radius / (5 * piles.width))"
    [sampling]
    method = "sobol"                     # sobol (scrambled, power of two) | lhs | grid
    size = 256
    seed = 1
    holdout = 32                         # optional hold-out set, own seed
    holdout_seed = 2
    [run]
    time_limit = 300                     # s per run (cooperative: checked every increment)
    retries = 1                          # diverged runs retried with a 4x smaller first step

Store: one SQLite file (WAL), one row per sample, committed by the coordinating process as
each run finishes; ``run`` on an existing store skips finished rows (resume). Invalid samples
are recorded as ``invalid_input`` with the reason and never run. Statuses: ok, censored,
diverged, invalid_input, timeout, error.
"""

from __future__ import annotations

import ast
import functools
import hashlib
import json
import math
import os
import re
import sqlite3
import subprocess
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

__all__ = ["Space", "load_space", "sample_space", "Store", "run_campaign", "export",
           "status_summary", "SpaceError", "ROTATION_GRID_POINTS"]

ROTATION_GRID_POINTS = 40
FINISHED = ("ok", "censored", "diverged", "invalid_input", "timeout", "error")


class SpaceError(ValueError):
    """The space file is invalid (message names the field)."""


# ----------------------------------------------------------------------------- space
@dataclass(frozen=True)
class Parameter:
    path: str
    distribution: str = "uniform"
    low: float | None = None
    high: float | None = None
    values: tuple = ()


@dataclass
class Space:
    base: dict
    parameters: list[Parameter]
    derived: list[tuple[str, str]]
    method: str = "sobol"
    size: int = 64
    seed: int = 0
    holdout: int = 0
    holdout_seed: int = 1
    time_limit: float = 600.0
    retries: int = 1
    source: dict = field(default_factory=dict)

    def digest(self) -> str:
        return hashlib.sha256(json.dumps(self.source, sort_keys=True).encode()).hexdigest()[:16]


def _toml_load(path: Path) -> dict:
    if sys.version_info >= (3, 11):
        import tomllib
    else:  # pragma: no cover
        import tomli as tomllib
    if not path.is_file():
        raise SpaceError(f"{path}: no such file")
    try:
        return tomllib.loads(path.read_text(encoding="utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise SpaceError(f"{path}: not valid TOML ({exc})") from None


def load_space(path: str | Path) -> Space:
    p = Path(path)
    data = _toml_load(p)
    unknown = set(data) - {"base", "analysis", "parameter", "derived", "sampling", "run"}
    if unknown:
        raise SpaceError(f"{p}: unknown section(s) {sorted(unknown)}")
    if "base" not in data:
        raise SpaceError(f"{p}: base: required (the design file the space varies)")
    base = _toml_load((p.parent / data["base"]).resolve())
    if data.get("analysis"):
        base.setdefault("analysis", {}).update(data["analysis"])
    params = []
    for i, d in enumerate(data.get("parameter", [])):
        where = f"parameter.{i}"
        if "path" not in d:
            raise SpaceError(f"{where}.path: required")
        dist = d.get("distribution", "uniform")
        if dist not in ("uniform", "loguniform", "choice"):
            raise SpaceError(f"{where}.distribution = {dist!r}: use uniform, loguniform or "
                             "choice")
        if dist == "choice":
            if not d.get("values"):
                raise SpaceError(f"{where}.values: a non-empty list is required for choice")
            params.append(Parameter(d["path"], dist, values=tuple(d["values"])))
            continue
        lo, hi = d.get("low"), d.get("high")
        if not isinstance(lo, (int, float)) or not isinstance(hi, (int, float)) or hi <= lo:
            raise SpaceError(f"{where}: need numbers low < high (got {lo!r}, {hi!r})")
        if dist == "loguniform" and lo <= 0:
            raise SpaceError(f"{where}.low = {lo}: loguniform needs low > 0")
        params.append(Parameter(d["path"], dist, float(lo), float(hi)))
    if not params:
        raise SpaceError(f"{p}: at least one [[parameter]] is required")
    derived = [(d["path"], d["formula"]) for d in data.get("derived", [])]
    s = data.get("sampling", {})
    method = s.get("method", "sobol")
    if method not in ("sobol", "lhs", "grid"):
        raise SpaceError(f"sampling.method = {method!r}: use sobol, lhs or grid")
    size = int(s.get("size", 64))
    if size < 1:
        raise SpaceError(f"sampling.size = {size}: must be >= 1")
    if method == "sobol" and size & (size - 1):
        raise SpaceError(f"sampling.size = {size}: Sobol' sampling needs a power of two")
    r = data.get("run", {})
    return Space(base, params, derived, method, size, int(s.get("seed", 0)),
                 int(s.get("holdout", 0)), int(s.get("holdout_seed", 1)),
                 float(r.get("time_limit", 600.0)), int(r.get("retries", 1)), data)


def _unit_samples(method: str, n: int, d: int, seed: int) -> np.ndarray:
    from scipy.stats import qmc

    if method == "sobol":
        return qmc.Sobol(d, scramble=True, seed=seed).random(n)
    if method == "lhs":
        return qmc.LatinHypercube(d, seed=seed).random(n)
    k = max(2, int(round(n ** (1.0 / d))))
    axes = [(np.arange(k) + 0.5) / k] * d
    grid = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, d)
    return grid[:n] if len(grid) >= n else grid


def _physical(p: Parameter, u: float):
    if p.distribution == "uniform":
        return p.low + u * (p.high - p.low)
    if p.distribution == "loguniform":
        return float(math.exp(math.log(p.low) + u * (math.log(p.high) - math.log(p.low))))
    return p.values[min(int(u * len(p.values)), len(p.values) - 1)]


def sample_space(space: Space) -> list[dict]:
    """Samples ``{"id", "set", "unit", "values"}``, training set first, then hold-out."""
    d = len(space.parameters)
    out = []
    sets = [("train", space.size, space.seed)]
    if space.holdout:
        sets.append(("holdout", space.holdout, space.holdout_seed))
    sid = 0
    for name, n, seed in sets:
        method = "lhs" if (name == "holdout" and space.method == "sobol"
                           and n & (n - 1)) else space.method
        for u in _unit_samples(method, n, d, seed):
            values = {p.path: _physical(p, float(x)) for p, x in zip(space.parameters, u,
                                                                      strict=True)}
            out.append({"id": sid, "set": name, "unit": [float(x) for x in u],
                        "values": values})
            sid += 1
    return out


# ----------------------------------------------------------------------------- formulas
_FUNCS = {"round": round, "min": min, "max": max, "sqrt": math.sqrt, "floor": math.floor,
          "ceil": math.ceil, "abs": abs, "int": int, "float": float}
_CONSTS = {"pi": math.pi}
_BINOPS = {ast.Add: lambda a, b: a + b, ast.Sub: lambda a, b: a - b,
           ast.Mult: lambda a, b: a * b, ast.Div: lambda a, b: a / b,
           ast.Pow: lambda a, b: a**b}


def _get(data: dict, path: str):
    node: Any = data
    for k in path.split("."):
        node = node[int(k)] if isinstance(node, list) else node[k]
    return node


def _set(data: dict, path: str, value) -> None:
    keys = path.split(".")
    node: Any = data
    for k in keys[:-1]:
        node = node[int(k)] if isinstance(node, list) else node.setdefault(k, {})
    last = keys[-1]
    if isinstance(node, list):
        node[int(last)] = value
    else:
        node[last] = value


def evaluate_formula(formula: str, design: dict) -> float:
    """Arithmetic over dotted design paths, numbers, pi and a few functions; nothing else."""
    # dotted paths with numeric parts (piles.rings.0.radius) become placeholder names
    names: dict[str, Any] = {}

    def repl(m):
        key = f"_v{len(names)}"
        names[key] = _get(design, m.group(0))
        return key

    expr = re.sub(r"[A-Za-z_][A-Za-z_0-9]*(?:\.[A-Za-z_0-9]+)+", repl, formula)
    tree = ast.parse(expr, mode="eval")

    def ev(node):
        if isinstance(node, ast.Expression):
            return ev(node.body)
        if isinstance(node, ast.Constant) and isinstance(node.value, (int, float)):
            return node.value
        if isinstance(node, ast.Name):
            if node.id in names:
                return names[node.id]
            if node.id in _CONSTS:
                return _CONSTS[node.id]
            raise SpaceError(f"formula {formula!r}: unknown name {node.id!r}")
        if isinstance(node, ast.BinOp) and type(node.op) in _BINOPS:
            return _BINOPS[type(node.op)](ev(node.left), ev(node.right))
        if isinstance(node, ast.UnaryOp) and isinstance(node.op, ast.USub):
            return -ev(node.operand)
        if isinstance(node, ast.Call) and isinstance(node.func, ast.Name) \
                and node.func.id in _FUNCS and not node.keywords:
            return _FUNCS[node.func.id](*(ev(a) for a in node.args))
        raise SpaceError(f"formula {formula!r}: only arithmetic, pi and "
                         f"{sorted(_FUNCS)} are allowed")

    return ev(tree)


def design_dict(space: Space, sample: dict) -> dict:
    """The design of one sample: the base with sampled and derived values set."""
    data = json.loads(json.dumps(space.base))
    for path, value in sample["values"].items():
        _set(data, path, value)
    for path, formula in space.derived:
        _set(data, path, evaluate_formula(formula, data))
    data["name"] = f"{data.get('name', 'design')} / sample {sample['id']}"
    return data


# ----------------------------------------------------------------------------- running
def rotation_grid(theta_max: float) -> np.ndarray:
    return np.geomspace(1e-6, theta_max, ROTATION_GRID_POINTS)


class _Timeout(Exception):
    pass


def run_sample(design_data: dict, time_limit: float, retries: int) -> dict:
    """Run one design (in a worker). Never raises: every outcome is a record."""
    from femcore.foundation.design import DesignError, design_from_dict
    from femcore.foundation.run import run_design

    t0 = time.perf_counter()
    try:
        design = design_from_dict(design_data)
    except DesignError as exc:
        return {"status": "invalid_input", "message": "; ".join(exc.problems),
                "attempts": 0, "seconds": time.perf_counter() - t0}
    attempts, result, first = 0, None, design.loading.initial_increment

    def guard(rec):
        if time.perf_counter() - t0 > time_limit:
            raise _Timeout

    while attempts <= retries:
        attempts += 1
        d = design.model_copy(update={"loading": design.loading.model_copy(
            update={"initial_increment": first / 4 ** (attempts - 1)})})
        try:
            result = run_design(d, progress=guard)
        except _Timeout:
            return {"status": "timeout", "message": f"over {time_limit:g} s",
                    "attempts": attempts, "seconds": time.perf_counter() - t0}
        except DesignError as exc:
            return {"status": "invalid_input", "message": "; ".join(exc.problems),
                    "attempts": attempts, "seconds": time.perf_counter() - t0}
        except Exception as exc:  # recorded, never lost: the campaign goes on
            return {"status": "error", "message": f"{type(exc).__name__}: {exc}",
                    "attempts": attempts, "seconds": time.perf_counter() - t0}
        if result.status != "diverged":
            break
    full = result.to_dict()
    kps = dict(full["keypoints"])
    kps_values = {k: v["value"] for k, v in kps.items()}
    dyn = full.get("dynamic") or {}
    kps_values["dynamic_stiffness"] = dyn.get("value")
    for name, chk in full.get("requirements", {}).items():
        kps_values[f"req.{name}.value"] = chk["value"]
        kps_values[f"req.{name}.passed"] = chk["passed"]
        kps_values[f"req.{name}.margin"] = chk["margin"]
    rec = {"status": result.status, "message": result.message, "attempts": attempts,
           "seconds": time.perf_counter() - t0,
           "keypoints": kps_values,
           "keypoint_methods": {k: v["method"] for k, v in kps.items()},
           "piles": full["piles"], "timings": result.timings,
           "model": {"dofs": result.model["dofs"], "rows": len(result.model["rows"]),
                     "slice_length_m": result.model["slice_length_m"]}}
    if "rotation" in result.curve and len(result.curve["rotation"]):
        grid = rotation_grid(design.loading.rotation_max)
        th = np.concatenate([[0.0], result.curve["rotation"]])
        M = np.concatenate([[0.0], result.curve["moment"]])
        m = np.interp(grid, th, M, right=np.nan)
        rec["curve"] = {"rotation": grid.tolist(),
                        "moment": [None if not np.isfinite(v) else float(v) for v in m]}
    return rec


@functools.lru_cache(maxsize=1)
def _versions() -> tuple[str, str | None, str]:
    """tiltfe version, git hash of the source tree (None outside a checkout), gmsh version."""
    from femcore import __version__
    from meshing import gmsh_version

    try:
        git = subprocess.run(["git", "rev-parse", "--short", "HEAD"], capture_output=True,
                             text=True, cwd=Path(__file__).parent, timeout=5).stdout.strip()
    except Exception:  # pragma: no cover - no git
        git = ""
    return __version__, git or None, gmsh_version()


def _provenance(design_data: dict) -> dict:
    version, git, gmsh_version = _versions()
    an = design_data.get("analysis", {})
    return {"tiltfe": version, "git": git, "gmsh": gmsh_version,
            "mesh": an.get("mesh", "standard"), "element": an.get("element", "T15"),
            "support": an.get("support", "continuum")}


# ----------------------------------------------------------------------------- store
SCHEMA = """
CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT);
CREATE TABLE IF NOT EXISTS runs (
    sample_id INTEGER PRIMARY KEY, sample_set TEXT, unit TEXT, inputs TEXT,
    status TEXT, message TEXT, attempts INTEGER, seconds REAL, keypoints TEXT,
    curve TEXT, piles TEXT, timings TEXT, model TEXT, provenance TEXT, finished_at REAL);
"""


class Store:
    """SQLite store (WAL); each finished run is one transaction."""

    def __init__(self, path: str | Path) -> None:
        self.path = Path(path)
        self.db = sqlite3.connect(self.path, timeout=60)
        self.db.execute("PRAGMA journal_mode=WAL")
        self.db.execute("PRAGMA synchronous=NORMAL")
        self.db.executescript(SCHEMA)

    def meta(self, key: str):
        row = self.db.execute("SELECT value FROM meta WHERE key = ?", (key,)).fetchone()
        return None if row is None else json.loads(row[0])

    def set_meta(self, key: str, value) -> None:
        with self.db:
            self.db.execute("INSERT OR REPLACE INTO meta VALUES (?, ?)", (key, json.dumps(value)))

    def finished_ids(self) -> set[int]:
        return {r[0] for r in self.db.execute("SELECT sample_id FROM runs")}

    def add(self, sample: dict, inputs: dict, rec: dict, provenance: dict) -> None:
        with self.db:
            self.db.execute(
                "INSERT OR REPLACE INTO runs VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)",
                (sample["id"], sample["set"], json.dumps(sample["unit"]), json.dumps(inputs),
                 rec["status"], rec.get("message", ""), rec.get("attempts", 0),
                 rec.get("seconds", 0.0), json.dumps(rec.get("keypoints")),
                 json.dumps(rec.get("curve")), json.dumps(rec.get("piles")),
                 json.dumps(rec.get("timings")), json.dumps(rec.get("model")),
                 json.dumps(provenance), time.time()))

    def rows(self) -> list[dict]:
        cols = [c[1] for c in self.db.execute("PRAGMA table_info(runs)")]
        out = []
        for r in self.db.execute("SELECT * FROM runs ORDER BY sample_id"):
            d = dict(zip(cols, r, strict=True))
            for k in ("unit", "inputs", "keypoints", "curve", "piles", "timings", "model",
                      "provenance"):
                d[k] = json.loads(d[k]) if d[k] else None
            out.append(d)
        return out

    def close(self) -> None:
        self.db.close()


def _progress_line(done: int, total: int, failed: int, t0: float, stream) -> None:
    rate = done / max(time.perf_counter() - t0, 1e-9) * 3600
    stream.write(f"\r  {done}/{total} done, {failed} failed, {rate:.0f} runs/hour   ")
    stream.flush()


def run_campaign(space_path: str | Path, store_path: str | Path, workers: int | None = None,
                 scheduler: str | None = None, quiet: bool = False,
                 limit: int | None = None) -> dict:
    """Run (or resume) a campaign; returns the status summary."""
    space = load_space(space_path)
    samples = sample_space(space)
    store = Store(store_path)
    digest = space.digest()
    known = store.meta("space_digest")
    if known is not None and known != digest:
        store.close()
        raise SpaceError(f"{store_path}: this store belongs to another space (digest {known}); "
                         "use a new store file")
    store.set_meta("space_digest", digest)
    store.set_meta("space", space.source)
    done = store.finished_ids()
    todo = [s for s in samples if s["id"] not in done]
    if limit is not None:
        todo = todo[:limit]
    jobs = []
    for s in todo:
        try:
            data = design_dict(space, s)
        except (SpaceError, KeyError, IndexError, TypeError, ValueError, ZeroDivisionError) \
                as exc:
            store.add(s, s["values"], {"status": "invalid_input",
                                       "message": f"derived value: {exc}"}, {})
            continue
        jobs.append((s, data))
    stream = sys.stderr
    t0 = time.perf_counter()
    n_done, n_failed = 0, 0
    total = len(jobs)

    def record(s, data, rec):
        nonlocal n_done, n_failed
        store.add(s, data, rec, _provenance(data))
        n_done += 1
        n_failed += rec["status"] not in ("ok", "censored")
        if not quiet:
            _progress_line(n_done, total, n_failed, t0, stream)

    if scheduler:
        from dask.distributed import Client, as_completed

        client = Client(scheduler)
        try:
            futures = {client.submit(run_sample, data, space.time_limit, space.retries,
                                     pure=False): (s, data) for s, data in jobs}
            for fut in as_completed(futures):
                s, data = futures[fut]
                record(s, data, fut.result())
        finally:
            client.close()
    elif (workers or os.cpu_count() or 1) <= 1:
        for s, data in jobs:
            record(s, data, run_sample(data, space.time_limit, space.retries))
    else:
        import multiprocessing as mp
        from concurrent.futures import ProcessPoolExecutor, as_completed

        ctx = mp.get_context("spawn")
        with ProcessPoolExecutor(max_workers=workers or os.cpu_count(), mp_context=ctx) as pool:
            futures = {pool.submit(run_sample, data, space.time_limit, space.retries): (s, data)
                       for s, data in jobs}
            for fut in as_completed(futures):
                s, data = futures[fut]
                record(s, data, fut.result())
    if not quiet and total:
        stream.write("\n")
    summary = status_summary(store)
    store.close()
    return summary


def status_summary(store: Store | str | Path) -> dict:
    own = not isinstance(store, Store)
    st = Store(store) if own else store
    space = st.meta("space") or {}
    s = space.get("sampling", {})
    planned = int(s.get("size", 0)) + int(s.get("holdout", 0))
    counts = dict(st.db.execute("SELECT status, COUNT(*) FROM runs GROUP BY status").fetchall())
    n = sum(counts.values())
    mean = st.db.execute("SELECT AVG(seconds) FROM runs WHERE status IN "
                         "('ok','censored','diverged','timeout')").fetchone()[0]
    if own:
        st.close()
    failed = sum(v for k, v in counts.items() if k not in ("ok", "censored"))
    return {"planned": planned, "finished": n, "counts": counts,
            "failure_rate": failed / n if n else 0.0, "mean_run_seconds": mean,
            "remaining": max(planned - n, 0),
            "time_to_finish_s": None if mean is None else max(planned - n, 0) * mean
            / max(os.cpu_count() or 1, 1)}


def export_rows(store_path: str | Path) -> tuple[list[str], list[dict]]:
    """One tidy row per sample: inputs (sampled paths), status, key points, the curve on the
    fixed rotation grid (moment_k at rotation_k), timing."""
    st = Store(store_path)
    space = st.meta("space") or {}
    params = [p["path"] for p in space.get("parameter", [])]
    derived = [d["path"] for d in space.get("derived", [])]
    rows = []
    for r in st.rows():
        row: dict = {"sample_id": r["sample_id"], "set": r["sample_set"]}
        for i, u in enumerate(r["unit"] or []):
            row[f"u{i}"] = u
        for p in params + derived:
            try:
                row[p] = _get(r["inputs"], p)
            except (KeyError, IndexError, TypeError):
                row[p] = None
        row.update({"status": r["status"], "message": r["message"],
                    "attempts": r["attempts"], "seconds": r["seconds"]})
        for k, v in (r["keypoints"] or {}).items():
            row[k if k.startswith("req.") or k == "dynamic_stiffness" else f"kp.{k}"] = v
        curve = r["curve"] or {}
        for i, (t, m) in enumerate(zip(curve.get("rotation", []), curve.get("moment", []),
                                       strict=True)):
            row[f"theta_{i:02d}"] = t
            row[f"moment_{i:02d}"] = m
        rows.append(row)
    st.close()
    cols: list[str] = []
    for row in rows:
        for k in row:
            if k not in cols:
                cols.append(k)
    return cols, rows


def export(store_path: str | Path, out: str | Path) -> Path:
    """Write the tidy table as CSV or Parquet (by the file extension)."""
    out = Path(out)
    cols, rows = export_rows(store_path)
    if out.suffix == ".csv":
        import csv

        with out.open("w", newline="") as fh:
            w = csv.DictWriter(fh, fieldnames=cols)
            w.writeheader()
            for r in rows:
                w.writerow({k: r.get(k) for k in cols})
        return out
    if out.suffix == ".parquet":
        try:
            import pyarrow as pa
            import pyarrow.parquet as pq
        except ImportError:
            raise SpaceError("Parquet export needs pyarrow: pip install pyarrow "
                             "(or export to .csv)") from None
        table = pa.table({k: [r.get(k) for r in rows] for k in cols})
        pq.write_table(table, out)
        return out
    raise SpaceError(f"--out {out}: use a .csv or .parquet file name")
