"""Where each piece of text lands on a rendered PDF page, measured from the file itself.

pypdf walks each page's content stream and reports every text run with its text matrix and
the current transformation matrix (ISO 32000-1 §9.4.2: text space to user space is Tm x CTM).
A run's box is its advance width from the font's own metrics (the standard 14 fonts' widths,
Adobe's AFM files, as fpdf2 ships them) times the font size, from the descender (0.21 em
below the baseline) to the cap height (0.72 em above it): Helvetica's published values.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from fpdf.fonts import CORE_FONTS_CHARWIDTHS
from pypdf import PdfReader

_FONTS = {
    "/Helvetica": "helvetica",
    "/Helvetica-Bold": "helveticaB",
    "/Helvetica-Oblique": "helveticaI",
    "/Helvetica-BoldOblique": "helveticaBI",
}


@dataclass(frozen=True)
class TextBox:
    """A text run and its box in page space (points, origin bottom left)."""

    text: str
    x0: float
    y0: float
    x1: float
    y1: float

    def overlaps(self, other: TextBox, slack: float = 0.3) -> bool:
        """True when the two boxes share an area wider and taller than ``slack`` points."""
        dx = min(self.x1, other.x1) - max(self.x0, other.x0)
        dy = min(self.y1, other.y1) - max(self.y0, other.y0)
        return dx > slack and dy > slack


def _width(text: str, font: str | None) -> float:
    """Advance width of ``text`` in thousandths of an em (AFM widths)."""
    widths = CORE_FONTS_CHARWIDTHS[_FONTS.get(font or "", "helvetica")]
    return float(sum(widths.get(ch, 556) for ch in text))


def page_boxes(path: Path) -> list[list[TextBox]]:
    """Every page's text boxes, in the order the content stream draws them."""
    pages = []
    for page in PdfReader(path).pages:
        boxes: list[TextBox] = []

        def visit(text, cm, tm, font_dict, size, boxes=boxes):
            shown = text.strip()
            if not shown:
                return
            lead = len(text) - len(text.lstrip())  # a run may start with spaces
            # text space -> user space: [x y 1] . Tm . CTM
            a = tm[0] * cm[0] + tm[1] * cm[2]
            d = tm[2] * cm[1] + tm[3] * cm[3]
            x = tm[4] * cm[0] + tm[5] * cm[2] + cm[4]
            y = tm[4] * cm[1] + tm[5] * cm[3] + cm[5]
            font = font_dict.get("/BaseFont") if font_dict else None
            em_x, em_y = size * abs(a), size * abs(d)
            x0 = x + _width(text[:lead], font) / 1000 * em_x
            x1 = x0 + _width(shown, font) / 1000 * em_x
            boxes.append(TextBox(shown, x0, y - 0.21 * em_y, x1, y + 0.72 * em_y))

        page.extract_text(visitor_text=visit)
        pages.append(boxes)
    return pages


def overlapping(boxes: list[TextBox]) -> list[tuple[TextBox, TextBox]]:
    """Every pair of text boxes on one page that overlap."""
    found = []
    ordered = sorted(boxes, key=lambda b: b.x0)
    for i, a in enumerate(ordered):
        for b in ordered[i + 1 :]:
            if b.x0 >= a.x1:
                break
            if a.overlaps(b):
                found.append((a, b))
    return found
