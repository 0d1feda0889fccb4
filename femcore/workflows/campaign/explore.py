"""One self-contained HTML page to explore a campaign store offline.

The page holds the runs as JSON and the plotting library's JavaScript inline (no network, no
server): Plotly's, taken from the ``plotly`` Python package, which ships the library file
(``plotly.offline.get_plotlyjs()``). Plotly gives linked, zoomable scatter plots with box
and lasso selection and hover values out of the box; the page's own script (below) is the
logic of the explorer only. On the page:

* a scatter of any input or output against any other, coloured by feasibility;
* the requirement thresholds as number fields (the base design's values to start with):
  changing one recomputes the feasible set at once (static and dynamic stiffness minimums
  against the stored checks' stiffnesses, the design moment against the stored capacity,
  a minimum margin on all of them); censored and failed runs are never feasible;
* the M-theta curves of the selected runs (box or lasso on the scatter; to start with, the
  five lightest feasible runs by the chosen quantity);
* a Pareto plot of a quantity against the least margin of the feasible runs, its Pareto
  front (least material for a given margin) drawn as a line.
"""

from __future__ import annotations

import html
import json
import math
from pathlib import Path

from femcore.foundation.quantities import QUANTITY_UNITS
from femcore.foundation.records import CAUTION

from .export import export_rows
from .paths import SpaceError
from .store import Store

__all__ = ["write_explorer", "explorer_data"]

#: outputs offered on the axes: column -> (label, divisor to the display unit)
_OUTPUTS = {"kp.initial_stiffness": ("initial stiffness (GNm/rad)", 1e6),
            "req.static_stiffness.value": ("static secant stiffness (GNm/rad)", 1e6),
            "dynamic_stiffness": ("dynamic stiffness (GNm/rad)", 1e6),
            "kp.ultimate": ("ultimate moment (MNm)", 1e3),
            "req.capacity.value": ("capacity for the check (MNm)", 1e3),
            "kp.yield_equal_energy": ("yield moment, equal energy (MNm)", 1e3),
            "kp.moment_at@0.003": ("moment at 3 mrad (MNm)", 1e3)}
def _quantity_label(name: str) -> str:
    """The quantity's name as in the report, with its unit (``Pile concrete (m3)``)."""
    from femcore.workflows.summary import QUANTITY_LABELS

    unit = QUANTITY_UNITS[name]
    return QUANTITY_LABELS[name] + ("" if unit == "-" else f" ({unit})")


def _finite(v):
    return v if isinstance(v, (int, float)) and not isinstance(v, bool) and \
        math.isfinite(v) else None


def explorer_data(store_path: str | Path) -> dict:
    """The page's data: the runs (inputs, quantities, outputs in display units, checks,
    curve), the axis choices and the base design's requirements."""
    cols, rows = export_rows(store_path)
    with Store(store_path, mode="read") as st:
        stored = {r["sample_id"]: r for r in st.rows()}
        space = st.meta("space") or {}
        base = st.meta("base") or {}
    params = [p.get("path") for p in space.get("parameter", [])]
    fields: dict[str, str] = {p: p for p in params}
    fields.update({k: _quantity_label(k) for k in QUANTITY_UNITS
                   if any(r.get(k) is not None for r in rows)})
    fields.update({k: v[0] for k, v in _OUTPUTS.items() if k in cols})
    runs = []
    for row in rows:
        raw = stored[row["sample_id"]]
        reqs = raw.get("requirements") or {}
        values = {}
        for k in fields:
            v = _finite(row.get(k))
            div = _OUTPUTS.get(k, (None, 1.0))[1]
            values[k] = None if v is None else v / div
        curve = raw.get("curve") or {}
        runs.append({
            "id": row["sample_id"], "status": row["status"], "v": values,
            "static": _finite((reqs.get("static_stiffness") or {}).get("value")),
            "dynamic": _finite((reqs.get("dynamic_stiffness") or {}).get("value")),
            "capacity": _finite((reqs.get("capacity") or {}).get("value"))
            if (reqs.get("capacity") or {}).get("passed") is not None else None,
            "tension": (reqs.get("no_pile_tension") or {}).get("passed"),
            "checks": sorted(reqs),
            "theta": [t * 1e3 for t in curve.get("rotation", [])],
            "moment": [None if m is None else m / 1e3 for m in curve.get("moment", [])]})
    req = (base.get("requirements") or {}) if isinstance(base, dict) else {}
    thresholds = {"static": req.get("static_stiffness_min"),
                  "dynamic": req.get("dynamic_stiffness_min"),
                  "capacity": req.get("design_moment")}
    quantities = [k for k in QUANTITY_UNITS if k in fields]
    return {"runs": runs, "fields": fields, "params": params, "quantities": quantities,
            "thresholds": {k: (None if v is None else v / (1e3 if k == "capacity" else 1e6))
                           for k, v in thresholds.items()},
            "name": str(base.get("name", "")) if isinstance(base, dict) else ""}


def write_explorer(store_path: str | Path, out: str | Path) -> Path:
    """Write the explorer page of ``store_path`` to ``out`` (.html); returns the path."""
    out = Path(out)
    if out.suffix.lower() not in (".html", ".htm"):
        raise SpaceError(f"--out {out}: the page is written as .html")
    if out.parent and not out.parent.is_dir():
        raise SpaceError(f"--out {out}: the folder {out.parent} does not exist")
    try:
        from plotly.offline import get_plotlyjs
    except ImportError:
        raise SpaceError("campaign explore needs the plotly package (it ships the plotting "
                         "library the page embeds): pip install -e \".[explore]\"") from None
    data = explorer_data(store_path)
    if not data["runs"]:
        raise SpaceError(f"{store_path}: the store holds no finished run yet")
    template = (Path(__file__).with_name("explorer_page.html")).read_text(encoding="utf-8")
    page = (template.replace("{{TITLE}}", html.escape(f"Campaign explorer: {data['name']}"))
            .replace("{{CAUTION}}", html.escape(CAUTION))
            .replace("{{PLOTLY}}", get_plotlyjs())
            .replace("{{DATA}}", json.dumps(data, allow_nan=False).replace("</", "<\\/")))
    tmp = out.with_name(out.name + ".part")
    try:
        tmp.write_text(page, encoding="utf-8")
        tmp.replace(out)
    except OSError as exc:
        tmp.unlink(missing_ok=True)
        raise SpaceError(f"--out {out}: cannot write ({exc.strerror})") from None
    return out
