"""From a campaign to a choice: the runs that meet every requirement, ranked by a material
quantity (the lightest, or cheapest, first).

A run is feasible when its status is ``ok`` (a ``censored`` run has only a lower bound of its
capacity, a failed run nothing: neither is ever feasible), it has at least one requirement
check, and every check passed with a margin of at least ``min_margin`` (the no-tension check
has no margin: it must pass).

The requirements are those each sample's design carried, or those of another file
(``requirements``: a design file or a file with only a ``[requirements]`` table), checked
again from what the store holds:

* ``static_stiffness``: the secant M / theta at the new moment, on the stored curve (the
  moment at the 40 rotations of the campaign's grid, interpolated linearly in theta; the
  design's own check reads the full curve, so the two differ by the interpolation:
  0.05-0.2 % lower on the campaign of tests/test_select.py);
* ``dynamic_stiffness``: the stored small-strain stiffness (linear: the moment does not
  matter) against the new minimum;
* ``capacity``: the stored capacity times the old resistance factor over the new one,
  against the new design moment (the same ultimate: characteristic, or design strengths
  where the sample's design had them);
* ``no_pile_tension``: the stored check where the moment is the same; a different moment
  is "not decided" (the store keeps the pile forces over the whole pushover, not per
  moment), so such runs are not feasible.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from femcore.foundation.quantities import QUANTITY_UNITS

from .export import REQUIREMENT_ORDER, export_rows
from .paths import SpaceError
from .store import RunRecord, Store

__all__ = ["select", "SELECT_BY", "write_selection", "feasibility"]

#: what the feasible runs can be ranked by (material quantities, smallest first)
SELECT_BY = tuple(k for k in QUANTITY_UNITS if k != "pile_count") + ("pile_count",)


def _load_requirements(path: str | Path):
    """The ``[requirements]`` table of a design file or of a file holding only that table,
    validated by the design schema."""
    from pydantic import ValidationError

    from femcore.foundation.design import Requirements

    from .space import _toml_load

    p = Path(path)
    data = _toml_load(p, f"--requirements {p}")
    table = data.get("requirements")
    if not isinstance(table, dict) or not table:
        raise SpaceError(f"--requirements {p}: no [requirements] table with at least one "
                         "requirement")
    try:
        return Requirements(**table)
    except ValidationError as exc:
        lines = [f"requirements.{'.'.join(str(x) for x in e['loc'])}: {e['msg']}"
                 if e["loc"] else f"requirements: {e['msg']}" for e in exc.errors()]
        raise SpaceError(f"--requirements {p}: " + "; ".join(lines)) from None


def _ratio(value, required) -> dict:
    if value is None or required is None:
        return {"value": value, "required": required, "passed": None, "margin": None}
    return {"value": value, "required": required, "passed": bool(value >= required),
            "margin": value / required - 1.0}


def _recheck(rec: RunRecord, inputs: dict, req) -> dict[str, dict]:
    """The checks of ``req`` from a stored run (see the module docstring)."""
    out: dict[str, dict] = {}
    old = rec.requirements or {}
    old_req = (inputs or {}).get("requirements") or {}
    if req.static_stiffness_min is not None:
        curve = rec.curve or {}
        th = np.array([0.0] + [t for t in curve.get("rotation", [])], dtype=float)
        m = np.array([0.0] + [v if v is not None else np.nan
                              for v in curve.get("moment", [])], dtype=float)
        ok = np.isfinite(m)
        th, m = th[ok], m[ok]
        value = None
        M = req.static_stiffness_moment
        if m.size > 1 and np.nanmax(m) >= M:
            k = int(np.argmax(m >= M))  # the first grid point at or past M
            t = th[k - 1] + (M - m[k - 1]) / (m[k] - m[k - 1]) * (th[k] - th[k - 1])
            value = M / t if t > 0 else None
        out["static_stiffness"] = _ratio(value, req.static_stiffness_min)
    if req.dynamic_stiffness_min is not None:
        out["dynamic_stiffness"] = _ratio(rec.dynamic_stiffness, req.dynamic_stiffness_min)
    if req.design_moment is not None:
        cap = old.get("capacity") or {}
        value = cap.get("value")
        if value is not None and cap.get("passed") is None:
            value = None  # censored or not decided: a lower bound is never feasible
        if value is not None:
            value = value * float(old_req.get("resistance_factor", 1.0)) / \
                req.resistance_factor
        out["capacity"] = _ratio(value, req.design_moment)
    if req.no_tension_moment is not None:
        same = old_req.get("no_tension_moment") == req.no_tension_moment
        chk = old.get("no_pile_tension") or {}
        out["no_pile_tension"] = {"value": chk.get("value") if same else None,
                                  "required": 0.0,
                                  "passed": chk.get("passed") if same else None,
                                  "margin": None}
    return out


def feasibility(status: str, checks: dict[str, dict], min_margin: float) -> tuple[bool, str]:
    """(feasible, why not) of a run of ``status`` with requirement ``checks`` ({name: {"passed",
    "margin", ...}}): status ok, at least one check, every check passed with a margin of at
    least ``min_margin`` (a check without a margin must pass)."""
    if status == "censored":
        return False, "censored (no plateau: the capacity only a lower bound)"
    if status != "ok":
        return False, f"status {status}"
    if not checks:
        return False, "no requirement checked"
    for name, chk in checks.items():
        if chk.get("passed") is None:
            return False, f"{name} not decided"
        if not chk["passed"]:
            return False, f"{name} fails"
        if chk.get("margin") is not None and chk["margin"] < min_margin:
            return False, (f"{name} margin {100 * chk['margin']:+.1f} % below "
                           f"{100 * min_margin:g} %")
    return True, ""


def select(store_path: str | Path, by: str = "pile_concrete_volume", min_margin: float = 0.0,
           requirements: str | Path | None = None) -> tuple[list[str], list[dict], dict]:
    """The feasible runs of a campaign store, ranked by quantity ``by`` (smallest first).

    Returns the columns, the rows (sample id and set, the sampled and derived inputs, the
    quantities, the key points, the dynamic stiffness, each check's value, margin and
    verdict, and ``least_margin``) and a summary ``{"runs", "feasible", "reasons": {why: n},
    "by", "parameters" (the sampled paths), "min_margin", "requirements"}``."""
    if by not in SELECT_BY:
        raise SpaceError(f"--by {by!r}: not a quantity; use one of {', '.join(SELECT_BY)}")
    if not (isinstance(min_margin, (int, float)) and math.isfinite(min_margin)
            and -1.0 < min_margin <= 10.0):
        raise SpaceError(f"--min-margin {min_margin!r}: a fraction above -1 and at most 10 "
                         "(0.1 for 10 %)")
    req = _load_requirements(requirements) if requirements is not None else None
    cols, rows = export_rows(store_path)
    with Store(store_path, mode="read") as st:
        stored = {r["sample_id"]: r for r in st.rows()}
        space = st.meta("space") or {}
    paths = [p.get("path") for p in space.get("parameter", [])] + \
        [d.get("path") for d in space.get("derived", [])]
    if by == "cost_index" and rows and all(r.get("cost_index") is None for r in rows):
        raise SpaceError("--by cost_index: the campaign's designs have no [unit_rates] table, "
                         "so no cost index; rank by a quantity instead (e.g. "
                         "pile_concrete_volume)")
    feasible, reasons = [], {}
    names: list[str] = []
    for row in rows:
        raw = stored[row["sample_id"]]
        rec = RunRecord.from_row(raw)
        if req is None:
            checks = {k: {p: (rec.requirements or {})[k].get(p)
                          for p in ("value", "required", "passed", "margin")}
                      for k in (rec.requirements or {})}
        else:
            checks = _recheck(rec, raw.get("inputs"), req)
        ok, why = feasibility(rec.status, checks, min_margin)
        if not ok:
            key = why.split(" margin ")[0] + " margin below the minimum" if " margin " in why \
                else why
            reasons[key] = reasons.get(key, 0) + 1
            continue
        if row.get(by) is None:
            reasons[f"no {by}"] = reasons.get(f"no {by}", 0) + 1
            continue
        out = {"sample_id": row["sample_id"], "set": row["set"]}
        out.update({p: row.get(p) for p in paths})
        out.update({k: row.get(k) for k in QUANTITY_UNITS})
        out.update({c: row[c] for c in cols if c.startswith("kp.") and c in row})
        out["dynamic_stiffness"] = row.get("dynamic_stiffness")
        margins = []
        for name, chk in checks.items():
            out[f"req.{name}.value"] = chk.get("value")
            out[f"req.{name}.required"] = chk.get("required")
            out[f"req.{name}.margin"] = chk.get("margin")
            out[f"req.{name}.passed"] = chk.get("passed")
            if chk.get("margin") is not None:
                margins.append(chk["margin"])
            if name not in names:
                names.append(name)
        out["least_margin"] = min(margins) if margins else None
        feasible.append(out)
    feasible.sort(key=lambda r: (r[by], r["sample_id"]))
    order = [n for n in REQUIREMENT_ORDER if n in names] + \
        sorted(set(names) - set(REQUIREMENT_ORDER))
    columns = ["sample_id", "set", *paths, *QUANTITY_UNITS,
               *dict.fromkeys(c for r in feasible for c in r if c.startswith("kp.")),
               "dynamic_stiffness",
               *[f"req.{n}.{p}" for n in order for p in ("value", "required", "margin",
                                                         "passed")],
               "least_margin"]
    summary = {"runs": len(rows), "feasible": len(feasible), "reasons": reasons, "by": by,
               "parameters": [p.get("path") for p in space.get("parameter", [])],
               "min_margin": min_margin,
               "requirements": str(requirements) if requirements else "each design's own"}
    return columns, feasible, summary


def write_selection(path: str | Path, columns: list[str], rows: list[dict]) -> Path:
    """The selection as CSV (whole file or nothing: written beside, then renamed)."""
    import csv
    import os

    p = Path(path)
    if p.suffix.lower() != ".csv":
        raise SpaceError(f"--out {p}: the selection is written as .csv")
    if p.parent and not p.parent.is_dir():
        raise SpaceError(f"--out {p}: the folder {p.parent} does not exist")
    tmp = p.with_name(p.name + ".part")
    try:
        with tmp.open("w", newline="", encoding="utf-8") as fh:
            w = csv.DictWriter(fh, fieldnames=columns, extrasaction="ignore")
            w.writeheader()
            for r in rows:
                w.writerow({k: ("" if r.get(k) is None else r.get(k)) for k in columns})
        os.replace(tmp, p)
    except OSError as exc:
        tmp.unlink(missing_ok=True)
        raise SpaceError(f"--out {p}: cannot write ({exc.strerror})") from None
    return p
