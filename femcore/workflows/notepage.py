"""A4 pages of a calculation note drawn with matplotlib: headings, wrapped paragraphs,
tables that break across pages, figure areas with numbered captions, and a running header
and footer ("page k of n", added when the document is finished).

Positions are figure fractions of an A4 portrait page; text is wrapped by an estimate of
the average glyph width of the default sans-serif font (DejaVu Sans), so a cell wraps
before it reaches the next column.
"""

from __future__ import annotations

import textwrap
from dataclasses import dataclass

__all__ = ["Column", "NoteDocument", "INK", "MUTED", "ACCENT", "WARN", "GOOD", "BAD", "BOTTOM"]

INK, MUTED, ACCENT, WARN, GOOD, BAD = ("#1d2733", "#6b7785", "#2b6cb0", "#b7591c", "#2f7d4f",
                                       "#b42318")
_RULE, _BAND = "#c9d1da", "#f3f5f8"

PAGE_W, PAGE_H = 8.27, 11.69  # A4, inches
LEFT, RIGHT, TOP, BOTTOM = 0.075, 0.925, 0.935, 0.07
_CHAR_EM = 0.56  # average glyph width of DejaVu Sans in ems (mixed text and digits)


@dataclass(frozen=True)
class Column:
    """A table column: ``title``, ``width`` (fraction of the text width), ``align`` l | r."""

    title: str
    width: float
    align: str = "l"


def _chars(width_frac: float, size: float) -> int:
    """How many characters of ``size`` pt fit in ``width_frac`` of the text width."""
    width_pt = width_frac * (RIGHT - LEFT) * PAGE_W * 72.0
    return max(int(width_pt / (_CHAR_EM * size)), 4)


def _line_h(size: float, spacing: float = 1.38) -> float:
    return size * spacing / 72.0 / PAGE_H


class NoteDocument:
    """The pages of one note. ``header`` is the running header's left text."""

    def __init__(self, plt, header: str, date: str):
        self.plt, self.header, self.date = plt, header, date
        self.pages: list = []
        self.y = TOP
        self.new_page()

    # -- pages ---------------------------------------------------------------------------
    @property
    def fig(self):
        return self.pages[-1]

    def new_page(self) -> None:
        self.pages.append(self.plt.figure(figsize=(PAGE_W, PAGE_H)))
        self.y = TOP

    def _need(self, height: float) -> bool:
        """Start a new page unless ``height`` fits above the bottom margin; True if one was
        started."""
        if self.y - height < BOTTOM and self.y < TOP - 1e-9:
            self.new_page()
            return True
        return False

    def space(self, pt: float = 6.0) -> None:
        self.y -= pt / 72.0 / PAGE_H

    # -- text ----------------------------------------------------------------------------
    def title(self, text: str, subtitle: str = "") -> None:
        self.fig.text(LEFT, self.y, text, fontsize=16, weight="bold", color=INK, va="top")
        self.y -= _line_h(16, 1.5)
        if subtitle:
            self.fig.text(LEFT, self.y, subtitle, fontsize=9.5, color=MUTED, va="top")
            self.y -= _line_h(9.5, 1.6)

    def heading(self, text: str, size: float = 11.5) -> None:
        self._need(_line_h(size, 1.6) + 3 * _line_h(8.5))  # keep a heading with its text
        self.space(4)
        self.fig.text(LEFT, self.y, text, fontsize=size, weight="bold", color=INK, va="top")
        self.y -= _line_h(size, 1.25)
        self.fig.add_artist(self.plt.Line2D([LEFT, RIGHT], [self.y, self.y], lw=0.6,
                                            color=_RULE))
        self.y -= _line_h(size, 0.45)

    def text(self, text: str, size: float = 8.8, colour: str = INK, weight: str = "normal",
             indent: float = 0.0, bullet: str = "") -> None:
        """A paragraph wrapped to the text width (``bullet``: a hanging first-line mark)."""
        width = _chars(1.0 - indent - (0.025 if bullet else 0.0), size)
        lines = textwrap.wrap(text, width) or [""]
        for i, line in enumerate(lines):
            self._need(_line_h(size))
            x = LEFT + indent * (RIGHT - LEFT)
            if bullet and i == 0:
                self.fig.text(x, self.y, bullet, fontsize=size, color=colour, va="top")
            self.fig.text(x + (0.025 * (RIGHT - LEFT) if bullet else 0.0), self.y, line,
                          fontsize=size, color=colour, weight=weight, va="top")
            self.y -= _line_h(size)
        self.space(2.5)

    def bullets(self, items, size: float = 8.8) -> None:
        for it in items:
            self.text(it, size=size, bullet="\u2022")

    # -- tables --------------------------------------------------------------------------
    def table(self, columns: list[Column], rows: list, size: float = 8.3,
              colours: dict | None = None, bold_first: bool = False) -> None:
        """Rows of strings under a bold header; cells wrap in their column; the header is
        repeated on a new page. ``colours``: {(row, col): colour} for single cells."""
        colours = colours or {}
        total = sum(c.width for c in columns)
        widths = [c.width / total for c in columns]
        x0 = [LEFT + (RIGHT - LEFT) * sum(widths[:i]) for i in range(len(columns))]
        pad = 0.006
        lh = _line_h(size, 1.3)

        def cell_x(i):
            if columns[i].align == "r":
                return x0[i] + widths[i] * (RIGHT - LEFT) - pad
            return x0[i] + pad

        def draw_header():
            self.fig.add_artist(self.plt.Rectangle((LEFT, self.y - lh - 0.004), RIGHT - LEFT,
                                                   lh + 0.004, color="#e6ebf1", lw=0,
                                                   transform=self.fig.transFigure))
            for i, c in enumerate(columns):
                self.fig.text(cell_x(i), self.y - 0.002, c.title, fontsize=size,
                              weight="bold", color=INK, va="top",
                              ha="right" if c.align == "r" else "left")
            self.y -= lh + 0.004

        self._need(2 * lh + 0.01)
        draw_header()
        for r, row in enumerate(rows):
            wrapped = [textwrap.wrap(str(v), _chars(widths[i] - 2 * pad / (RIGHT - LEFT),
                                                    size)) or [""]
                       for i, v in enumerate(row)]
            h = max(len(w) for w in wrapped) * lh + 0.003
            if self._need(h):
                draw_header()
            if r % 2 == 1:
                self.fig.add_artist(self.plt.Rectangle((LEFT, self.y - h), RIGHT - LEFT, h,
                                                       color=_BAND, lw=0,
                                                       transform=self.fig.transFigure))
            for i, lines in enumerate(wrapped):
                for k, line in enumerate(lines):
                    self.fig.text(cell_x(i), self.y - 0.0015 - k * lh, line, fontsize=size,
                                  va="top", ha="right" if columns[i].align == "r" else "left",
                                  color=colours.get((r, i), INK),
                                  weight="bold" if (bold_first and i == 0)
                                  or (r, i) in colours else "normal")
            self.y -= h
        self.fig.add_artist(self.plt.Line2D([LEFT, RIGHT], [self.y, self.y], lw=0.6,
                                            color=_RULE))
        self.space(6)

    def pairs(self, items: list[tuple[str, str]], size: float = 8.5,
              key_width: float = 0.3) -> None:
        """A two-column list of (name, value) without a header."""
        for r, (k, v) in enumerate(items):
            lines = textwrap.wrap(str(v), _chars(1.0 - key_width - 0.01, size)) or [""]
            keys = textwrap.wrap(str(k), _chars(key_width - 0.01, size)) or [""]
            lh = _line_h(size, 1.3)
            h = max(len(lines), len(keys)) * lh + 0.002
            self._need(h)
            if r % 2 == 1:
                self.fig.add_artist(self.plt.Rectangle((LEFT, self.y - h), RIGHT - LEFT, h,
                                                       color=_BAND, lw=0,
                                                       transform=self.fig.transFigure))
            for j, line in enumerate(keys):
                self.fig.text(LEFT + 0.006, self.y - 0.0015 - j * lh, line, fontsize=size,
                              color=MUTED, va="top")
            for j, line in enumerate(lines):
                self.fig.text(LEFT + key_width * (RIGHT - LEFT), self.y - 0.0015 - j * lh,
                              line, fontsize=size, color=INK, va="top")
            self.y -= h
        self.space(6)

    def boxed(self, text: str, colour: str = WARN, size: float = 8.3) -> None:
        """A paragraph in a thin frame (the caution)."""
        lines = textwrap.wrap(text, _chars(0.97, size))
        lh = _line_h(size, 1.32)
        h = len(lines) * lh + 0.012
        self._need(h)
        self.fig.add_artist(self.plt.Rectangle((LEFT, self.y - h), RIGHT - LEFT, h, fill=False,
                                               lw=0.8, ec=colour,
                                               transform=self.fig.transFigure))
        for k, line in enumerate(lines):
            self.fig.text(LEFT + 0.012, self.y - 0.006 - k * lh, line, fontsize=size,
                          color=colour, va="top")
        self.y -= h
        self.space(6)

    # -- figures -------------------------------------------------------------------------
    def figure_area(self, height: float, keep: float = 0.08) -> tuple[float, float, float,
                                                                      float]:
        """Reserve ``height`` (figure fraction) for a plot, on a new page unless it fits with
        ``keep`` more below it (its caption); its (left, bottom, width, height) on the
        current page, where the caller draws its axes."""
        self._need(height + keep)
        rect = (LEFT, self.y - height, RIGHT - LEFT, height)
        self.y -= height
        return rect

    def caption(self, number: int, title: str, text: str) -> None:
        """``Figure n. title.`` in bold, then what the reader sees."""
        self.space(3)
        self.text(f"Figure {number}. {title}.", size=8.8, weight="bold")
        self.space(-2)
        self.text(text, size=8.5, colour=INK)

    # -- finish --------------------------------------------------------------------------
    def finish(self, footer: str) -> list:
        """Add the running header and footer to every page; the pages."""
        n = len(self.pages)
        for k, fig in enumerate(self.pages, start=1):
            fig.text(LEFT, 0.965, self.header, fontsize=7.5, color=MUTED, va="bottom")
            fig.text(RIGHT, 0.965, self.date, fontsize=7.5, color=MUTED, va="bottom",
                     ha="right")
            fig.add_artist(self.plt.Line2D([LEFT, RIGHT], [0.962, 0.962], lw=0.5,
                                           color=_RULE))
            fig.text(LEFT, 0.04, footer, fontsize=7.2, color=MUTED, va="top")
            fig.text(RIGHT, 0.04, f"page {k} of {n}", fontsize=7.5, color=MUTED, va="top",
                     ha="right")
        return self.pages
