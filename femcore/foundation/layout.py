"""3D ring layouts of piles -> 2D rows of the plane-strain slice.

Pile k of a ring (radius r, count n, angular offset a0) stands at angle a_k = a0 + 2 pi k/n;
its projection on the loading plane is x_k = r cos(a_k). Piles whose |x| fall within
``merge`` of the first (innermost) pile of a group form one row pair (no chaining: a row spans
at most ``merge``; chained groups used to swallow whole dense rings and lost up to 15 % of
the slice stiffness) at +-x_rms with x_rms = sqrt(mean(x^2)) and their
true counts, so that sum(n) and sum(n x^2) of the group are preserved exactly; a group at
x_rms ~ 0 becomes a single row at x = 0. Each row carries n_row / L times one pile's
stiffness and resistance in a slice of out-of-plane length L (default 16R/(3 pi) for a
circular cap of radius R: the rocking stiffness of a rigid circle, 8GR^3/(3(1-nu)), equals
that of a strip of width 2R, pi G R^2/(2(1-nu)) per metre, times L).

The in-plane rake of a row is the mean of rake * |cos(a_k)| over its piles (outward raked
piles lean away from the centre in the plane).

Rows of different rings can project onto nearly the same place, and a raked row can cross a
vertical one in the plane although the piles never meet in 3D. Rows whose pile lines come
closer than ``merge`` anywhere are therefore merged as well (count-weighted rake, x_rms
position), again preserving sum(n) and sum(n x^2) of the heads.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

__all__ = ["Ring", "Row", "lump_rings", "merge_close_rows", "default_slice_length"]


@dataclass(frozen=True)
class Ring:
    radius: float  # m
    count: int
    rake: float = 0.0  # horizontal per vertical (e.g. 1/6 for 1:6), positive outward
    angle_offset: float = 0.0  # degrees; 0 puts a pile on the +x axis


@dataclass(frozen=True)
class Row:
    x: float  # m, head position in the slice
    count: float  # true number of piles in the row
    rake: float  # in-plane horizontal per vertical, positive away from x = 0 (0 at x = 0)
    ring: int  # index of the ring it comes from


def default_slice_length(cap_radius: float) -> float:
    """L = 16 R / (3 pi): rigid-footing rocking equivalence, circle vs strip."""
    return 16.0 * cap_radius / (3.0 * np.pi)


def _segment_distances(p1, p2) -> NDArray[np.float64]:
    """Shortest distances ``(m, m)`` between the plane segments ``p1[i]``-``p2[i]``
    (``(m, 2)`` arrays): zero where two segments cross, else the least of the four
    end-point-to-segment distances."""
    p1, p2 = np.asarray(p1, float), np.asarray(p2, float)

    def cross(o, a, b):  # broadcasting (..., 2)
        return (a[..., 0] - o[..., 0]) * (b[..., 1] - o[..., 1]) \
            - (a[..., 1] - o[..., 1]) * (b[..., 0] - o[..., 0])

    P1, P2 = p1[:, None], p2[:, None]  # segment i along rows
    Q1, Q2 = p1[None], p2[None]  # segment j along columns
    crossing = (cross(Q1, Q2, P1) * cross(Q1, Q2, P2) < 0) \
        & (cross(P1, P2, Q1) * cross(P1, P2, Q2) < 0)

    def point_seg(p, a, b):
        ab = b - a
        t = np.clip(np.sum((p - a) * ab, axis=-1) / np.maximum(np.sum(ab * ab, axis=-1),
                                                              1e-300), 0.0, 1.0)
        return np.hypot(*np.moveaxis(a + t[..., None] * ab - p, -1, 0))

    d = np.minimum.reduce([point_seg(P1, Q1, Q2), point_seg(P2, Q1, Q2),
                           point_seg(Q1, P1, P2), point_seg(Q2, P1, P2)])
    return np.where(crossing, 0.0, d)


def _line(row: Row, depth: float):
    side = np.sign(row.x)
    return (row.x, 0.0), (row.x + side * row.rake * depth, -depth)


def _merge(a: Row, b: Row) -> Row:
    n = a.count + b.count
    x = np.sqrt((a.count * a.x**2 + b.count * b.x**2) / n) * (1.0 if a.x + b.x >= 0 else -1.0)
    if abs(x) < 1e-9:
        x = 0.0
    rake = (a.count * a.rake + b.count * b.rake) / n if x != 0.0 else 0.0
    return Row(float(x), n, float(rake), min(a.ring, b.ring))


def merge_close_rows(rows: list[Row], depth: float, merge: float) -> list[Row]:
    """Merge rows whose pile lines (to ``depth`` below the heads) come closer than ``merge``.

    Rows on opposite sides of x = 0 merge only at x = 0 (the layout stays symmetric)."""
    rows = list(rows)
    while True:
        ends = np.array([_line(r, depth) for r in rows], dtype=float)  # (m, 2, 2)
        D = _segment_distances(ends[:, 0], ends[:, 1])
        x = np.array([r.x for r in rows])
        D[np.outer(x, x) < 0] = np.inf  # opposite sides of x = 0
        D[np.tril_indices(len(rows))] = np.inf  # each pair once, not with itself
        k = int(np.argmin(D)) if D.size else 0
        if not D.size or D.flat[k] >= merge:
            return sorted(rows, key=lambda r: r.x)
        i, j = np.unravel_index(k, D.shape)
        pair = (int(i), int(j))
        merged = _merge(rows[i], rows[j])
        rows = [r for k, r in enumerate(rows) if k not in pair] + [merged]


def lump_rings(rings: list[Ring], merge: float = 1.0, depth: float | None = None) -> list[Row]:
    """Rows (sorted by x) from ring layouts; ``merge`` in m (> 0). With ``depth`` (the
    vertical extent of the piles) rows whose lines come closer than ``merge`` merge too."""
    rows: list[Row] = []
    for ir, ring in enumerate(rings):
        a = np.radians(ring.angle_offset) + 2 * np.pi * np.arange(ring.count) / ring.count
        x = ring.radius * np.cos(a)
        ax = np.abs(x)
        order = np.argsort(ax)
        groups: list[list[int]] = [[int(order[0])]]
        for k in order[1:]:
            if ax[k] - ax[groups[-1][0]] <= merge:  # within merge of the row's first pile
                groups[-1].append(int(k))
            else:
                groups.append([int(k)])
        for g in groups:
            xs = x[g]
            x_rms = float(np.sqrt(np.mean(xs**2)))
            rake = float(ring.rake * np.mean(np.abs(np.cos(a[g]))))
            if x_rms <= 1e-9 * max(ring.radius, 1.0):
                rows.append(Row(0.0, float(len(g)), 0.0, ir))
                continue
            n_pos = float(np.sum(xs > 0))
            n_neg = float(len(g)) - n_pos
            # split the group symmetrically when it straddles; otherwise keep its side
            if n_pos and n_neg:
                rows += [Row(x_rms, len(g) / 2, rake, ir), Row(-x_rms, len(g) / 2, rake, ir)]
            else:
                rows.append(Row(x_rms if n_pos else -x_rms, float(len(g)), rake, ir))
    if depth is not None:
        return merge_close_rows(rows, depth, merge)
    return sorted(rows, key=lambda r: r.x)
