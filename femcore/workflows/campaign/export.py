"""Export of a campaign store as one tidy table (CSV or Parquet): one row per sample.

Columns, in this order:

* ``sample_id``, ``set`` (train | holdout) and ``u0`` ... ``u{d-1}`` (the unit-cube point);
* one column per sampled and per derived design path (e.g. ``cap.diameter``), the value the
  sample's design had;
* ``status``, ``message``, ``attempts``, ``seconds`` (wall time of the run);
* ``kp.<name>`` for each key point (its value, in its own unit: kNm, kNm/rad, rad);
* ``dynamic_stiffness`` (kNm/rad; empty when not computed or switched off);
* ``req.<name>.value``, ``req.<name>.passed`` and ``req.<name>.margin`` for each requirement
  checked (``static_stiffness``, ``dynamic_stiffness``, ``capacity``, ``no_pile_tension``);
  ``margin`` is value / required - 1, ``passed`` is empty when the check was not decided;
* ``theta_00`` ... ``theta_39`` and ``moment_00`` ... ``moment_39``: the moment (kNm) at each
  rotation (rad) of the fixed log-spaced grid; empty beyond the end of the curve.

Samples that did not run (``invalid_input``, ``timeout``, ``error``) have empty results. CSV
writes empty cells for missing values; Parquet (needs pyarrow) writes nulls.
"""

from __future__ import annotations

from pathlib import Path

from .paths import SpaceError, get_path
from .store import RunRecord, Store

__all__ = ["export_rows", "export", "REQUIREMENT_ORDER"]

REQUIREMENT_ORDER = ("static_stiffness", "dynamic_stiffness", "capacity", "no_pile_tension")


def _requirement_names(records: list[RunRecord]) -> list[str]:
    names = {n for r in records for n in (r.requirements or {})}
    return [n for n in REQUIREMENT_ORDER if n in names] + sorted(names - set(REQUIREMENT_ORDER))


def export_rows(store_path: str | Path) -> tuple[list[str], list[dict]]:
    """Column names and one row per sample (a dict with every column, None where a sample
    has no value), as described in the module docstring."""
    with Store(store_path) as st:
        space = st.meta("space") or {}
        stored = st.rows()
    paths = [p.get("path") for p in space.get("parameter", [])] + \
        [d.get("path") for d in space.get("derived", [])]
    records = [RunRecord.from_row(r) for r in stored]
    req_names = _requirement_names(records)
    rows = []
    for r, rec in zip(stored, records, strict=True):
        row: dict = {"sample_id": r["sample_id"], "set": r["sample_set"]}
        for i, u in enumerate(r["unit"] or []):
            row[f"u{i}"] = u
        for p in paths:
            try:
                row[p] = get_path(r["inputs"] or {}, p)
            except SpaceError:
                row[p] = None
        row.update({"status": rec.status, "message": rec.message, "attempts": rec.attempts,
                    "seconds": rec.seconds})
        for k, v in (rec.keypoints or {}).items():
            row[f"kp.{k}"] = v
        row["dynamic_stiffness"] = rec.dynamic_stiffness
        reqs = rec.requirements or {}
        for name in req_names:
            check = reqs.get(name) or {}
            for part in ("value", "passed", "margin"):
                row[f"req.{name}.{part}"] = check.get(part)
        curve = rec.curve or {}
        for i, (t, m) in enumerate(zip(curve.get("rotation", []), curve.get("moment", []),
                                       strict=True)):
            row[f"theta_{i:02d}"] = t
            row[f"moment_{i:02d}"] = m
        rows.append(row)
    n_unit = max((len(r["unit"] or []) for r in stored), default=0)
    kp_names = list(dict.fromkeys(k for rec in records for k in (rec.keypoints or {})))
    n_grid = max((len((rec.curve or {}).get("rotation", [])) for rec in records), default=0)
    cols = (["sample_id", "set"] + [f"u{i}" for i in range(n_unit)] + paths
            + ["status", "message", "attempts", "seconds"] + [f"kp.{k}" for k in kp_names]
            + ["dynamic_stiffness"]
            + [f"req.{n}.{part}" for n in req_names for part in ("value", "passed", "margin")]
            + [c for i in range(n_grid) for c in (f"theta_{i:02d}", f"moment_{i:02d}")])
    return cols, [{c: row.get(c) for c in cols} for row in rows]


def export(store_path: str | Path, out: str | Path) -> Path:
    """Write the table as CSV or Parquet (by the file extension); the path written."""
    out = Path(out)
    if out.suffix not in (".csv", ".parquet"):
        raise SpaceError(f"--out {out}: use a .csv or .parquet file name")
    cols, rows = export_rows(store_path)
    if out.suffix == ".csv":
        import csv

        with out.open("w", newline="") as fh:
            w = csv.DictWriter(fh, fieldnames=cols)
            w.writeheader()
            for r in rows:
                w.writerow({k: r.get(k) for k in cols})
        return out
    try:
        import pyarrow as pa
        import pyarrow.parquet as pq
    except ImportError:
        raise SpaceError("Parquet export needs pyarrow: pip install pyarrow "
                         "(or export to .csv)") from None
    pq.write_table(pa.table({k: [r.get(k) for r in rows] for k in cols}), out)
    return out
