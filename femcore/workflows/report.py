"""Figures (PNG) and a multi-page PDF report of one design run (matplotlib, Agg backend).

Pages: summary (key points, requirement checks, caution); the model (mesh, layers, cap,
pile rows); the M-theta curve with key points and requirement lines; the deformed mesh with
yielded zones; pile axial force and bending moment per row; vertical and horizontal
histories; Newton convergence.
"""

from __future__ import annotations

import textwrap
from pathlib import Path

import numpy as np

from femcore.foundation.records import CAUTION
from femcore.foundation.run import Result
from femcore.model import SolidBlock

__all__ = ["write_report"]

_INK, _MUTED, _ACCENT, _WARN, _GOOD = "#1d2733", "#8a96a3", "#2b6cb0", "#c05621", "#2f855a"
_LAYER_COLOURS = ["#efe6d2", "#d9c7a3", "#cfd8c4", "#bfcbd6", "#e3d7c5", "#d5ddd0"]


def _style(plt) -> None:
    plt.rcParams.update({"font.size": 9, "axes.edgecolor": _MUTED, "axes.labelcolor": _INK,
                         "xtick.color": _INK, "ytick.color": _INK, "axes.grid": True,
                         "grid.color": "#e4e8ec", "grid.linewidth": 0.6,
                         "axes.spines.top": False, "axes.spines.right": False,
                         "figure.dpi": 110, "savefig.dpi": 130})


def _fmt(v, scale=1.0, digits=3) -> str:
    return "-" if v is None else f"{v / scale:.{digits}g}"


def _summary_page(plt, result: Result):
    fig = plt.figure(figsize=(8.27, 11.69))
    fig.text(0.08, 0.95, f"tiltfe - {result.design_name}", fontsize=15, color=_INK,
             weight="bold")
    fig.text(0.08, 0.925, f"status: {result.status}   ({result.message})", color=_MUTED)
    lines = ["Key points (3D estimates, moment kNm, stiffness kNm/rad)", ""]
    for kp in result.keypoints.values():
        lines.append(f"  {kp.name:28s} {_fmt(kp.value, 1, 5):>12s} {kp.unit:8s} {kp.method}")
    lines += ["", "Requirement checks", ""]
    for name, chk in result.requirements.items():
        lines.append(f"  {name:28s} {chk.verdict:11s}" +
                     ("" if chk.margin is None else f"  margin {100 * chk.margin:+.1f} %") +
                     (f"  capacity at least {chk.extra['lower_bound'] / 1e3:.4g} MNm"
                      if chk.extra.get("lower_bound") is not None else ""))
    ds = result.design_strength
    if ds is not None:
        f, ud = ds["factors"], (ds["keypoints"].get("ultimate") or {})
        uc = result.keypoints.get("ultimate")
        ratio = ud.get("value") / uc.value if ud.get("value") and uc and uc.value else None
        lines += ["", f"Design strengths: s_u / {f['su']:g}, c' / {f['c']:g}, tan phi' / "
                  f"{f['tan_phi']:g}, pile resistances / {f['pile_resistance']:g} "
                  f"({ds['status']})",
                  f"  ultimate (factored) {_fmt(ud.get('value'), 1e3, 4)} MNm"
                  + ("" if ratio is None else f" = {ratio:.3f} x the characteristic")
                  + (" (censored: a lower bound)" if ud.get("extra", {}).get("censored")
                     else "")]
    dynamic = result.dynamic
    if dynamic is not None:
        lines += ["", f"Dynamic rotational stiffness: {_fmt(dynamic.value, 1e6, 4)} GNm/rad"
                  + (f"  ({dynamic.method})" if dynamic.value else f"  ({dynamic.reason})"),
                  f"  moduli: {dynamic.moduli}"]
        if dynamic.slice_value and dynamic.method != "plane-strain slice":
            lines.append(f"  plane-strain slice value: {_fmt(dynamic.slice_value, 1e6, 4)} "
                         "GNm/rad")
    el = result.elastic
    if el is not None:
        lines += ["", "3D elastic stiffness at the tower base (harmonic model, operational "
                  "moduli):",
                  f"  K_R {_fmt(el.K_R, 1e6, 4)} GNm/rad, K_H {_fmt(el.K_H, 1e3, 4)} MN/m, "
                  f"K_V {_fmt(el.K_V, 1e3, 4)} MN/m, {el.dofs} DOFs"]
        kp0 = result.keypoints.get("initial_stiffness")
        if kp0 is not None and kp0.extra.get("slice"):
            lines.append(f"  initial stiffness of the slice pushover: "
                         f"{_fmt(kp0.extra['slice'], 1e6, 4)} GNm/rad")
    m = result.model
    if m.get("geometry") == "harmonic":
        tm = result.timings
        lines += ["", f"Model: harmonic 3D, harmonics 0-{m.get('harmonics')} on "
                  f"{m.get('planes')} planes, {m.get('element')}, {m.get('dofs')} DOFs "
                  f"({m.get('dofs_per_harmonic')} per harmonic)",
                  f"Timings: {tm.get('total_s', 0):.1f} s total, pushover "
                  f"{tm.get('pushover_s', 0):.1f} s ({tm.get('increments', 0)} increments, "
                  f"{tm.get('iterations', 0)} Newton iterations)"]
    else:
        lines += ["", f"Model: {m.get('support')} support, {m.get('element')}, "
                  f"{m.get('dofs')} DOFs, {len(m.get('rows', []))} pile rows",
                  f"  slice length L = {m.get('slice_length_m', 0):.2f} m "
                  f"({m.get('slice_length_rule', '')})",
                  f"Timings: {result.timings.get('total_s', 0):.1f} s total, "
                  f"{result.timings.get('increments', 0)} increments, "
                  f"{result.timings.get('iterations', 0)} Newton iterations"]
    fig.text(0.08, 0.88, "\n".join(lines), family="monospace", fontsize=7.5, va="top",
             color=_INK)
    fig.text(0.08, 0.08, "\n".join(textwrap.wrap("Caution. " + CAUTION, 110)), fontsize=7.5,
             color=_WARN, va="bottom")
    return fig


def _model_figure(plt, result: Result, deformed: bool = False):
    from matplotlib.collections import PolyCollection

    built = result.built
    model = built.model
    fig, ax = plt.subplots(figsize=(10, 5.2))
    u = result.pushover.u if (deformed and result.pushover) else np.zeros(model.n_dofs)
    mesh = model.mesh
    n = mesh.n_nodes
    scale = 0.0
    if deformed:
        umax = np.abs(u[: 2 * n]).max() if n else 0.0
        scale = 0.05 * np.ptp(mesh.points[:, 1]) / umax if umax > 0 else 0.0
    pts = mesh.points + scale * u[: 2 * n].reshape(-1, 2)
    solid = model.solid_blocks
    if solid:
        layer_names = [b.name for b in solid]
        for i, b in enumerate(solid):
            poly = pts[mesh.cells[b.cells][:, [0, 1, 2]]]
            colour = "#b8bec6" if b.name == "cap" else _LAYER_COLOURS[i % len(_LAYER_COLOURS)]
            ax.add_collection(PolyCollection(poly, facecolors=colour, edgecolors="white",
                                             linewidths=0.25, label=layer_names[i],
                                             rasterized=True))
        if deformed:
            for b, st in zip(model.blocks, result.pushover.states, strict=True):
                if isinstance(b, SolidBlock) and b.name != "cap":
                    xq = b.geom.x + scale * np.einsum(
                        "qa,cad->cqd", b.geom.N, u[: 2 * n].reshape(-1, 2)[mesh.cells[b.cells]])
                    y = st.yielded
                    ax.scatter(xq[y][:, 0], xq[y][:, 1], s=1.5, color=_WARN, lw=0,
                               rasterized=True)
    for pr in built.rows:
        xy = pr.beam.xy + scale * u[pr.beam_dofs[:, :2]]
        ax.plot(xy[:, 0], xy[:, 1], color=_INK, lw=1.4)
    R = built.design.cap.diameter
    ax.set_xlim(-1.6 * R, 1.6 * R) if built.design.analysis.geometry == "plane_strain" \
        else ax.set_xlim(0, 1.6 * R)
    ax.set_ylim(-(built.design.cap.underside_depth + built.design.piles.length + 0.6 * R),
                0.25 * R)
    ax.set_aspect("equal")
    ax.set_xlabel("x (m)")
    ax.set_ylabel("y (m)")
    title = "Deformed mesh (exaggerated) and yielded points" if deformed else \
        "Model: soil layers, cap and pile rows"
    ax.set_title(title, loc="left", color=_INK)
    if solid and not deformed:
        ax.legend(loc="lower right", fontsize=7, frameon=False)
    return fig


def _curve_figure(plt, result: Result):
    fig, ax = plt.subplots(figsize=(8, 5))
    c = result.curve
    th = np.concatenate([[0.0], c["rotation"]])
    M = np.concatenate([[0.0], c["moment"]]) / 1e3
    ax.plot(th * 1e3, M, color=_ACCENT, lw=1.8, label="pushover")
    ds = result.design_strength
    if ds is not None and ds["curve"].get("rotation"):
        ax.plot(np.concatenate([[0.0], ds["curve"]["rotation"]]) * 1e3,
                np.concatenate([[0.0], ds["curve"]["moment"]]) / 1e3, color=_ACCENT, lw=1.2,
                ls="--", label="pushover, design strengths")
        ud = ds["keypoints"].get("ultimate") or {}
        if ud.get("value") is not None and ud.get("extra", {}).get("rotation") is not None:
            ax.plot(ud["extra"]["rotation"] * 1e3, ud["value"] / 1e3, "o", mfc="white",
                    color=_INK, ms=5, label="ultimate, design strengths")
    kp = result.keypoints
    for name, marker in (("yield_equal_energy", "s"), ("yield_tangents", "D"),
                         ("ultimate", "o")):
        p = kp.get(name)
        if p and p.value is not None and p.extra.get("rotation") is not None:
            ax.plot(p.extra["rotation"] * 1e3, p.value / 1e3, marker, color=_INK, ms=5,
                    label=name.replace("_", " "))
    req = result.design.requirements
    tmax = th[-1] * 1e3
    if req.static_stiffness_min:
        ax.plot([0, tmax], [0, req.static_stiffness_min * tmax / 1e3 / 1e3], "--",
                color=_WARN, lw=1, label="min. static stiffness")
    if req.design_moment:
        ax.axhline(req.design_moment * req.resistance_factor / 1e3, color=_WARN, lw=1,
                   ls=":", label="design moment x resistance factor")
    dynamic = result.dynamic
    if dynamic is not None and dynamic.value:
        t = min(tmax, 1.2 * M.max() / (dynamic.value / 1e3) * 1e3)
        ax.plot([0, t], [0, dynamic.value * t / 1e6], color=_GOOD, lw=1,
                label="dynamic stiffness (G0)")
    ax.set_xlabel("rotation (mrad)")
    ax.set_ylabel("moment (MNm, 3D estimate)")
    ax.set_title("Moment-rotation of cap + piles + soil", loc="left", color=_INK)
    ax.legend(fontsize=7, frameon=False)
    ax.set_xlim(0, tmax)
    ax.set_ylim(0, None)
    return fig


def _piles_figure(plt, result: Result):
    """Envelopes over the whole pushover (per pile): axial force and bending moment."""
    fig, (a1, a2) = plt.subplots(1, 2, figsize=(10, 5.5), sharey=True)
    cmap = plt.get_cmap("viridis")
    rows = result.piles
    for k, p in enumerate(rows):
        colour = cmap(k / max(len(rows) - 1, 1))
        label = (f"ring r = {p.x:.1f} m ({p.count:g} piles, all positions)"
                 if result.model.get("geometry") == "harmonic"
                 else f"x = {p.x:.1f} m ({p.count:g} piles)")
        a1.fill_betweenx(p.depth, p.compression_min, p.compression_max,
                         color=colour, alpha=0.35, lw=0)
        a1.plot(p.compression_max, p.depth, color=colour, lw=0.8, label=label)
        a2.fill_betweenx(p.depth, p.moment_min, p.moment_max, color=colour,
                         alpha=0.35, lw=0)
    a1.axvline(0.0, color=_MUTED, lw=0.8)
    a1.invert_yaxis()
    a1.set_xlabel("axial force per pile (kN, compression +)")
    a2.set_xlabel("bending moment per pile (kNm)")
    a1.set_ylabel("depth (m)")
    a1.set_title("Pile force envelopes over the pushover, per row", loc="left", color=_INK)
    a1.legend(fontsize=6, frameon=False)
    return fig


def _histories_figure(plt, result: Result):
    c = result.curve
    fig, axs = plt.subplots(1, 3, figsize=(11, 3.6))
    axs[0].plot(c["settlement"] * 1e3, c["rotation"] * 1e3, color=_ACCENT)
    axs[0].set_xlabel("settlement of the tower base (mm)")
    axs[0].set_ylabel("rotation (mrad)")
    axs[1].plot(c["horizontal_displacement"] * 1e3, c["horizontal"] / 1e3, color=_ACCENT)
    axs[1].set_xlabel("horizontal displacement (mm)")
    axs[1].set_ylabel("H (MN)")
    axs[2].bar(np.arange(len(c["iterations"])), c["iterations"], color=_MUTED)
    axs[2].set_xlabel("increment")
    axs[2].set_ylabel("Newton iterations")
    fig.suptitle("Histories and convergence", x=0.02, ha="left", color=_INK)
    fig.tight_layout()
    return fig


def write_report(result: Result, out: Path) -> list[Path]:
    """PNG figures and report.pdf in ``out``; returns the files written. Matplotlib's own
    warnings (a glyph the font lacks, e.g. in a CJK design name; an empty legend) are not
    the user's concern and are kept off the console."""
    import warnings

    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", category=UserWarning, module="matplotlib")
        warnings.filterwarnings("ignore", message=".*Glyph .* missing from font.*")
        warnings.filterwarnings("ignore", message=".*No artists with labels.*")
        return _write_report(result, out)


def _write_report(result: Result, out: Path) -> list[Path]:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.backends.backend_pdf import PdfPages

    _style(plt)
    files: list[Path] = []
    figs = [("summary", _summary_page(plt, result))]
    if result.pushover is not None and result.pushover.records:
        if "rotation" in result.curve:
            figs.append(("moment_rotation", _curve_figure(plt, result)))
        if result.built is not None:  # the 2D model (the harmonic model has its own fields)
            figs.append(("model", _model_figure(plt, result)))
            figs.append(("deformed", _model_figure(plt, result, deformed=True)))
        if result.piles:
            figs.append(("pile_forces", _piles_figure(plt, result)))
        if "rotation" in result.curve:
            figs.append(("histories", _histories_figure(plt, result)))
    pdf_path = out / "report.pdf"
    with PdfPages(pdf_path) as pdf:
        for name, fig in figs:
            pdf.savefig(fig)
            if name != "summary":
                p = out / f"{name}.png"
                fig.savefig(p, bbox_inches="tight")
                files.append(p)
            plt.close(fig)
    files.append(pdf_path)
    return files
