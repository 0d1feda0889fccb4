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
_QUANTITY_LABELS = {"cap_concrete_volume": "cap concrete (m3)",
                    "pedestal_concrete_volume": "pedestal concrete (m3)",
                    "pile_count": "pile count", "pile_total_length": "pile length, total (m)",
                    "pile_concrete_volume": "pile concrete (m3)", "cost_index": "cost index"}


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
    fields.update({k: v for k, v in _QUANTITY_LABELS.items()
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
    page = (_PAGE.replace("{{TITLE}}", html.escape(f"Campaign explorer: {data['name']}"))
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


_PAGE = r"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>{{TITLE}}</title>
<style>
body{font-family:system-ui,sans-serif;margin:0;color:#1d2733;background:#f6f7f9}
header{padding:10px 18px;background:#1d2733;color:#fff}
header h1{font-size:17px;margin:0}
main{display:grid;grid-template-columns:290px 1fr 1fr;gap:10px;padding:10px}
.panel{background:#fff;border:1px solid #dde2e8;border-radius:6px;padding:10px}
.panel h2{font-size:13px;margin:0 0 8px 0}
label{display:block;font-size:12px;margin:8px 0 2px 0;color:#4a5563}
select,input{width:100%;box-sizing:border-box;font-size:12px;padding:3px}
#summary{font-size:13px;margin-top:10px;line-height:1.45}
.plot{height:380px}
.wide{grid-column:2 / span 2}
footer{font-size:11px;color:#8a5a1f;padding:4px 18px 14px 18px}
#errors{color:#b42318;font-size:12px}
</style>
<script>window.__errors=[];window.addEventListener("error",function(e){window.__errors.push(String(e.message));});</script>
<script>{{PLOTLY}}</script>
</head><body>
<header><h1>{{TITLE}}</h1></header>
<main>
<div class="panel" style="grid-row:span 2">
<h2>Axes</h2>
<label for="xsel">horizontal</label><select id="xsel"></select>
<label for="ysel">vertical</label><select id="ysel"></select>
<h2 style="margin-top:14px">Requirements (feasible when all hold)</h2>
<label for="t_static">minimum static stiffness (GNm/rad)</label><input id="t_static" type="number" step="any">
<label for="t_dynamic">minimum dynamic stiffness (GNm/rad)</label><input id="t_dynamic" type="number" step="any">
<label for="t_capacity">design moment for the capacity (MNm)</label><input id="t_capacity" type="number" step="any">
<label for="t_margin">minimum margin on each (%)</label><input id="t_margin" type="number" step="any" value="0">
<h2 style="margin-top:14px">Pareto plot</h2>
<label for="qsel">quantity (smaller is better)</label><select id="qsel"></select>
<div id="summary"></div><div id="errors"></div>
</div>
<div class="panel"><h2>Runs (box or lasso select to show their curves)</h2><div id="scatter" class="plot"></div></div>
<div class="panel"><h2>Moment-rotation of the selected runs</h2><div id="curves" class="plot"></div></div>
<div class="panel wide"><h2>Quantity against the least margin of the feasible runs</h2><div id="pareto" class="plot"></div></div>
</main>
<footer>{{CAUTION}}</footer>
<script>
var D = {{DATA}};
var G = {feasible:"#2f7d4f", infeasible:"#9aa5b1", failed:"#b42318", front:"#2b6cb0"};
var selected = null;
function el(id){return document.getElementById(id);}
function fill(sel, keys, pick){
  keys.forEach(function(k){var o=document.createElement("option");o.value=k;o.textContent=D.fields[k];sel.appendChild(o);});
  if(pick) sel.value=pick;
}
function num(id){var v=parseFloat(el(id).value);return isFinite(v)?v:null;}
function margins(r){
  var t={static:num("t_static"),dynamic:num("t_dynamic"),capacity:num("t_capacity")}, out=[];
  var vals={static:r.static==null?null:r.static/1e6,dynamic:r.dynamic==null?null:r.dynamic/1e6,
            capacity:r.capacity==null?null:r.capacity/1e3};
  for(var k in t){ if(t[k]==null) continue; if(vals[k]==null) return null; out.push(vals[k]/t[k]-1); }
  return out;
}
function feasible(r){
  if(r.status!=="ok") return false;
  if(r.tension===false) return false;
  var m=margins(r); if(m===null||m.length===0) return false;
  var need=(num("t_margin")||0)/100;
  return m.every(function(x){return x>=need;});
}
function least(r){var m=margins(r);return (m&&m.length)?Math.min.apply(null,m):null;}
function draw(){
  var x=el("xsel").value, y=el("ysel").value, q=el("qsel").value;
  var groups={feasible:[],infeasible:[],failed:[]};
  D.runs.forEach(function(r){var g=r.status!=="ok"?"failed":(feasible(r)?"feasible":"infeasible");groups[g].push(r);});
  var traces=[["feasible","feasible"],["infeasible","meets not every requirement"],["failed","censored or failed"]].map(function(p){
    var rs=groups[p[0]];
    return {type:"scatter",mode:"markers",name:p[1]+" ("+rs.length+")",x:rs.map(function(r){return r.v[x];}),
      y:rs.map(function(r){return r.v[y];}),customdata:rs.map(function(r){return r.id;}),
      text:rs.map(function(r){return "sample "+r.id;}),
      marker:{color:G[p[0]],size:8,symbol:p[0]==="failed"?"x":"circle",line:{width:0}}};
  });
  Plotly.react("scatter",traces,{margin:{l:60,r:10,t:10,b:50},xaxis:{title:{text:D.fields[x]}},
    yaxis:{title:{text:D.fields[y]}},legend:{orientation:"h",y:-0.22},dragmode:"lasso"},{displaylogo:false,responsive:true});
  var feas=groups.feasible.slice().sort(function(a,b){return (a.v[q]-b.v[q])||(a.id-b.id);});
  var show=selected||feas.slice(0,5).map(function(r){return r.id;});
  var byId={}; D.runs.forEach(function(r){byId[r.id]=r;});
  var ct=show.filter(function(i){return byId[i];}).map(function(i){var r=byId[i];
    return {type:"scatter",mode:"lines",name:"sample "+i,x:[0].concat(r.theta),y:[0].concat(r.moment)};});
  var cap=num("t_capacity");
  var lay={margin:{l:60,r:10,t:10,b:50},xaxis:{title:{text:"rotation (mrad)"}},yaxis:{title:{text:"moment (MNm)"}},shapes:[]};
  if(cap!=null) lay.shapes.push({type:"line",xref:"paper",x0:0,x1:1,y0:cap,y1:cap,line:{color:"#b7591c",dash:"dot"}});
  Plotly.react("curves",ct,lay,{displaylogo:false,responsive:true});
  var pts=feas.map(function(r){return {id:r.id,q:r.v[q],m:least(r)};}).filter(function(p){return p.q!=null&&p.m!=null;});
  var front=[], best=Infinity;
  pts.slice().sort(function(a,b){return (b.m-a.m)||(a.q-b.q);}).forEach(function(p){if(p.q<best){front.push(p);best=p.q;}});
  front.sort(function(a,b){return a.m-b.m;});
  Plotly.react("pareto",[
    {type:"scatter",mode:"markers",name:"feasible runs",x:pts.map(function(p){return p.m*100;}),y:pts.map(function(p){return p.q;}),
     text:pts.map(function(p){return "sample "+p.id;}),marker:{color:G.feasible,size:8}},
    {type:"scatter",mode:"lines+markers",name:"Pareto front",x:front.map(function(p){return p.m*100;}),y:front.map(function(p){return p.q;}),
     line:{color:G.front,shape:"vh"},marker:{color:G.front,size:6}}],
    {margin:{l:60,r:10,t:10,b:50},xaxis:{title:{text:"least margin (%)"}},yaxis:{title:{text:D.fields[q]}}},{displaylogo:false,responsive:true});
  var s=feas.length+" of "+D.runs.length+" runs feasible";
  if(feas.length) s+="; the least "+D.fields[q]+": sample "+feas[0].id+", "+(+feas[0].v[q]).toPrecision(4);
  el("summary").textContent=s;
  document.body.setAttribute("data-runs",D.runs.length);
  document.body.setAttribute("data-feasible",feas.length);
  document.body.setAttribute("data-ready","1");
  el("errors").textContent=window.__errors.join("; ");
}
function init(){
  var keys=Object.keys(D.fields);
  var outputs=keys.filter(function(k){return D.params.indexOf(k)<0&&D.quantities.indexOf(k)<0;});
  fill(el("xsel"),keys,D.quantities.indexOf("pile_concrete_volume")>=0?"pile_concrete_volume":keys[0]);
  fill(el("ysel"),keys,outputs.indexOf("kp.ultimate")>=0?"kp.ultimate":keys[keys.length-1]);
  fill(el("qsel"),D.quantities,D.quantities.indexOf("pile_concrete_volume")>=0?"pile_concrete_volume":D.quantities[0]);
  ["static","dynamic","capacity"].forEach(function(k){if(D.thresholds[k]!=null) el("t_"+k).value=+D.thresholds[k].toPrecision(6);});
  ["xsel","ysel","qsel","t_static","t_dynamic","t_capacity","t_margin"].forEach(function(id){
    el(id).addEventListener(el(id).tagName==="SELECT"?"change":"input",draw);});
  draw();
  el("scatter").on("plotly_selected",function(ev){
    selected=(ev&&ev.points&&ev.points.length)?ev.points.map(function(p){return p.customdata;}).slice(0,30):null;draw();});
}
try{init();}catch(e){window.__errors.push(String(e));document.getElementById("errors").textContent=window.__errors.join("; ");document.body.setAttribute("data-ready","1");}
</script>
</body></html>
"""
