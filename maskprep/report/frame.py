"""The frame every SVG chart is drawn in: title, legend, y axis with round ticks, x labels.

`Frame` lays out a chart (title lines, legend rows, room for turned or
clipped x labels) and opens its SVG; the helpers measure text, clip it with
an ellipsis (full text in a tooltip), choose round ticks and label numbers.
All text goes through `maskprep.report.html.esc`. The chart kinds are in
`maskprep.report.charts`.
"""

from __future__ import annotations

import math
import unicodedata
from collections.abc import Mapping, Sequence
from typing import cast

from .._checks import is_real
from .html import esc
from .style import bar_paint, dash, marker, series_colour

__all__ = ["Frame", "WIDTH", "PLOT_H", "PAD", "text_width", "clip", "svg_text", "series_columns",
           "nice_ticks", "tick_labels", "short_value", "exact_value", "empty_chart"]

WIDTH = 760.0
PLOT_H = 260.0
PAD = 12.0
_ROT = math.radians(40)


def char_width(ch: str, size: float) -> float:
    """Estimated advance of one character: wide East Asian 1 em, combining 0, others 0.6 em."""
    return (
        0.0
        if unicodedata.combining(ch)
        else size * (1.0 if unicodedata.east_asian_width(ch) in "WF" else 0.6)
    )


def text_width(text: str, size: float) -> float:
    return sum(char_width(ch, size) for ch in text)


def clip(text: str, size: float, max_w: float) -> str:
    """Shorten ``text`` with an ellipsis so that it fits ``max_w`` pixels."""
    if text_width(text, size) <= max_w:
        return text
    used, end = char_width("\u2026", size), 0
    while end < len(text) and (used := used + char_width(text[end], size)) <= max_w:
        end += 1
    return text[:end] + "\u2026"


def svg_text(text: str, *, x: float, y: float, size: float, max_w: float,
              anchor: str = "start", extra: str = "") -> str:
    shown = clip(text, size, max_w)
    tip = f"<title>{esc(text)}</title>" if shown != text else ""
    return (f'<text x="{x:.1f}" y="{y:.1f}" font-size="{size:g}" text-anchor="{anchor}"{extra}>'
            f"{tip}{esc(shown)}</text>")


def series_columns(
    series: Mapping[str, Sequence[object]], count: int, what: str
) -> list[list[float | None]]:
    """Each series as floats, None for a gap (None, NaN, infinities); checks lengths and types."""
    rows = []
    for name, values in series.items():
        if len(values) != count:
            raise ValueError(f"series {name!r} has {len(values)} values for {count} {what}")
        if any(v is not None and not is_real(v) for v in values):
            raise ValueError(f"series {name!r}: values must be numbers or None")
        numbers = cast("Sequence[float | None]", values)  # checked by is_real just above
        rows.append([None if v is None or not math.isfinite(v) else float(v) for v in numbers])
    return rows


def nice_ticks(lo: float, hi: float, *, target: int = 5) -> list[float]:
    """Round tick values covering [lo, hi], steps of 1, 2, 2.5 or 5 x 10^k."""
    lo, hi = min(lo, hi), max(lo, hi)
    if hi == lo:
        spread = abs(hi) * 0.1 or 1.0
        lo, hi = lo - spread, hi + spread
    raw = (hi - lo) / target
    mag = 10.0 ** math.floor(math.log10(raw))
    step = next(m * mag for m in (1, 2, 2.5, 5, 10) if m * mag >= raw * (1 - 1e-9))
    start = math.floor(lo / step + 1e-9) * step
    count = round((math.ceil(hi / step - 1e-9) * step - start) / step)
    digits = max(0, -math.floor(math.log10(step))) + 3
    return [round(start + i * step, digits) + 0.0 for i in range(count + 1)]


def _decimals(value: float) -> int:
    return next((d for d in range(16) if abs(round(value, d) - value) <= 1e-6 * abs(value)), 16)


def tick_labels(ticks: Sequence[float], *, percent: bool) -> list[str]:
    """Labels for evenly spaced ticks: one number of decimals, as %, or with M/B/T."""
    top = max(abs(t) for t in ticks)
    big = next(
        ((1.0 / div, name) for div, name in ((1e12, "T"), (1e9, "B"), (1e6, "M")) if top >= div),
        (1.0, ""),
    )
    scale, suffix = (100.0, "%") if percent else big
    dec = _decimals((ticks[1] - ticks[0]) * scale if len(ticks) > 1 else 1.0)
    return [
        "0" if t == 0 and suffix not in ("", "%") else f"{t * scale + 0.0:,.{dec}f}{suffix}"
        for t in ticks
    ]


def short_value(value: float, *, percent: bool) -> str:
    """A compact value label: ``1.23``, ``15.0%``, ``12,345``, ``3.4M``."""
    size = abs(value)
    big = next(
        (
            f"{value / div:.3g}{name}"
            for div, name in ((1e12, "T"), (1e9, "B"), (1e6, "M"))
            if size >= div
        ),
        "",
    )
    if percent or big:
        return f"{value * 100:.1f}%" if percent else big
    if value.is_integer():
        return f"{int(value):,}"
    return f"{value:,.0f}" if size >= 1000 else f"{value:.3g}" if size < 1 else f"{value:.2f}"


def exact_value(value: float, *, percent: bool = False) -> str:
    text = f"{int(value):,}" if value.is_integer() and abs(value) < 1e15 else f"{value:.12g}"
    return f"{text} ({value * 100:.2f}%)" if percent else text


def _wrap(text: str, size: float, max_w: float, lines: int) -> list[str]:
    """``text`` broken at spaces into at most ``lines`` lines that fit ``max_w`` (last clipped)."""
    out: list[str] = []
    words = text.split(" ")
    while words and len(out) < lines - 1:
        end = 1
        while end < len(words) and text_width(" ".join(words[:end + 1]), size) <= max_w:
            end += 1
        if end == len(words) and text_width(" ".join(words), size) <= max_w:
            break
        out.append(" ".join(words[:end]))
        words = words[end:]
    return out + [" ".join(words)] if words else out


class Frame:
    """Layout and axes shared by every chart: title, legend, y ticks, x labels."""

    def __init__(self, *, title: str, names: Sequence[str], slots: Sequence[int],
                 x_labels: Sequence[str], y_label: str, x_label: str, ticks: Sequence[float],
                 domain: tuple[float, float],
                 percent: bool, swatch: str, width: float, plot_h: float, legend: bool = True,
                 top_extra: float = 0.0, bottom_extra: float = 0.0) -> None:
        self.title, self.names, self.slots, self.swatch = title, list(names), list(slots), swatch
        self.width, self.plot_h = width, plot_h
        self.y_label, self.x_label, self.ticks, self.domain = y_label, x_label, list(ticks), domain
        self.tick_text = tick_labels(self.ticks, percent=percent)
        self.title_lines = _wrap(title, 15, width - 2 * PAD, 3)
        self.legend: list[tuple[float, float, int]] = []
        x, row_y = PAD, PAD + 19 * len(self.title_lines) + 19
        name_w = min(260.0, width - 2 * PAD - 30)
        for k, name in enumerate(self.names if legend else []):
            item_w = 30 + text_width(clip(name, 12, name_w), 12)
            if x + item_w > width - PAD and x > PAD:
                x, row_y = PAD, row_y + 18
            self.legend.append((x, row_y, k))
            x += item_w + 18
        self.name_w = name_w
        self.top = (row_y + 24 if self.legend else row_y + 17) + top_extra
        self.x_text = list(x_labels)
        widths = [text_width(clip(t, 11, 170), 11) for t in self.x_text] or [0.0]
        tick_w = max(text_width(t, 11) for t in self.tick_text)
        self.left = PAD + (20 if y_label else 0) + tick_w + 8
        self.rotate = False
        for _ in range(2):
            self.plot_w = width - self.left - PAD - 10
            self.slot = self.plot_w / max(len(widths), 1)
            self.rotate = self.rotate or max(widths) > self.slot - 6
            if self.rotate:
                need = max(w * math.cos(_ROT) - (i + 0.5) * self.slot for i, w in enumerate(widths))
                self.left = max(self.left, PAD + need)
        self.bottom = self.top + plot_h
        self.label_y = self.bottom + bottom_extra + 16
        room = max(widths) * math.sin(_ROT) + 14 if self.rotate else 12
        self.height = math.ceil(self.label_y + room + (24 if x_label else 0) + PAD)

    def y(self, value: float) -> float:
        lo, hi = self.domain
        return self.bottom - (value - lo) / (hi - lo) * self.plot_h

    def xc(self, index: int) -> float:
        return self.left + (index + 0.5) * self.slot

    def open(self) -> list[str]:
        listed = ", ".join(self.names)
        out = [f'<svg class="chart" role="img" width="{self.width:g}" height="{self.height}" '
               f'viewBox="0 0 {self.width:g} {self.height}" fill="currentColor" '
               'font-family="system-ui, -apple-system, Segoe UI, Helvetica, Arial, sans-serif">',
               f"<title>{esc(self.title)}</title>",
               f"<desc>{esc(f'Series: {listed}.' if listed else 'No series.')}</desc>"]
        for i, line in enumerate(self.title_lines):
            out.append(svg_text(line, x=PAD, y=PAD + 16 + 19 * i, size=15,
                                 max_w=self.width - 2 * PAD, extra=' font-weight="600"'))
        for x, y, k in self.legend:
            slot = self.slots[k]
            if self.swatch == "line":
                out.append(
                    f'<line x1="{x:.1f}" y1="{y - 4:.1f}" x2="{x + 24:.1f}" y2="{y - 4:.1f}" '
                    f'stroke="{series_colour(slot)}" stroke-width="2"{dash(slot)}/>'
                    + marker(slot, x + 12, y - 4)
                )
            else:
                out.append(f'<rect x="{x + 6:.1f}" y="{y - 10:.1f}" width="12" height="12" '
                           f'{bar_paint(slot)}/>')
            out.append(svg_text(self.names[k], x=x + 30, y=y, size=12, max_w=self.name_w))
        for tick, text in zip(self.ticks, self.tick_text):
            yy, strong = self.y(tick), tick == 0 or tick == self.ticks[0]
            out.append(
                f'<line x1="{self.left:.1f}" y1="{yy:.1f}" x2="{self.left + self.plot_w:.1f}" '
                f'y2="{yy:.1f}" stroke="currentColor" stroke-opacity="{0.5 if strong else 0.15}"/>'
            )
            out.append(f'<text x="{self.left - 6:.1f}" y="{yy + 4:.1f}" font-size="11" '
                       f'text-anchor="end">{esc(text)}</text>')
        if self.y_label:
            cy = self.top + self.plot_h / 2
            out.append(
                svg_text(
                    self.y_label,
                    x=PAD + 10,
                    y=cy,
                    size=12,
                    max_w=self.plot_h,
                    anchor="middle",
                    extra=f' transform="rotate(-90 {PAD + 10:.1f} {cy:.1f})"',
                )
            )
        # thin out labels closer than a line apart
        every = math.ceil(15 / self.slot) if self.rotate else 1
        for i, text in enumerate(self.x_text[::every]):
            x = self.xc(i * every)
            turn = f' transform="rotate(-40 {x:.1f} {self.label_y:.1f})"' if self.rotate else ""
            out.append(svg_text(text, x=x, y=self.label_y, size=11, max_w=170,
                                 anchor="end" if self.rotate else "middle", extra=turn))
        if self.x_label:
            out.append(
                svg_text(
                    self.x_label,
                    x=self.left + self.plot_w / 2,
                    y=self.height - PAD - 4,
                    size=12,
                    max_w=self.plot_w,
                    anchor="middle",
                )
            )
        return out


def empty_chart(title: str, width: float = WIDTH) -> str:
    return (f'<svg class="chart" role="img" width="{width:g}" height="90" '
            f'viewBox="0 0 {width:g} 90" fill="currentColor" font-family="system-ui, sans-serif">'
            f'<title>{esc(title)}</title>'
            + svg_text(title, x=PAD, y=PAD + 16, size=15, max_w=width - 2 * PAD,
                        extra=' font-weight="600"')
            + f'<text x="{width / 2:g}" y="64" font-size="13" text-anchor="middle">no data</text>'
            '</svg>')
