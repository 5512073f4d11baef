"""Small inline-SVG charts: line charts and stacked bar charts over categories.

Our own plotting code, enough for reports: axes with rounded ticks, category labels, a
legend, and series that stay apart in greyscale print and for colour-blind readers —
each line has its own dash pattern and marker shape as well as its colour, and each
bar segment its own fill pattern. Values of ``None`` leave a gap. Output is a pure
function of the input (fixed number formatting), so reports are byte-identical.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from html import escape

__all__ = ["Series", "line_chart", "bar_chart", "nice_ticks", "STYLES"]

# (colour, dash pattern, marker) per series. Colours from a palette chosen to stay
# distinct for the common colour-vision deficiencies (Okabe and Ito, "Color Universal
# Design", 2002 — from memory), ordered so neighbours differ in lightness too.
STYLES = [
    ("#000000", "", "circle"),
    ("#0072b2", "9 4", "square"),
    ("#d55e00", "2 3", "triangle"),
    ("#009e73", "10 3 2 3", "diamond"),
    ("#cc79a7", "5 5", "cross"),
    ("#e69f00", "14 4 3 4 3 4", "ring"),
    ("#56b4e9", "1 6", "down"),
]
# Bar segments: (colour, pattern) — solid, hatched, dotted, cross-hatched, open.
_BAR_LOOK = [
    ("#1b1b1b", "solid"),
    ("#b3261e", "hatch"),
    ("#c77700", "dots"),
    ("#1f5fae", "cross"),
    ("#6b6b6b", "open"),
]
_FONT = 'font-family="system-ui,Helvetica,Arial,sans-serif"'


@dataclass(frozen=True)
class Series:
    name: str
    values: tuple[float | None, ...]


def _f(value: float) -> str:
    text = f"{value:.1f}"
    return text[:-2] if text.endswith(".0") else text


def nice_ticks(top: float, count: int = 5) -> list[float]:
    """Ticks from 0 to at least ``top`` at a step of 1, 2 or 5 times a power of ten.

    Examples
    --------
    >>> nice_ticks(37)
    [0, 10, 20, 30, 40]
    """
    if top <= 0:
        return [0, 1]
    raw = top / count
    power = 10 ** math.floor(math.log10(raw))
    step = next(m * power for m in (1, 2, 5, 10) if m * power >= raw)
    ticks, value = [], 0.0
    while value < top - 1e-9:
        ticks.append(value)
        value += step
    ticks.append(value)
    return [int(t) if float(t).is_integer() else round(t, 6) for t in ticks]


def _marker(shape: str, x: float, y: float, colour: str, r: float = 4.5) -> str:
    if shape == "circle":
        return f'<circle cx="{_f(x)}" cy="{_f(y)}" r="{_f(r)}" fill="{colour}"/>'
    if shape == "ring":
        return f'<circle cx="{_f(x)}" cy="{_f(y)}" r="{_f(r)}" fill="white" stroke="{colour}" stroke-width="2"/>'
    if shape == "square":
        return f'<rect x="{_f(x - r)}" y="{_f(y - r)}" width="{_f(2 * r)}" height="{_f(2 * r)}" fill="{colour}"/>'
    if shape == "cross":
        return (f'<path d="M{_f(x - r)} {_f(y - r)}L{_f(x + r)} {_f(y + r)}M{_f(x - r)} {_f(y + r)}'
                f'L{_f(x + r)} {_f(y - r)}" stroke="{colour}" stroke-width="2.5"/>')
    if shape == "down":
        points = f"{_f(x - r)},{_f(y - r)} {_f(x + r)},{_f(y - r)} {_f(x)},{_f(y + r)}"
    elif shape == "triangle":
        points = f"{_f(x)},{_f(y - r - 1)} {_f(x + r + 1)},{_f(y + r)} {_f(x - r - 1)},{_f(y + r)}"
    else:  # diamond
        points = f"{_f(x)},{_f(y - r - 1)} {_f(x + r + 1)},{_f(y)} {_f(x)},{_f(y + r + 1)} {_f(x - r - 1)},{_f(y)}"
    return f'<polygon points="{points}" fill="{colour}"/>'


@dataclass(frozen=True)
class _Frame:
    width: int
    height: int
    left: int = 64
    right: int = 24
    top: int = 40
    bottom: int = 40

    @property
    def plot_w(self) -> float:
        return self.width - self.left - self.right

    @property
    def plot_h(self) -> float:
        return self.height - self.top - self.bottom

    def x(self, index: int, count: int) -> float:
        return self.left + self.plot_w * (index + 0.5) / count

    def y(self, value: float, top: float) -> float:
        return self.top + self.plot_h * (1 - value / top)


_LEFT, _RIGHT = 64, 24


def _slanted(labels: list[str], width: int) -> bool:
    step = (width - _LEFT - _RIGHT) / max(len(labels), 1)
    return len(labels) > 6 or max((len(s) for s in labels), default=0) * 7 > step


def _legend_rows(width: int, names: list[str]) -> list[list[tuple[int, float]]]:
    """Legend entries (index, x) in rows that fit the chart's width."""
    rows: list[list[tuple[int, float]]] = [[]]
    x = float(_LEFT)
    for index, name in enumerate(names):
        size = 56 + 7.5 * len(name)
        if rows[-1] and x + size > width - _RIGHT:
            rows.append([])
            x = float(_LEFT)
        rows[-1].append((index, x))
        x += size
    return rows


def _frame(width: int, plot_height: int, labels: list[str], names: list[str]) -> _Frame:
    """Room above the plot for the title and legend, below it for the category labels
    (more when they are slanted)."""
    top = 40 + 20 * len(_legend_rows(width, names))
    longest = max((len(s) for s in labels), default=0)
    bottom = 52 + (int(longest * 3.2) if _slanted(labels, width) else 0)
    return _Frame(width, top + plot_height + bottom, _LEFT, _RIGHT, top, bottom)


def _axes(frame: _Frame, labels: list[str], ticks: list[float], y_label: str, title: str,
          notes: dict[int, str]) -> list[str]:
    top, n = ticks[-1], len(labels)
    parts = [f'<text x="{frame.left}" y="22" font-size="15" font-weight="600" {_FONT}>{escape(title)}</text>']
    step = frame.plot_w / max(n, 1)
    for index, note in sorted(notes.items()):  # a revision without data: a shaded column
        x0 = frame.left + step * index
        parts.append(f'<rect x="{_f(x0)}" y="{frame.top}" width="{_f(step)}" height="{_f(frame.plot_h)}" '
                     'fill="#eeeeee" stroke="#bbbbbb" stroke-dasharray="3 3"/>')
        parts.append(f'<text x="{_f(x0 + step / 2)}" y="{_f(frame.top + 14)}" font-size="11" text-anchor="middle" '
                     f'fill="#444" {_FONT}>{escape(note)}</text>')
    for tick in ticks:
        y = frame.y(tick, top)
        parts.append(f'<line x1="{frame.left}" y1="{_f(y)}" x2="{_f(frame.left + frame.plot_w)}" y2="{_f(y)}" '
                     'stroke="#d9d9d9" stroke-width="1"/>')
        parts.append(f'<text x="{frame.left - 8}" y="{_f(y + 4)}" font-size="11" text-anchor="end" {_FONT}>'
                     f"{_f(tick)}</text>")
    bottom = frame.top + frame.plot_h
    parts.append(f'<path d="M{frame.left} {frame.top}V{_f(bottom)}H{_f(frame.left + frame.plot_w)}" '
                 'fill="none" stroke="#1a1a1a" stroke-width="1.2"/>')
    slant = _slanted(labels, frame.width)
    for index, text in enumerate(labels):
        x = frame.x(index, n)
        parts.append(f'<line x1="{_f(x)}" y1="{_f(bottom)}" x2="{_f(x)}" y2="{_f(bottom + 5)}" stroke="#1a1a1a"/>')
        if slant:
            parts.append(f'<text transform="translate({_f(x + 4)} {_f(bottom + 16)}) rotate(-30)" font-size="11" '
                         f'text-anchor="end" {_FONT}>{escape(text)}</text>')
        else:
            parts.append(f'<text x="{_f(x)}" y="{_f(bottom + 18)}" font-size="11" text-anchor="middle" {_FONT}>'
                         f"{escape(text)}</text>")
    parts.append(f'<text x="{_f(frame.left + frame.plot_w / 2)}" y="{frame.height - 10}" font-size="12" '
                 f'text-anchor="middle" {_FONT}>revision (oldest first)</text>')
    mid = frame.top + frame.plot_h / 2
    parts.append(f'<text transform="translate(16 {_f(mid)}) rotate(-90)" font-size="12" text-anchor="middle" '
                 f"{_FONT}>{escape(y_label)}</text>")
    return parts


def _legend(frame: _Frame, entries: list[tuple[str, str]]) -> list[str]:
    """``entries``: (SVG swatch drawn around 0,0; name), in rows between title and plot."""
    parts = []
    for number, row in enumerate(_legend_rows(frame.width, [name for _, name in entries])):
        y = 44 + 20 * number
        for index, x in row:
            swatch, name = entries[index]
            parts.append(f'<g transform="translate({_f(x)} {_f(y)})">{swatch}'
                         f'<text x="40" y="4" font-size="12" {_FONT}>{escape(name)}</text></g>')
    return parts


def _svg(frame: _Frame, title: str, body: list[str], defs: str = "") -> str:
    return (f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {frame.width} {frame.height}" '
            f'width="{frame.width}" height="{frame.height}" role="img" aria-label="{escape(title)}">'
            f"{defs}<rect width=\"100%\" height=\"100%\" fill=\"white\"/>" + "".join(body) + "</svg>")


def line_chart(title: str, labels: list[str], series: list[Series], *, y_label: str,
               y_top: float | None = None, notes: dict[int, str] | None = None,
               width: int = 920, height: int = 260) -> str:
    """Lines over categories; ``y_top`` fixes the axis (100 for percentages)."""
    values = [v for s in series for v in s.values if v is not None]
    ticks = nice_ticks(y_top if y_top is not None else max(values, default=0))
    frame = _frame(width, height, labels, [item.name for item in series])
    body = _axes(frame, labels, ticks, y_label, title, notes or {})
    n = len(labels)
    legend = []
    for number, item in enumerate(series):
        colour, dash, shape = STYLES[number % len(STYLES)]
        dashed = f' stroke-dasharray="{dash}"' if dash else ""
        points = [(frame.x(i, n), frame.y(v, ticks[-1])) for i, v in enumerate(item.values) if v is not None]
        runs, run = [], []
        for i, v in enumerate(item.values):
            if v is None:
                runs, run = runs + [run] if run else runs, []
            else:
                run.append((frame.x(i, n), frame.y(v, ticks[-1])))
        runs = runs + [run] if run else runs
        group = [f'<g><title>{escape(item.name)}</title>']
        for segment in runs:
            if len(segment) > 1:
                d = "M" + "L".join(f"{_f(x)} {_f(y)}" for x, y in segment)
                group.append(f'<path d="{d}" fill="none" stroke="{colour}" stroke-width="2.2"{dashed}/>')
        group += [_marker(shape, x, y, colour) for x, y in points]
        body.append("".join(group) + "</g>")
        legend.append((f'<line x1="0" y1="0" x2="32" y2="0" stroke="{colour}" stroke-width="2.2"{dashed}/>'
                       + _marker(shape, 16, 0, colour), item.name))
    body += _legend(frame, legend)
    return _svg(frame, title, body)


def _patterns(prefix: str) -> str:
    defs = []
    for colour, kind in _BAR_LOOK:
        pid = f"{prefix}-{kind}"
        if kind == "hatch":
            inner = f'<path d="M0 6L6 0M-1 1L1 -1M5 7L7 5" stroke="{colour}" stroke-width="1.6"/>'
        elif kind == "dots":
            inner = f'<circle cx="3" cy="3" r="1.4" fill="{colour}"/>'
        elif kind == "cross":
            inner = f'<path d="M0 3H6M3 0V6" stroke="{colour}" stroke-width="1.3"/>'
        else:
            continue
        defs.append(f'<pattern id="{pid}" width="6" height="6" patternUnits="userSpaceOnUse">'
                    f'<rect width="6" height="6" fill="white"/>{inner}</pattern>')
    return "<defs>" + "".join(defs) + "</defs>"


def _bar_fill(index: int, prefix: str) -> tuple[str, str]:
    colour, kind = _BAR_LOOK[index % len(_BAR_LOOK)]
    if kind == "solid":
        return colour, colour
    if kind == "open":
        return "white", colour
    return f"url(#{prefix}-{kind})", colour


def bar_chart(title: str, labels: list[str], series: list[Series], *, y_label: str, ident: str,
              notes: dict[int, str] | None = None, width: int = 920, height: int = 260) -> str:
    """Stacked bars over categories, one segment per series; ``ident`` keeps the
    pattern ids of several charts on one page apart."""
    n = len(labels)
    totals = [sum(s.values[i] or 0 for s in series) for i in range(n)]
    ticks = nice_ticks(max(totals, default=0))
    frame = _frame(width, height, labels, [item.name for item in series])
    body = _axes(frame, labels, ticks, y_label, title, notes or {})
    bar_w = min(48.0, frame.plot_w / max(n, 1) * 0.55)
    for i in range(n):
        base = 0.0
        for number, item in enumerate(series):
            value = item.values[i]
            if not value:
                continue
            fill, stroke = _bar_fill(number, ident)
            y_top, y_bottom = frame.y(base + value, ticks[-1]), frame.y(base, ticks[-1])
            body.append(f'<rect x="{_f(frame.x(i, n) - bar_w / 2)}" y="{_f(y_top)}" width="{_f(bar_w)}" '
                        f'height="{_f(y_bottom - y_top)}" fill="{fill}" stroke="{stroke}" stroke-width="1">'
                        f"<title>{escape(labels[i])}: {escape(item.name)} {_f(value)}</title></rect>")
            base += value
        if totals[i]:
            body.append(f'<text x="{_f(frame.x(i, n))}" y="{_f(frame.y(totals[i], ticks[-1]) - 5)}" font-size="11" '
                        f'text-anchor="middle" {_FONT}>{_f(totals[i])}</text>')
    legend = []
    for number, item in enumerate(series):
        fill, stroke = _bar_fill(number, ident)
        legend.append((f'<rect x="4" y="-7" width="26" height="14" fill="{fill}" stroke="{stroke}"/>', item.name))
    body += _legend(frame, legend)
    return _svg(frame, title, body, _patterns(ident))
