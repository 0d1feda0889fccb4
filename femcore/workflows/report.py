"""The calculation note of one design run (report.pdf) and its figures as PNG files
(matplotlib, Agg backend; no other dependency).

The note: a title block (design, date, tiltfe version and source revision, input file and
its SHA-256), the caution, then numbered sections: 1 summary (status and the requirement
table), 2 key points with their methods, 3 inputs (soil layers, water table, cap, pile
layout, loads and control), 4 the model (geometry, element, mesh, DOFs, slice length and
its rule, stages, assumptions and limitations), 5 material quantities, 6 figures with
numbered captions (M-theta with key points and requirement lines; the model; the deformed
mesh with its yielded zones; pile forces of the governing piles as small multiples;
histories and Newton convergence). Units throughout: GNm/rad, MNm, mrad, kN, m, m3
(:mod:`.summary`, shared with the terminal summary).
"""

from __future__ import annotations

import datetime as _dt
from pathlib import Path

import numpy as np

from femcore.foundation.records import CAUTION
from femcore.foundation.run import Result
from femcore.model import SolidBlock

from . import summary as sm
from .notepage import ACCENT, BAD, BOTTOM, GOOD, INK, MUTED, WARN, Column, NoteDocument

__all__ = ["write_report", "FIGURES"]

_LAYER_COLOURS = ["#f1e3c0", "#c9b48c", "#bccfa9", "#a9bfd3", "#d8d3c8", "#cbb9d6"]
_CAP_COLOUR = "#aab2bc"
_YIELD_COLOUR = "#d9480f"  # yielded zones (the note's own marking, one colour throughout)
_COMPRESSION, _TENSION = "#2b6cb0", "#c53030"

#: the figures of the note, in order: (PNG file stem, title)
FIGURES = {"moment_rotation": "Moment-rotation curve",
           "model": "Model",
           "deformed": "Deformed mesh and yielded zones",
           "pile_forces": "Pile forces of the governing piles",
           "histories": "Histories and Newton convergence"}


def _style(plt) -> None:
    plt.rcParams.update({"font.size": 8.5, "axes.edgecolor": MUTED, "axes.labelcolor": INK,
                         "xtick.color": INK, "ytick.color": INK, "axes.grid": True,
                         "grid.color": "#e4e8ec", "grid.linewidth": 0.6,
                         "axes.spines.top": False, "axes.spines.right": False,
                         "axes.titlesize": 8.5, "axes.titlelocation": "left",
                         "figure.dpi": 110, "savefig.dpi": 130, "pdf.fonttype": 42})


# -- numbers and words ---------------------------------------------------------------------
def _n(v, div: float = 1.0, sig: int = 4) -> str:
    return sm.num(None if v is None else v / div, sig)


def _g(v, div: float = 1.0) -> str:
    """An input value as given (shortest form, no e-notation)."""
    v = v / div
    return f"{v:g}" if v == 0 or 1e-3 <= abs(v) < 1e6 else sm.num(v)


def _opt(v, unit: str, div: float = 1.0, default: str = "-") -> str:
    return default if v is None else f"{_n(v, div)} {unit}".rstrip()


def _geometry_words(result: Result) -> str:
    m = result.model
    if m.get("geometry") == "harmonic":
        return (f"3D: axisymmetric mesh with circumferential harmonics 0-{m.get('harmonics')} "
                f"(plasticity on {m.get('planes')} planes over 0-180 degrees)")
    if m.get("geometry") == "axisymmetric":
        return "axisymmetric (vertical loading)"
    return "plane-strain slice through the cap centre, moments scaled to 3D by the slice " \
        "length"


# -- sections ------------------------------------------------------------------------------
def _title_block(doc: NoteDocument, result: Result) -> None:
    versions = result.model.get("versions") or {}
    src = result.source or {}
    rev = versions.get("source_revision")
    program = f"tiltfe {versions.get('tiltfe', '')}" + (f", source revision {rev}" if rev
                                                          else "")
    doc.title("Moment-rotation calculation note", result.design_name)
    doc.pairs([("Design", result.design_name),
               ("Date", doc.date),
               ("Program", program),
               ("Input file", src.get("file", "- (run from the Python interface)")),
               ("Input SHA-256", src.get("sha256", "-")),
               ("Model", _geometry_words(result)),
               ("Linear solver", versions.get("linear_solver", "-"))], key_width=0.22)
    doc.boxed("Caution. " + CAUTION)


def _summary_section(doc: NoteDocument, result: Result) -> None:
    doc.heading("1  Summary")
    status = {"ok": "completed", "censored": "completed, capacity not reached",
              "diverged": "stopped early"}.get(result.status, result.status)
    doc.text(f"Run status: {status} ({result.message}).", weight="bold")
    if result.requirements:
        rows = sm.requirement_rows(result.requirements, result.design)
        colours = {}
        for r, row in enumerate(rows):
            verdict = row[-1]
            colours[(r, 4)] = GOOD if verdict == "PASS" else BAD if verdict == "FAIL" else WARN
        doc.table([Column("Requirement", 0.40), Column("Required", 0.20, "r"),
                   Column("Computed", 0.18, "r"), Column("Margin", 0.10, "r"),
                   Column("Result", 0.12, "r")], rows, colours=colours)
        doc.text("Margin = computed / required - 1. 'not reached': the curve showed no "
                 "plateau before the rotation cap, so the capacity is known only as a lower "
                 "bound; 'not decided': the run ended before the check could be made.",
                 size=7.8, colour=MUTED)
    else:
        doc.text("The design file sets no requirements; the key points below are the "
                 "results.", colour=MUTED)


def _keypoint_section(doc: NoteDocument, result: Result) -> None:
    doc.heading("2  Key points of the moment-rotation curve")
    rows = sm.keypoint_rows(result)
    if not rows:
        doc.text("No key points: the run stopped before the pushover.", colour=MUTED)
        return
    doc.table([Column("Key point", 0.36), Column("Value", 0.17, "r"),
               Column("Method", 0.47)], rows)
    if result.model.get("geometry") == "plane_strain":
        doc.text("Moments and stiffnesses of the slice are 3D estimates: the values per metre "
                 "of slice times the slice length (section 4).", size=7.8, colour=MUTED)


def _soil_rows(design) -> list[tuple]:
    rows, top = [], 0.0
    for ly in design.soil.layers:
        bottom = top + ly.thickness
        gam = _n(ly.gamma, sig=3) + ("" if ly.gamma_sat is None else
                                     f" / {_n(ly.gamma_sat, sig=3)}")
        if ly.model == "tresca":
            strength = f"s_u {_n(ly.su, sig=3)} kPa" + (
                f" + {_n(ly.su_gradient, sig=3)}/m" if ly.su_gradient else "")
        elif ly.model == "mohr_coulomb":
            strength = (f"c' {_n(ly.c, sig=3)} kPa, \u03c6' {_n(ly.phi, sig=3)}\u00b0, "
                        f"\u03c8 {_n(ly.psi, sig=3)}\u00b0")
        else:
            strength = "elastic"
        e_text = _opt(ly.E_top, "", 1e3) + (f" + {_n(ly.E_gradient, 1e3, 3)}/m"
                                             if ly.E_gradient else "")
        nu, k0 = ly.poisson, ly.k0
        rows.append((ly.name, f"{top:g}-{bottom:g}",
                     {"tresca": "Tresca", "mohr_coulomb": "Mohr-Coulomb"}.get(ly.model,
                                                                              "elastic"),
                     gam, strength, e_text, f"{nu:.2f}", _opt(ly.G0, "", 1e3), f"{k0:.2f}"))
        top = bottom
    return rows


def _inputs_section(doc: NoteDocument, result: Result) -> None:
    d = result.design
    doc.heading("3  Inputs")
    if d is None:
        doc.text("The design is not attached to this result.", colour=MUTED)
        return
    doc.text("3.1  Soil layers (from the ground surface down)", weight="bold")
    doc.table([Column("Layer", 0.15), Column("Depth (m)", 0.11, "r"), Column("Model", 0.11),
               Column("\u03b3 / \u03b3sat (kN/m\u00b3)", 0.13, "r"),
               Column("Strength", 0.19), Column("E (MPa)", 0.12, "r"),
               Column("\u03bd", 0.06, "r"), Column("G0 (MPa)", 0.09, "r"),
               Column("K0", 0.06, "r")], _soil_rows(d), size=7.8)
    wt = d.soil.water_table
    doc.text(("Water table: " + (f"{_n(wt, sig=3)} m below ground." if wt < 1e6 else
                                 "none (below the model).")) +
             " Tresca layers: undrained, total stress, E = E_u (default 200 s_u); "
             "Mohr-Coulomb layers: drained, effective stress. G0 is the small-strain shear "
             "modulus of the dynamic stiffness.", size=8.2)
    cap = d.cap
    doc.text("3.2  Cap", weight="bold")
    doc.pairs([("Diameter", f"{_g(cap.diameter)} m"),
               ("Underside depth", f"{_g(cap.underside_depth)} m below ground"),
               ("Thickness", f"{_g(cap.edge_thickness)} m at the edge, "
                             f"{_g(cap.centre_thickness)} m at the pedestal"),
               ("Pedestal", f"diameter {_g(cap.pedestal_diameter)} m, height "
                            f"{_g(cap.pedestal_height)} m above the cap"),
               ("Concrete", f"E {_g(cap.E, 1e6)} GPa, \u03bd {_g(cap.nu)}, "
                            f"\u03b3 {_g(cap.gamma)} kN/m\u00b3"),
               ("Contact with the soil", {"none": "none (the cap touches no soil)",
                                          "bonded": "bonded",
                                          "frictional": "frictional, no tension (lift-off)"}
                [cap.contact])], key_width=0.25)
    p = d.piles
    doc.text("3.3  Piles", weight="bold")
    doc.pairs([("Section", f"{p.shape}, width {_g(p.width)} m"),
               ("Length", f"{_g(p.length)} m along the axis"),
               ("Pile E", f"{_g(p.E, 1e6)} GPa, head {p.head}"),
               ("Shaft and lateral", "adhesion factor " + ("API default" if p.alpha is None
                                                           else _g(p.alpha))
                + ", friction factor " + ("tan(\u03c6' - 5\u00b0)" if p.beta is None
                                          else _g(p.beta))
                + f", N_p {_g(p.lateral_factor)}"),
               ("Slip springs", f"{_g(p.slip_stiffening)} x the subgrade-reaction "
                                "stiffness (continuum support)")], key_width=0.25)
    doc.table([Column("Ring", 0.1, "r"), Column("Radius (m)", 0.2, "r"),
               Column("Piles", 0.15, "r"), Column("Rake (h:v)", 0.25, "r"),
               Column("First pile at (\u00b0)", 0.3, "r")],
              [(str(i + 1), _g(r.radius), str(r.count),
                "vertical" if r.rake == 0 else f"1:{_n(1 / r.rake, sig=3)}",
                _g(r.angle_offset)) for i, r in enumerate(p.rings)])
    ld = d.loading
    doc.text("3.4  Loads and control", weight="bold")
    control = {"lever": f"moment and horizontal force together, H = M / h with h = "
                        f"{_g(ld.lever_arm)} m" if ld.lever_arm else "",
               "rotation": "rotation of the tower base" + (
                   f", horizontal force {_g(ld.horizontal)} kN held" if ld.horizontal else ""),
               "settlement": "settlement of the tower base"}[ld.control]
    items = [("Vertical load V", f"{_g(ld.vertical)} kN at the tower base"),
             ("Pushover control", control),
             ("End of pushover", ("at the plateau of the curve or " if ld.stop_at_plateau
                                  else "") + f"at {_g(ld.rotation_max, 1e-3)} mrad")]
    ds = d.design_strength
    if ds is not None:
        items.append(("Design strengths", f"s_u / {ds.su:g}, c' / {ds.c:g}, tan \u03c6' / "
                                          f"{ds.tan_phi:g}, pile resistances / "
                                          f"{ds.pile_resistance:g}"))
    req = d.requirements
    if req.resistance_factor != 1.0:
        items.append(("Resistance factor", f"{req.resistance_factor:g}"))
    doc.pairs(items, key_width=0.25)


def _model_section(doc: NoteDocument, result: Result) -> None:
    m, d = result.model, result.design
    doc.heading("4  Model")
    items = [("Geometry", _geometry_words(result)),
             ("Soil elements", {"T15": "15-node triangles (quartic)",
                                "T6": "6-node triangles (quadratic)"}.get(
                 m.get("element"), str(m.get("element")))
              + f", mesh '{m.get('mesh')}'"),
             ("Size", f"{m.get('nodes', '-')} nodes, {m.get('cells', '-')} cells, "
                      f"{m.get('dofs', '-')} DOFs"
              + (f" ({m.get('dofs_per_harmonic')} per harmonic)"
                 if m.get("dofs_per_harmonic") else "")),
             ("Support of the piles", "soil continuum with embedded beam piles and slip "
              "springs" if m.get("support") == "continuum" else "springs only (p-y, t-z, q-z; "
              "rigid cap)")]
    if m.get("geometry") == "plane_strain":
        items.append(("Slice length L", f"{_n(m.get('slice_length_m'))} m, "
                                         f"{m.get('slice_length_rule', '')}"))
        items.append(("Pile rows", f"{len(m.get('rows', []))} rows of the ring piles "
                                   "projected on the slice"))
    if m.get("slip_stiffening") is not None:
        items.append(("Slip-spring stiffening", f"{_n(m['slip_stiffening'])}"))
    if d is not None:
        items.append(("Cap contact", d.cap.contact))
    doc.pairs(items, key_width=0.25)
    if result.stages:
        doc.text("Stages, in order", weight="bold")
        doc.table([Column("Stage", 0.26), Column("Increments", 0.14, "r"),
                   Column("Newton iterations", 0.2, "r"), Column("Factorizations", 0.17, "r"),
                   Column("Time (s)", 0.12, "r"), Column("Status", 0.11, "r")],
                  [(s.get("name", ""), str(s.get("increments", "-")),
                    str(s.get("iterations", "-")), str(s.get("factorizations", "-")),
                    f"{s.get('seconds', 0.0):.1f}", s.get("status", ""))
                   for s in result.stages])
    doc.text("Assumptions and limitations", weight="bold")
    notes = ["Monotonic static pushover: no cyclic degradation, fatigue, creep or "
             "consolidation; undrained layers stay undrained and drained layers drained.",
             "Soil: linear elastic, perfectly plastic (Mohr-Coulomb or Tresca) with the "
             "at-rest stresses (K0) as the initial state; no hardening or softening.",
             "Piles: elastic beams; pile-soil slip and the pile tip through elastic-plastic "
             "t-z, p-y and q-z springs; the cap is elastic concrete."]
    if m.get("geometry") == "plane_strain":
        notes.append("Plane-strain slice: rings of piles are lumped into rows and the 3D "
                     "response is estimated by the slice length; the harmonic 3D model "
                     "(geometry = harmonic) removes this approximation.")
    elif m.get("geometry") == "harmonic":
        notes.append("Harmonic model: the piles of a ring are smeared around it; pile "
                     "forces per position come from the harmonic sum at the pile angles.")
    doc.bullets(notes, size=8.2)


def _quantities_section(doc: NoteDocument, result: Result) -> None:
    doc.heading("5  Material quantities")
    doc.table([Column("Quantity", 0.55), Column("Value", 0.25, "r"), Column("Unit", 0.20)],
              sm.quantity_rows(result.quantities))
    doc.text("From the design's geometry: the cap as a solid of revolution of its section, "
             "the pedestal as a cylinder, pile lengths along the axes (raked piles count "
             "their full length).", size=7.8, colour=MUTED)


# -- figures -------------------------------------------------------------------------------
def _plot_curve(fig, rect, result: Result) -> str:
    ax = fig.add_axes(_inset(rect, 0.09, 0.11, 0.03, 0.05))
    c = result.curve
    th = np.concatenate([[0.0], c["rotation"]]) * 1e3
    M = np.concatenate([[0.0], c["moment"]]) / 1e3
    ax.plot(th, M, color=ACCENT, lw=1.8, label="pushover (characteristic strengths)")
    ds = result.design_strength
    if ds is not None and ds["curve"].get("rotation"):
        ax.plot(np.concatenate([[0.0], ds["curve"]["rotation"]]) * 1e3,
                np.concatenate([[0.0], ds["curve"]["moment"]]) / 1e3, color=ACCENT, lw=1.1,
                ls="--", label="pushover, design strengths")
        ud = ds["keypoints"].get("ultimate") or {}
        if ud.get("value") is not None and (ud.get("extra") or {}).get("rotation") is not None:
            ax.plot(ud["extra"]["rotation"] * 1e3, ud["value"] / 1e3, "o", mfc="white",
                    color=INK, ms=5, label="ultimate, design strengths")
    kp = result.keypoints
    tmax = th[-1] if th[-1] > 0 else 1.0
    k0 = kp.get("initial_stiffness")
    if k0 is not None and k0.value:
        t = min(tmax, 1.05 * M.max() / (k0.value / 1e6))
        ax.plot([0, t], [0, k0.value / 1e6 * t], color=MUTED, lw=0.8,
                label="initial stiffness (bilinear idealisations)")
    for name, marker, label in (("yield_equal_energy", "s", "yield (equal energy)"),
                                ("yield_tangents", "D", "yield (tangents)"),
                                ("ultimate", "o", "ultimate (plateau)")):
        p = kp.get(name)
        if p and p.value is not None and (p.extra or {}).get("rotation") is not None:
            ax.plot(p.extra["rotation"] * 1e3, p.value / 1e3, marker, color=INK, ms=5,
                    label=label)
    req = result.design.requirements if result.design is not None else None
    if req is not None and req.static_stiffness_min:
        t = min(tmax, 1.15 * M.max() / (req.static_stiffness_min / 1e6))
        ax.plot([0, t], [0, req.static_stiffness_min / 1e6 * t], "--", color=WARN, lw=1,
                label="minimum static stiffness")
    if req is not None and req.design_moment:
        ax.axhline(req.design_moment * req.resistance_factor / 1e3, color=WARN, lw=1,
                   ls=":", label="design moment \u00d7 resistance factor")
    dyn = result.dynamic
    if dyn is not None and dyn.value:
        t = min(tmax, 1.15 * M.max() / (dyn.value / 1e6))
        ax.plot([0, t], [0, dyn.value / 1e6 * t], color=GOOD, lw=1,
                label="dynamic stiffness (G0)")
    ax.set_xlabel("rotation of the tower base \u03b8 (mrad)")
    ax.set_ylabel("overturning moment M (MNm)")
    ax.legend(fontsize=6.8, frameon=True, framealpha=0.92, edgecolor="none",
              loc="lower right")
    ax.set_xlim(0, tmax)
    ax.set_ylim(0, None)
    est = " (3D estimate from the slice)" if result.model.get("geometry") == "plane_strain" \
        else ""
    return (f"Overturning moment at the tower base against its rotation{est}. Solid: the "
            "pushover with characteristic strengths; dashed: with design strengths. Markers: "
            "the yield and ultimate key points of section 2 (the yield points sit at the "
            "corner of their bilinear idealisation, on the grey initial-stiffness line). "
            "Orange lines: the requirements (dashed, the minimum static secant stiffness; "
            "dotted, the design moment times the resistance factor); green: the dynamic stiffness.")


def _inset(rect, left, bottom, right, top):
    x, y, w, h = rect
    return (x + left * w, y + bottom * h, w * (1 - left - right), h * (1 - bottom - top))


def _slice_mesh(result: Result, deformed: bool):
    """(points, [(name, triangles)], pile lines, yielded points, scale) of the slice."""
    built = result.built
    model = built.model
    mesh = model.mesh
    n = mesh.n_nodes
    u = result.pushover.u if (deformed and result.pushover) else np.zeros(model.n_dofs)
    scale = 0.0
    if deformed:
        umax = np.abs(u[: 2 * n]).max() if n else 0.0
        scale = 0.05 * np.ptp(mesh.points[:, 1]) / umax if umax > 0 else 0.0
    pts = mesh.points + scale * u[: 2 * n].reshape(-1, 2)
    blocks = [(b.name, pts[mesh.cells[b.cells][:, [0, 1, 2]]]) for b in model.solid_blocks]
    lines = [pr.beam.xy + scale * u[pr.beam_dofs[:, :2]] for pr in built.rows]
    yielded = np.zeros((0, 2))
    if deformed:
        chunks = []
        for b, st in zip(model.blocks, result.pushover.states, strict=True):
            if isinstance(b, SolidBlock) and b.name != "cap":
                xq = b.geom.x + scale * np.einsum(
                    "qa,cad->cqd", b.geom.N, u[: 2 * n].reshape(-1, 2)[mesh.cells[b.cells]])
                chunks.append(xq[st.yielded])
        yielded = np.vstack(chunks) if chunks else yielded
    return blocks, lines, yielded, scale


def _harmonic_mesh(result: Result, deformed: bool):
    """The same for the harmonic model: the section through the planes theta = 0 (x > 0)
    and theta = 180 degrees (x < 0), undeformed, with the cells yielded on those planes."""
    from .results import harmonic_yielded_fractions

    hb = result.harmonic
    hm = hb.hf.model
    mesh = hm.mesh
    blocks = []
    for b in hm.blocks:
        if hasattr(b, "cells") and b.cells is not None and len(b.cells):
            tri = mesh.points[mesh.cells[np.asarray(b.cells)][:, [0, 1, 2]]]
            mirror = tri * np.array([-1.0, 1.0])
            blocks.append((b.name, np.concatenate([tri, mirror])))
    d = result.design
    lines = []
    z0 = -d.cap.underside_depth
    for ring in d.piles.rings:
        dz = d.piles.length / np.sqrt(1 + ring.rake**2)
        for sgn in (1.0, -1.0):
            lines.append(np.array([[sgn * ring.radius, z0],
                                   [sgn * (ring.radius + ring.rake * dz), z0 - dz]]))
    yielded = np.zeros((0, 2))
    if deformed:
        theta, frac = harmonic_yielded_fractions(result)
        centres = mesh.points[mesh.cells[:, :3]].mean(axis=1)
        on0 = centres[frac[0] > 0]
        onpi = centres[frac[-1] > 0] * np.array([-1.0, 1.0])
        yielded = np.vstack([on0, onpi])
    return blocks, lines, yielded, 0.0


def _plot_mesh(fig, rect, result: Result, deformed: bool) -> str:
    from matplotlib.collections import PolyCollection
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    harmonic = result.built is None
    blocks, lines, yielded, scale = (_harmonic_mesh if harmonic else _slice_mesh)(
        result, deformed)
    ax = fig.add_axes(_inset(rect, 0.08, 0.1, 0.02, 0.03))
    handles = []
    soil_k = 0
    for name, poly in blocks:
        if name == "cap":
            colour = _CAP_COLOUR
        else:
            colour = _LAYER_COLOURS[soil_k % len(_LAYER_COLOURS)]
            soil_k += 1
        ax.add_collection(PolyCollection(poly, facecolors=colour, edgecolors="white",
                                         linewidths=0.25, rasterized=True))
        if not deformed and name not in [h.get_label() for h in handles]:
            handles.append(Patch(facecolor=colour, edgecolor=MUTED, lw=0.4, label=name))
    for xy in lines:
        ax.plot(xy[:, 0], xy[:, 1], color=INK, lw=1.3)
    handles.append(Line2D([], [], color=INK, lw=1.3, label="piles"))
    if deformed:
        ax.scatter(yielded[:, 0], yielded[:, 1], s=2.0 if not harmonic else 5.0,
                   color=_YIELD_COLOUR, lw=0, rasterized=True)
        handles = [Line2D([], [], ls="", marker="o", ms=4, color=_YIELD_COLOUR,
                          label="yielded soil" + (" (cells, on the planes 0 and 180\u00b0)"
                                                  if harmonic else " (integration points)")),
                   handles[-1]]
    d = result.design
    R = d.cap.diameter / 2
    ax.set_xlim(-3.2 * R, 3.2 * R)
    ax.set_ylim(-(d.cap.underside_depth + d.piles.length + 1.2 * R), 0.5 * R)
    ax.set_aspect("equal")
    ax.set_xlabel("horizontal position from the cap centre (m)")
    ax.set_ylabel("elevation (m)")
    ax.legend(handles=handles, loc="lower right", fontsize=6.5, frameon=True,
              framealpha=0.9, ncol=2 if len(handles) > 4 else 1)
    what = ("the section through the cap centre in the plane of the moment (the "
            "axisymmetric mesh and its mirror image)" if harmonic else
            "the plane-strain slice through the cap centre")
    if not deformed:
        return (f"The model: {what}, soil layers in colour, the cap in grey, pile axes as "
                "black lines. Only the near part of the soil domain is shown.")
    mag = (f"displacements magnified {scale:.0f} times; " if scale > 0 else
           "undeformed mesh; ")
    return (f"End of the pushover: {what}; {mag}orange marks the soil that has yielded "
            "(reached the Mohr-Coulomb or Tresca strength).")


def _governing(result: Result, limit: int = 4) -> list:
    """The piles shown in the pile-force figure: the rows of the slice with the largest
    compression and the largest tension (or least compression) and the two outermost rows;
    every ring of the harmonic model (its envelopes cover every position of a ring)."""
    piles = result.piles
    if result.model.get("geometry") == "harmonic":
        return piles[:limit]
    candidates = [max(piles, key=lambda p: p.max_compression),
                  max(piles, key=lambda p: p.max_tension),
                  min(piles, key=lambda p: p.x), max(piles, key=lambda p: p.x)]
    chosen = []
    for p in candidates:
        if p not in chosen:
            chosen.append(p)
    return sorted(chosen[:limit], key=lambda p: p.x)


def _plot_piles(fig, rect, result: Result) -> str:
    from matplotlib.ticker import MaxNLocator

    chosen = _governing(result)
    n = len(chosen)
    x, y, w, h = _inset(rect, 0.08, 0.1, 0.01, 0.06)
    gs = fig.add_gridspec(2, n, left=x, right=x + w, bottom=y, top=y + h, hspace=0.35,
                          wspace=0.12)
    harmonic = result.model.get("geometry") == "harmonic"
    ax0 = None
    for k, p in enumerate(chosen):
        depth = np.asarray(p.depth)
        a1 = fig.add_subplot(gs[0, k], sharey=ax0)
        ax0 = ax0 or a1
        a2 = fig.add_subplot(gs[1, k], sharey=ax0)
        cmin, cmax = np.asarray(p.compression_min), np.asarray(p.compression_max)
        a1.fill_betweenx(depth, np.maximum(cmin, 0), np.maximum(cmax, 0), color=_COMPRESSION,
                         alpha=0.3, lw=0)
        a1.fill_betweenx(depth, np.minimum(cmin, 0), np.minimum(cmax, 0), color=_TENSION,
                         alpha=0.3, lw=0)
        a1.plot(cmax, depth, color=_COMPRESSION, lw=0.9)
        a1.plot(cmin, depth, color=_TENSION if cmin.min() < 0 else _COMPRESSION, lw=0.9,
                ls="--")
        a1.axvline(0.0, color=MUTED, lw=0.7)
        a2.fill_betweenx(depth, p.moment_min, p.moment_max, color=MUTED, alpha=0.3, lw=0)
        a2.plot(p.moment_max, depth, color=INK, lw=0.9)
        a2.plot(p.moment_min, depth, color=INK, lw=0.9, ls="--")
        a2.axvline(0.0, color=MUTED, lw=0.7)
        where = (f"ring r = {p.x:.1f} m\n{p.count:g} piles, all positions" if harmonic else
                 f"row x = {p.x:+.1f} m\n{p.count:g} piles, rake {p.rake:.3f}")
        a1.set_title(where, fontsize=7)
        a1.set_xlabel("axial force (kN)", fontsize=7)
        a2.set_xlabel("bending moment (kNm)", fontsize=7)
        for a in (a1, a2):
            a.xaxis.set_major_locator(MaxNLocator(4))
            a.tick_params(labelsize=6.5)
            if k:
                a.tick_params(labelleft=False)
    ax0.invert_yaxis()
    fig.axes[-2 * n].set_ylabel("depth (m)", fontsize=7)
    fig.axes[-2 * n + 1].set_ylabel("depth (m)", fontsize=7)
    which = ("every ring (envelope over all pile positions of the ring)" if harmonic else
             "the rows with the largest compression and the largest tension and the two "
             "outermost rows")
    return (f"Envelopes over the pushover of the axial force (top; compression positive, "
            f"blue; tension red) and the bending moment (bottom) per pile, of {which}. "
            "Solid: the largest value reached at each depth; dashed: the smallest. All "
            "rows are in result.json (piles).")


def _plot_histories(fig, rect, result: Result) -> str:
    c = result.curve
    x, y, w, h = _inset(rect, 0.07, 0.22, 0.01, 0.04)
    gs = fig.add_gridspec(1, 3, left=x, right=x + w, bottom=y, top=y + h, wspace=0.38)
    axs = [fig.add_subplot(gs[0, k]) for k in range(3)]
    axs[0].plot(np.asarray(c["settlement"]) * 1e3, np.asarray(c["rotation"]) * 1e3,
                color=ACCENT)
    axs[0].set_xlabel("settlement (mm)")
    axs[0].set_ylabel("rotation (mrad)")
    axs[1].plot(np.asarray(c["horizontal_displacement"]) * 1e3,
                np.asarray(c["horizontal"]) / 1e3, color=ACCENT)
    axs[1].set_xlabel("horizontal displacement (mm)")
    axs[1].set_ylabel("H (MN)")
    it = np.asarray(c["iterations"])
    axs[2].bar(np.arange(1, len(it) + 1), it, color=MUTED)
    axs[2].set_xlabel("increment")
    axs[2].set_ylabel("Newton iterations")
    return ("Histories of the tower base over the pushover: settlement against rotation "
            f"(left), horizontal force against horizontal displacement (middle), and the "
            f"Newton iterations of each increment (right; {len(it)} increments, "
            f"{int(it.sum())} iterations in all).")


# -- document ------------------------------------------------------------------------------
def _figure_list(result: Result) -> list[tuple[str, object, float, float]]:
    """(stem, plotter, PNG aspect height/width, height on the page) of the figures this
    result can draw."""
    out = []
    if result.pushover is None or not result.pushover.records:
        return out
    has_curve = "rotation" in result.curve
    if has_curve:
        out.append(("moment_rotation", _plot_curve, 0.62, 0.42))
    if result.built is not None or result.harmonic is not None:
        out.append(("model", lambda f, r, res: _plot_mesh(f, r, res, False), 0.55, 0.33))
        out.append(("deformed", lambda f, r, res: _plot_mesh(f, r, res, True), 0.55, 0.33))
    if result.piles:
        out.append(("pile_forces", _plot_piles, 0.75, 0.46))
    if has_curve and "settlement" in result.curve:
        out.append(("histories", _plot_histories, 0.33, 0.22))
    return out


def write_report(result: Result, out: Path) -> list[Path]:
    """report.pdf and the figures as PNG in ``out``; returns the files written.
    Matplotlib's own warnings (a glyph the font lacks, e.g. in a CJK design name) are not
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
    today = _dt.date.today().isoformat()
    doc = NoteDocument(plt, f"tiltfe calculation note - {result.design_name}", today)
    _title_block(doc, result)
    _summary_section(doc, result)
    _keypoint_section(doc, result)
    _inputs_section(doc, result)
    _model_section(doc, result)
    _quantities_section(doc, result)
    figures = _figure_list(result)
    if figures:
        doc.heading("6  Figures")
    for k, (stem, plot, aspect, height) in enumerate(figures, start=1):
        rect = doc.figure_area(height)
        caption = plot(doc.fig, rect, result)
        doc.caption(k, FIGURES[stem], caption)
        png = plt.figure(figsize=(8.0, 8.0 * aspect))
        plot(png, (0.0, 0.0, 1.0, 1.0), result)
        p = out / f"{stem}.png"
        png.savefig(p)
        plt.close(png)
        files.append(p)
    if doc.y - 0.08 > BOTTOM:  # the caution again at the end where it fits (it is on page 1
        doc.space(6)           # and every footer carries its short form)
        doc.boxed("Caution. " + CAUTION)
    pages = doc.finish(f"tiltfe {(result.model.get('versions') or {}).get('tiltfe', '')}: "
                       "indicative model results, to be checked by a qualified engineer")
    pdf_path = out / "report.pdf"
    with PdfPages(pdf_path) as pdf:
        info = pdf.infodict()
        info["Title"] = f"Moment-rotation calculation note: {result.design_name}"
        info["Creator"] = "tiltfe"
        for fig in pages:
            pdf.savefig(fig)
            plt.close(fig)
    files.append(pdf_path)
    return files
