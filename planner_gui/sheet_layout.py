"""Layout engine of the printed sheets: page geometry, measured text boxes, drawing operations.

Everything is laid out first and painted afterwards, so the page count ("page x of y")
is known before the first page is drawn and every text box can be checked.

* Coordinates are device pixels of the paint device (QPdfWriter or QPrinter), measured
  from the painter's origin (the top-left corner of the device's paintable area). Sizes
  are given in millimetres and converted with the device's resolution, so the layout is
  the same on every device up to rounding.
* Text is measured with :class:`QFontMetricsF` for the paint device. :meth:`Page.text`
  fits a text into its cell: it shrinks the font step by step (down to a minimum size)
  and, for wrapping text, breaks lines at spaces and after ``/``; it never elides.
  Each placed text is recorded as a :class:`TextBox` with its cell and its ink box
  (advance width x ascent+descent per line).
* :func:`layout_problems` lists every text box whose ink leaves its cell or the page's
  printable area, and every pair of text boxes whose ink overlaps. The tests require an
  empty list for A4 and US Letter.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field, replace

from PySide6.QtGui import QFont, QFontMetricsF, QPaintDevice

Rect = tuple[float, float, float, float]          # x, y, w, h (device pixels)

MM_PER_INCH = 25.4
PT_PER_INCH = 72.0

# Page furniture, millimetres.
MIN_MARGIN_MM = 12.0        # distance from the paper edge to the content, at least
HEADER_MM = 13.0
HEADER_GAP_MM = 4.0
FOOTER_MM = 6.0
FOOTER_GAP_MM = 3.0

# Paper sizes, portrait, millimetres (ISO 216 A4; ANSI letter 8.5 x 11 in).
PAPER_MM = {"a4": (210.0, 297.0), "letter": (215.9, 279.4)}

# Tolerance of the checks, millimetres.
CHECK_EPS_MM = 0.02

FAMILIES = ["DejaVu Sans", "Liberation Sans", "Arial", "Helvetica"]
MONO_FAMILIES = ["DejaVu Sans Mono", "Liberation Mono", "Courier New", "Courier"]

# Ink and tints (the Okabe-Ito hues come from planner_gui.style).
MIN_BODY_PT = 9.0           # smallest type of everything but the footer line
INK = "#1B1F24"
INK_SOFT = "#4A525C"
INK_FAINT = "#565E68"        # still dark: contrast 6.5:1 on white (grey prints badly)
RULE = "#AEB5BD"
PANEL = "#F1F3F5"
PANEL_DARK = "#E2E6EA"
ACCENT = "#0072B2"          # Okabe-Ito blue
CAUTION = "#D55E00"         # Okabe-Ito vermillion
CAUTION_INK = "#A33A00"     # the same hue dark enough for text (contrast 5.9:1 on white)


def tint(hex_colour: str, amount: float) -> str:
    """Mix a colour with white: amount 0 = the colour, 1 = white."""
    h = hex_colour.lstrip("#")
    r, g, b = (int(h[i:i + 2], 16) for i in (0, 2, 4))
    mix = [round(c + (255 - c) * amount) for c in (r, g, b)]
    return "#{:02X}{:02X}{:02X}".format(*mix)


# --------------------------------------------------------------------------- geometry

@dataclass(frozen=True)
class Geometry:
    """Where the content goes on a page, in device pixels of the painter."""

    dpi: float
    content: Rect            # the whole content area (header to footer)
    page_mm: tuple[float, float]

    def mm(self, v: float) -> float:
        return v * self.dpi / MM_PER_INCH

    def to_mm(self, px: float) -> float:
        return px * MM_PER_INCH / self.dpi

    @property
    def header(self) -> Rect:
        x, y, w, _ = self.content
        return (x, y, w, self.mm(HEADER_MM))

    @property
    def footer(self) -> Rect:
        x, y, w, h = self.content
        return (x, y + h - self.mm(FOOTER_MM), w, self.mm(FOOTER_MM))

    @property
    def body(self) -> Rect:
        x, y, w, h = self.content
        top = self.mm(HEADER_MM + HEADER_GAP_MM)
        bottom = self.mm(FOOTER_MM + FOOTER_GAP_MM)
        return (x, y + top, w, h - top - bottom)

    @property
    def body_mm(self) -> tuple[float, float]:
        _, _, w, h = self.body
        return self.to_mm(w), self.to_mm(h)

    @classmethod
    def for_page(cls, dpi: float, page_mm: tuple[float, float], paint_mm: Rect) -> Geometry:
        """Geometry for a page of ``page_mm`` whose paintable area is ``paint_mm``
        (x, y, w, h in mm from the paper's top-left); the painter origin is that area's
        top-left corner. The content keeps at least MIN_MARGIN_MM from every paper edge."""
        pw, ph = page_mm
        px, py, aw, ah = paint_mm
        left = max(MIN_MARGIN_MM, px)
        top = max(MIN_MARGIN_MM, py)
        right = max(MIN_MARGIN_MM, pw - (px + aw))
        bottom = max(MIN_MARGIN_MM, ph - (py + ah))
        f = dpi / MM_PER_INCH
        content = ((left - px) * f, (top - py) * f, (pw - left - right) * f, (ph - top - bottom) * f)
        return cls(dpi, content, page_mm)

    @classmethod
    def for_paper(cls, paper: str, dpi: float = 1200.0) -> Geometry:
        """Geometry of write_sheet_pdf's pages (the PDF has no margins of its own)."""
        page = PAPER_MM[paper]
        return cls.for_page(dpi, page, (0.0, 0.0, page[0], page[1]))


# --------------------------------------------------------------------------- fonts

@dataclass(frozen=True)
class FontSpec:
    size_pt: float
    bold: bool = False
    italic: bool = False
    condensed: bool = False
    mono: bool = False

    def sized(self, size_pt: float) -> FontSpec:
        return replace(self, size_pt=round(size_pt, 3))


class Typesetter:
    """Fonts and their metrics for one paint device (cached)."""

    def __init__(self, device: QPaintDevice):
        self.device = device
        self._cache: dict[FontSpec, tuple[QFont, QFontMetricsF]] = {}

    def font(self, spec: FontSpec) -> QFont:
        return self._entry(spec)[0]

    def metrics(self, spec: FontSpec) -> QFontMetricsF:
        return self._entry(spec)[1]

    def _entry(self, spec: FontSpec) -> tuple[QFont, QFontMetricsF]:
        got = self._cache.get(spec)
        if got is None:
            got = self._make(spec)
            self._cache[spec] = got
        return got

    def _make(self, spec: FontSpec) -> tuple[QFont, QFontMetricsF]:
        f = QFont()
        f.setFamilies(MONO_FAMILIES if spec.mono else FAMILIES)
        f.setPointSizeF(spec.size_pt)
        f.setBold(spec.bold)
        f.setItalic(spec.italic)
        if spec.condensed:
            f.setStretch(QFont.Stretch.Condensed)
        f.setHintingPreference(QFont.HintingPreference.PreferNoHinting)
        f.setKerning(False)
        if hasattr(QFont, "Tag"):           # Qt 6.7+: no ligatures, so "fi" is copied as typed
            f.setFeature(QFont.Tag("liga"), 0)
        return f, QFontMetricsF(f, self.device)


# --------------------------------------------------------------------------- records

@dataclass
class TextBox:
    text: str
    lines: list[str]
    spec: FontSpec                   # the size actually used
    cell: Rect
    ink: Rect
    baselines: list[tuple[float, float]]
    colour: str
    fits: bool
    role: str = ""


@dataclass
class Op:
    """One drawing operation; ``kind`` is rect, line, poly, ellipse, marker, hatch or text."""

    kind: str
    args: dict


@dataclass
class Page:
    geo: Geometry
    section: str
    ops: list[Op] = field(default_factory=list)
    boxes: list[TextBox] = field(default_factory=list)
    tags: dict = field(default_factory=dict)
    typesetter: Typesetter | None = None

    # -- shapes
    def rect(self, r: Rect, fill: str | None = None, stroke: str | None = None,
             width_mm: float = 0.2, dash: bool = False, radius_mm: float = 0.0) -> None:
        self.ops.append(Op("rect", {"rect": r, "fill": fill, "stroke": stroke,
                                    "width": self.geo.mm(width_mm), "dash": dash,
                                    "radius": self.geo.mm(radius_mm)}))

    def line(self, x1: float, y1: float, x2: float, y2: float, colour: str = INK,
             width_mm: float = 0.2, dash: bool = False) -> None:
        self.ops.append(Op("line", {"p": (x1, y1, x2, y2), "colour": colour,
                                    "width": self.geo.mm(width_mm), "dash": dash}))

    def poly(self, points: list[tuple[float, float]], colour: str = INK, width_mm: float = 0.2,
             closed: bool = False, fill: str | None = None, dash: bool = False) -> None:
        if len(points) < 2:
            return
        self.ops.append(Op("poly", {"points": points, "colour": colour,
                                    "width": self.geo.mm(width_mm), "closed": closed,
                                    "fill": fill, "dash": dash}))

    def ellipse(self, r: Rect, fill: str | None = None, stroke: str | None = INK,
                width_mm: float = 0.2, dash: bool = False) -> None:
        self.ops.append(Op("ellipse", {"rect": r, "fill": fill, "stroke": stroke,
                                       "width": self.geo.mm(width_mm), "dash": dash}))

    def marker(self, shape: str, cx: float, cy: float, size_mm: float, colour: str,
               filled: bool = True) -> None:
        self.ops.append(Op("marker", {"shape": shape, "c": (cx, cy), "r": self.geo.mm(size_mm) / 2,
                                      "colour": colour, "filled": filled,
                                      "width": self.geo.mm(0.25)}))

    def hatch(self, r: Rect, colour: str, spacing_mm: float = 0.9, width_mm: float = 0.15) -> None:
        self.ops.append(Op("hatch", {"rect": r, "colour": colour, "spacing": self.geo.mm(spacing_mm),
                                     "width": self.geo.mm(width_mm)}))

    # -- text
    def text(self, cell: Rect, text: str, spec: FontSpec, *, align: str = "left",
             valign: str = "middle", colour: str = INK, wrap: bool = False,
             min_pt: float | None = None, role: str = "", halo: str | None = None) -> TextBox:
        """Fit ``text`` into ``cell`` (see the module doc) and record it.

        ``halo``: a background colour painted under the text's ink box first (labels
        over chart lines)."""
        assert self.typesetter is not None
        box = fit_text(self.typesetter, cell, text, spec, align=align, valign=valign,
                       colour=colour, wrap=wrap, min_pt=min_pt, role=role)
        if halo is not None:
            ix, iy, iw, ih = box.ink
            g = self.geo.mm(0.25)
            self.rect((ix - g, iy, iw + 2 * g, ih), fill=halo)
        self.boxes.append(box)
        self.ops.append(Op("text", {"box": box}))
        return box

    def measure(self, text: str, spec: FontSpec) -> float:
        """Advance width of one line of text, device pixels."""
        assert self.typesetter is not None
        return self.typesetter.metrics(spec).horizontalAdvance(text)

    def line_height(self, spec: FontSpec) -> float:
        assert self.typesetter is not None
        fm = self.typesetter.metrics(spec)
        return fm.ascent() + fm.descent()


_TOKENS = re.compile(r"[^\s/]*/|[^\s/]+|\s+")


def wrap_lines(text: str, width: float, fm: QFontMetricsF) -> list[str]:
    """Greedy line breaking at spaces and after '/'; an overlong word is broken anywhere."""
    out: list[str] = []
    for para in text.split("\n"):
        line = ""
        for tok in _TOKENS.findall(para):
            if tok.isspace():
                if line:
                    line += " "
                continue
            cand = line + tok
            if fm.horizontalAdvance(cand.rstrip()) <= width or not line.strip():
                line = cand
            else:
                out.append(line.rstrip())
                line = tok
            while fm.horizontalAdvance(line.rstrip()) > width and len(line) > 1:
                cut = len(line) - 1
                while cut > 1 and fm.horizontalAdvance(line[:cut]) > width:
                    cut -= 1
                out.append(line[:cut])
                line = line[cut:]
        out.append(line.rstrip())
    return out


def fit_text(ts: Typesetter, cell: Rect, text: str, spec: FontSpec, *, align: str = "left",
             valign: str = "middle", colour: str = INK, wrap: bool = False,
             min_pt: float | None = None, role: str = "") -> TextBox:
    x, y, w, h = cell
    # Text may shrink to fit, but never below the MIN_BODY_PT readable in a moving
    # vehicle (a smaller size given on purpose, e.g. the footer, stays as it is).
    floor = min(spec.size_pt, MIN_BODY_PT)
    lowest = max(min_pt if min_pt is not None else spec.size_pt * 0.8, floor)
    if min_pt is not None and min_pt < floor:
        lowest = min_pt if spec.size_pt < MIN_BODY_PT else floor
    sizes = [spec.size_pt]
    s = spec.size_pt
    while s - 0.25 >= lowest - 1e-9:
        s -= 0.25
        sizes.append(s)
    chosen = None
    for size in sizes:
        sp = spec.sized(size)
        fm = ts.metrics(sp)
        lines = wrap_lines(text, w, fm) if wrap else text.split("\n")
        tw = max((fm.horizontalAdvance(ln) for ln in lines), default=0.0)
        th = (len(lines) - 1) * fm.lineSpacing() + fm.ascent() + fm.descent()
        chosen = (sp, fm, lines, tw, th)
        if tw <= w + 1e-6 and th <= h + 1e-6:
            break
    assert chosen is not None
    sp, fm, lines, tw, th = chosen
    fits = tw <= w + 1e-6 and th <= h + 1e-6
    if valign == "top":
        top = y
    elif valign == "bottom":
        top = y + h - th
    else:
        top = y + (h - th) / 2
    baselines = []
    for i, ln in enumerate(lines):
        lw = fm.horizontalAdvance(ln)
        if align == "right":
            lx = x + w - lw
        elif align == "center":
            lx = x + (w - lw) / 2
        else:
            lx = x
        baselines.append((lx, top + fm.ascent() + i * fm.lineSpacing()))
    if align == "right":
        ix = x + w - tw
    elif align == "center":
        ix = x + (w - tw) / 2
    else:
        ix = x
    return TextBox(text, lines, sp, cell, (ix, top, tw, th), baselines, colour, fits, role)


# --------------------------------------------------------------------------- checks

def _inside(inner: Rect, outer: Rect, eps: float) -> bool:
    ix, iy, iw, ih = inner
    ox, oy, ow, oh = outer
    return (ix >= ox - eps and iy >= oy - eps and ix + iw <= ox + ow + eps
            and iy + ih <= oy + oh + eps)


def _overlap(a: Rect, b: Rect, eps: float) -> bool:
    ax, ay, aw, ah = a
    bx, by, bw, bh = b
    return (ax + aw > bx + eps and bx + bw > ax + eps and ay + ah > by + eps
            and by + bh > ay + eps)


def page_problems(page: Page, number: int) -> list[str]:
    eps = page.geo.mm(CHECK_EPS_MM)
    out = []
    area = page.geo.content
    for b in page.boxes:
        if not b.text.strip():
            continue
        if not b.fits or not _inside(b.ink, b.cell, eps):
            out.append(f"page {number}: '{b.text[:40]}' ({b.role}) does not fit its cell")
        if not _inside(b.ink, area, eps):
            out.append(f"page {number}: '{b.text[:40]}' ({b.role}) leaves the printable area")
    boxes = sorted((b for b in page.boxes if b.text.strip()), key=lambda b: b.ink[1])
    for i, a in enumerate(boxes):
        bottom = a.ink[1] + a.ink[3]
        for b in boxes[i + 1:]:
            if b.ink[1] >= bottom - eps:
                break
            if _overlap(a.ink, b.ink, eps):
                out.append(f"page {number}: '{a.text[:30]}' ({a.role}) overlaps "
                           f"'{b.text[:30]}' ({b.role})")
    return out


def layout_problems(pages: list[Page]) -> list[str]:
    """Every text overflow and overlap of the laid-out pages (empty when clean)."""
    out: list[str] = []
    for n, page in enumerate(pages, start=1):
        out.extend(page_problems(page, n))
    return out


def nice_step(span: float, target: int) -> float:
    """A 1-2-5 step giving about ``target`` intervals over ``span``."""
    if not span > 0:
        return 1.0
    raw = span / max(target, 1)
    mag = 10 ** math.floor(math.log10(raw))
    for m in (1, 2, 2.5, 5, 10):
        if raw <= m * mag:
            return m * mag
    return 10 * mag
