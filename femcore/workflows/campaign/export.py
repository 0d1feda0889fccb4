"""Export of a campaign store as one tidy table (CSV or Parquet): one row per sample.

Columns, in this order:

* ``sample_id``, ``set`` (train | holdout) and ``u0`` ... ``u{d-1}`` (the unit-cube point);
* one column per sampled and per derived design path (e.g. ``cap.diameter``), the value the
  sample's design had;
* the material quantities of the sample's design, under their own names (as in
  ``result.json``): ``cap_concrete_volume``, ``pedestal_concrete_volume`` (m3),
  ``pile_count``, ``pile_total_length`` (m, along the pile axes), ``pile_concrete_volume``
  (m3) and ``cost_index`` (empty without ``[unit_rates]`` in the design); kept for samples
  whose run failed or timed out too (they come from the geometry);
* ``status``, ``message``, ``attempts``, ``seconds`` (wall time of the run);
* ``kp.<name>`` for each key point (its value, in its own unit: kNm, kNm/rad, rad);
* ``dynamic_stiffness`` (kNm/rad; empty when not computed or switched off);
* ``req.<name>.value``, ``req.<name>.passed`` and ``req.<name>.margin`` for each requirement
  checked (``static_stiffness``, ``dynamic_stiffness``, ``capacity``, ``no_pile_tension``);
  ``margin`` is value / required - 1, ``passed`` is empty when the check was not decided;
* ``pile.<row>.x`` (m, head position in the slice), ``.count`` (piles in the row),
  ``.max_compression``, ``.max_tension`` (kN per pile, compression positive) and
  ``.max_bending_moment`` (kNm per pile) over the pushover, one set per pile row of the slice
  (rows numbered from 1, in the order of the slice's rows);
* ``time.<name>``: the run's timings (``total_s``, ``build_s`` (with the calibration),
  ``harmonic_s``, ``calibration_s``, ``stages_s``, ``pushover_s``, ``pushover_solver_s`` (its
  factorizations and solves), ``design_strength_s``, ``postprocess_s`` in seconds;
  ``increments``, ``iterations``, ``cutbacks``, ``pushover_factorizations`` counts);
* ``model.<name>``: the model's size and settings (``dofs``, ``nodes``, ``cells``, ``rows``,
  ``element``, ``mesh``, ``support``, ``slice_length_m``, ``linear_solver``: ``superlu`` or
  ``pardiso``, the sparse solver the run used);
* ``prov.tiltfe``, ``prov.git``, ``prov.gmsh``, ``prov.mesh``, ``prov.element``,
  ``prov.support``: the provenance of the run, and ``finished_at`` (Unix time it was stored);
* ``theta_00`` ... ``theta_39`` and ``moment_00`` ... ``moment_39``: the moment (kNm) at each
  rotation (rad) of the fixed log-spaced grid; empty beyond the end of the curve.

Samples that did not run (``invalid_input``, ``timeout``, ``error``) have empty results but
keep their inputs (unit point and design values). CSV writes empty cells for missing values;
Parquet (needs pyarrow) writes nulls. Not exported: the pile force envelopes along depth and
the dynamic stiffness record's details (in the store's ``piles`` and ``dynamic`` columns).
"""

from __future__ import annotations

from pathlib import Path

from femcore.foundation.quantities import QUANTITY_UNITS

from .paths import SpaceError, get_path
from .store import RunRecord, Store

__all__ = ["export_rows", "export", "REQUIREMENT_ORDER"]

REQUIREMENT_ORDER = ("static_stiffness", "dynamic_stiffness", "capacity", "no_pile_tension")
PILE_FIELDS = ("x", "count", "max_compression", "max_tension", "max_bending_moment")
PROVENANCE_FIELDS = ("tiltfe", "git", "gmsh", "mesh", "element", "support")


def _requirement_names(records: list[RunRecord]) -> list[str]:
    names = {n for r in records for n in (r.requirements or {})}
    return [n for n in REQUIREMENT_ORDER if n in names] + sorted(names - set(REQUIREMENT_ORDER))


def export_rows(store_path: str | Path) -> tuple[list[str], list[dict]]:
    """Column names and one row per sample (a dict with every column, None where a sample
    has no value), as described in the module docstring."""
    with Store(store_path, mode="read") as st:
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
        for k in QUANTITY_UNITS:
            row[k] = (rec.quantities or {}).get(k)
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
        for k, v in (rec.timings or {}).items():
            if isinstance(v, (int, float)) and not isinstance(v, bool):
                row[f"time.{k}"] = v
        for k, v in (rec.model or {}).items():
            if isinstance(v, (int, float, str)) and not isinstance(v, bool):
                row[f"model.{k}"] = v
        for pile in rec.piles or []:
            k = pile.get("row")
            for part in PILE_FIELDS:
                row[f"pile.{k}.{part}"] = pile.get(part)
        prov = r.get("provenance") or {}
        for k in PROVENANCE_FIELDS:
            row[f"prov.{k}"] = prov.get(k)
        row["finished_at"] = r.get("finished_at")
        curve = rec.curve or {}
        for i, (t, m) in enumerate(zip(curve.get("rotation", []), curve.get("moment", []),
                                       strict=True)):
            row[f"theta_{i:02d}"] = t
            row[f"moment_{i:02d}"] = m
        rows.append(row)
    n_unit = max((len(r["unit"] or []) for r in stored), default=0)
    kp_names = list(dict.fromkeys(k for rec in records for k in (rec.keypoints or {})))
    time_names = list(dict.fromkeys(c for row in rows for c in row if c.startswith("time.")))
    model_names = list(dict.fromkeys(c for row in rows for c in row if c.startswith("model.")))
    pile_rows = sorted({p.get("row") for rec in records for p in (rec.piles or [])
                        if isinstance(p.get("row"), int)})
    n_grid = max((len((rec.curve or {}).get("rotation", [])) for rec in records), default=0)
    cols = (["sample_id", "set"] + [f"u{i}" for i in range(n_unit)] + paths
            + [k for k in QUANTITY_UNITS if k not in paths]
            + ["status", "message", "attempts", "seconds"] + [f"kp.{k}" for k in kp_names]
            + ["dynamic_stiffness"]
            + [f"req.{n}.{part}" for n in req_names for part in ("value", "passed", "margin")]
            + [f"pile.{k}.{part}" for k in pile_rows for part in PILE_FIELDS]
            + time_names + model_names + [f"prov.{k}" for k in PROVENANCE_FIELDS]
            + ["finished_at"]
            + [c for i in range(n_grid) for c in (f"theta_{i:02d}", f"moment_{i:02d}")])
    return cols, [{c: row.get(c) for c in cols} for row in rows]


def export(store_path: str | Path, out: str | Path) -> Path:
    """Write the table as CSV or Parquet (by the file extension); the path written."""
    out = Path(out)
    if out.is_dir():
        raise SpaceError(f"--out {out}: is a folder; give a file name such as runs.csv")
    if out.suffix not in (".csv", ".parquet"):
        raise SpaceError(f"--out {out}: use a .csv or .parquet file name")
    if not out.parent.is_dir():
        raise SpaceError(f"--out {out}: the folder {out.parent} does not exist (create it "
                         "first)")
    cols, rows = export_rows(store_path)
    if out.suffix == ".parquet":
        try:
            import pyarrow as pa
            import pyarrow.parquet as pq
        except ImportError:
            raise SpaceError("--out: Parquet export needs pyarrow: pip install pyarrow "
                             "(or export to .csv)") from None
    tmp = out.with_name(out.name + ".part")
    try:  # written whole, then moved in place: an interrupted export leaves no half table
        if out.suffix == ".csv":
            import csv

            with tmp.open("w", newline="", encoding="utf-8") as fh:
                w = csv.DictWriter(fh, fieldnames=cols)
                w.writeheader()
                for r in rows:
                    w.writerow({k: r.get(k) for k in cols})
        else:
            pq.write_table(pa.table({k: [r.get(k) for r in rows] for k in cols}), tmp)
        tmp.replace(out)
    except OSError as exc:
        tmp.unlink(missing_ok=True)
        raise SpaceError(f"--out {out}: cannot write the table ({exc.strerror or exc})") \
            from None
    return out
