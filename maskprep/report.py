"""Self-contained HTML reports with inline SVG charts.

What it does: renders line charts, grouped bar charts, histograms, tables and
token sequences with masked units highlighted as markup strings, and assembles
them into one HTML5 page with inline CSS that reads well on screen, in dark mode
and on paper. All text that could come from a corpus or a user is escaped
(characters XML forbids become U+FFFD, so charts parse as XML). Same inputs,
same bytes.

What it does not do: compute statistics (that is `stats.py`), load anything
from anywhere, or run scripts (tooltips are SVG ``<title>`` and HTML ``title``).
Section bodies given to `page` are trusted markup built with this module.
"""

from __future__ import annotations

import html as _html
import math
import numbers
import os
import re
import tempfile
import unicodedata
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path

from maskprep.errors import MaskprepError

#: Series colours: the Okabe-Ito set, safe for the common colour-vision
#: deficiencies. Slot 7 is the text colour (black on light pages, light on dark
#: ones); yellow comes last because it is faint on white. Lines also differ by
#: marker shape and dash pattern, so they stay apart in greyscale print.
PALETTE: tuple[str, ...] = ("#0072B2", "#D55E00", "#009E73", "#CC79A7",
                            "#E69F00", "#56B4E9", "currentColor", "#F0E442")
_DASHES = ("", "7 4", "2 3", "9 3 2 3")
_WIDTH = 760.0
_PLOT_H = 260.0
_PAD = 12.0
_ROT = math.radians(40)
_XML_BAD = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ud800-\udfff\ufffe\uffff]")
_SHOWN = str.maketrans({"\n": "\u21b5", "\r": "\u240d", "\t": "\u21e5"})
Format = str | Callable[[float], str]


def _esc(value: object) -> str:
    return _html.escape(_XML_BAD.sub("\ufffd", str(value)), quote=True)


def _char_w(ch: str, size: float) -> float:
    """Estimated advance of one character: wide East Asian 1 em, combining 0, others 0.6 em."""
    return 0.0 if unicodedata.combining(ch) else size * (1.0 if unicodedata.east_asian_width(ch) in "WF" else 0.6)


def _text_w(text: str, size: float) -> float:
    return sum(_char_w(ch, size) for ch in text)


def _clip(text: str, size: float, max_w: float) -> str:
    """Shorten ``text`` with an ellipsis so that it fits ``max_w`` pixels."""
    if _text_w(text, size) <= max_w:
        return text
    used, end = _char_w("\u2026", size), 0
    while end < len(text) and (used := used + _char_w(text[end], size)) <= max_w:
        end += 1
    return text[:end] + "\u2026"


def _svg_text(text: str, *, x: float, y: float, size: float, max_w: float,
              anchor: str = "start", extra: str = "") -> str:
    shown = _clip(text, size, max_w)
    tip = f"<title>{_esc(text)}</title>" if shown != text else ""
    return (f'<text x="{x:.1f}" y="{y:.1f}" font-size="{size:g}" text-anchor="{anchor}"{extra}>'
            f"{tip}{_esc(shown)}</text>")


def _columns(series: Mapping[str, Sequence[object]], count: int, what: str) -> list[list[float | None]]:
    """Each series as floats, None for a gap (None, NaN, infinities); checks lengths and types."""
    rows = []
    for name, values in series.items():
        if len(values) != count:
            raise ValueError(f"series {name!r} has {len(values)} values for {count} {what}")
        if any(v is not None and (isinstance(v, bool) or not isinstance(v, numbers.Real)) for v in values):
            raise ValueError(f"series {name!r}: values must be numbers or None")
        rows.append([None if v is None or not math.isfinite(v) else float(v) for v in values])  # type: ignore[arg-type]
    return rows


def _nice_ticks(lo: float, hi: float, *, target: int = 5) -> list[float]:
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


def _tick_labels(ticks: Sequence[float], *, percent: bool) -> list[str]:
    """Labels for evenly spaced ticks: one number of decimals, as %, or with M/B/T."""
    top = max(abs(t) for t in ticks)
    big = next(((1.0 / div, name) for div, name in ((1e12, "T"), (1e9, "B"), (1e6, "M")) if top >= div), (1.0, ""))
    scale, suffix = (100.0, "%") if percent else big
    dec = _decimals((ticks[1] - ticks[0]) * scale if len(ticks) > 1 else 1.0)
    return ["0" if t == 0 and suffix not in ("", "%") else f"{t * scale + 0.0:,.{dec}f}{suffix}" for t in ticks]


def _short(value: float, *, percent: bool) -> str:
    """A compact value label: ``1.23``, ``15.0%``, ``12,345``, ``3.4M``."""
    size = abs(value)
    big = next((f"{value / div:.3g}{name}" for div, name in ((1e12, "T"), (1e9, "B"), (1e6, "M")) if size >= div), "")
    if percent or big:
        return f"{value * 100:.1f}%" if percent else big
    if value.is_integer():
        return f"{int(value):,}"
    return f"{value:,.0f}" if size >= 1000 else f"{value:.3g}" if size < 1 else f"{value:.2f}"


def _exact(value: float, *, percent: bool = False) -> str:
    text = f"{int(value):,}" if value.is_integer() and abs(value) < 1e15 else f"{value:.12g}"
    return f"{text} ({value * 100:.2f}%)" if percent else text


def _marker(k: int, x: float, y: float) -> str:
    """Marker of series ``k``: four shapes, filled for k < 4, hollow after."""
    colour, s = PALETTE[k % 8], 4.5
    paint = f'fill="{colour}"' if k % 8 < 4 else f'fill="none" stroke="{colour}" stroke-width="1.8"'
    if (shape := k % 4) == 0:
        return f'<circle cx="{x:.1f}" cy="{y:.1f}" r="{s}" {paint}/>'
    if shape == 1:
        return f'<rect x="{x - s + .5:.1f}" y="{y - s + .5:.1f}" width="{2 * s - 1:g}" height="{2 * s - 1:g}" {paint}/>'
    if shape == 2:
        pts = [(x, y - s * 1.2), (x + s * 1.15, y + s * 0.85), (x - s * 1.15, y + s * 0.85)]
    else:
        pts = [(x, y - s * 1.3), (x + s * 1.1, y), (x, y + s * 1.3), (x - s * 1.1, y)]
    return '<polygon points="' + " ".join(f"{a:.1f},{b:.1f}" for a, b in pts) + f'" {paint}/>'


def _dash(k: int) -> str:
    pattern = _DASHES[(k + k // 8) % 4]
    return f' stroke-dasharray="{pattern}"' if pattern else ""


class _Frame:
    """Layout and axes shared by every chart: title, legend, y ticks, x labels."""

    def __init__(self, *, title: str, names: Sequence[str], x_labels: Sequence[str],
                 y_label: str, x_label: str, ticks: Sequence[float], domain: tuple[float, float],
                 percent: bool, swatch: str, top_extra: float = 0.0, bottom_extra: float = 0.0) -> None:
        self.title, self.names, self.swatch = title, list(names), swatch
        self.y_label, self.x_label, self.ticks, self.domain = y_label, x_label, list(ticks), domain
        self.tick_text = _tick_labels(self.ticks, percent=percent)
        self.legend: list[tuple[float, float, int]] = []
        x, row_y = _PAD, _PAD + 38
        for k, name in enumerate(self.names):
            width = 30 + _text_w(_clip(name, 12, 260), 12)
            if x + width > _WIDTH - _PAD and x > _PAD:
                x, row_y = _PAD, row_y + 18
            self.legend.append((x, row_y, k))
            x += width + 18
        self.top = (row_y + 24 if self.names else _PAD + 36) + top_extra
        self.x_text = list(x_labels)
        widths = [_text_w(_clip(t, 11, 170), 11) for t in self.x_text] or [0.0]
        self.left = _PAD + (20 if y_label else 0) + max(_text_w(t, 11) for t in self.tick_text) + 8
        self.rotate = False
        for _ in range(2):
            self.plot_w = _WIDTH - self.left - _PAD - 10
            self.slot = self.plot_w / max(len(widths), 1)
            self.rotate = self.rotate or max(widths) > self.slot - 6
            if self.rotate:
                need = max(w * math.cos(_ROT) - (i + 0.5) * self.slot for i, w in enumerate(widths))
                self.left = max(self.left, _PAD + need)
        self.bottom = self.top + _PLOT_H
        self.label_y = self.bottom + bottom_extra + 16
        room = max(widths) * math.sin(_ROT) + 14 if self.rotate else 12
        self.height = math.ceil(self.label_y + room + (24 if x_label else 0) + _PAD)

    def y(self, value: float) -> float:
        lo, hi = self.domain
        return self.bottom - (value - lo) / (hi - lo) * _PLOT_H

    def xc(self, index: int) -> float:
        return self.left + (index + 0.5) * self.slot

    def open(self) -> list[str]:
        listed = ", ".join(self.names)
        out = [f'<svg class="chart" role="img" width="{_WIDTH:g}" height="{self.height}" '
               f'viewBox="0 0 {_WIDTH:g} {self.height}" fill="currentColor" '
               'font-family="system-ui, -apple-system, Segoe UI, Helvetica, Arial, sans-serif">',
               f"<title>{_esc(self.title)}</title>",
               f"<desc>{_esc(f'Series: {listed}.' if listed else 'No series.')}</desc>",
               _svg_text(self.title, x=_PAD, y=_PAD + 16, size=15, max_w=_WIDTH - 2 * _PAD,
                         extra=' font-weight="600"')]
        for x, y, k in self.legend:
            colour = PALETTE[k % 8]
            if self.swatch == "line":
                out.append(f'<line x1="{x:.1f}" y1="{y - 4:.1f}" x2="{x + 24:.1f}" y2="{y - 4:.1f}" '
                           f'stroke="{colour}" stroke-width="2"{_dash(k)}/>' + _marker(k, x + 12, y - 4))
            else:
                out.append(f'<rect x="{x + 6:.1f}" y="{y - 10:.1f}" width="12" height="12" fill="{colour}" '
                           'stroke="currentColor" stroke-opacity="0.4" stroke-width="0.6"/>')
            out.append(_svg_text(self.names[k], x=x + 30, y=y, size=12, max_w=260))
        for tick, text in zip(self.ticks, self.tick_text):
            yy, strong = self.y(tick), tick == 0 or tick == self.ticks[0]
            out.append(f'<line x1="{self.left:.1f}" y1="{yy:.1f}" x2="{self.left + self.plot_w:.1f}" '
                       f'y2="{yy:.1f}" stroke="currentColor" stroke-opacity="{0.5 if strong else 0.15}"/>')
            out.append(f'<text x="{self.left - 6:.1f}" y="{yy + 4:.1f}" font-size="11" '
                       f'text-anchor="end">{_esc(text)}</text>')
        if self.y_label:
            cy = self.top + _PLOT_H / 2
            out.append(_svg_text(self.y_label, x=_PAD + 10, y=cy, size=12, max_w=_PLOT_H,
                                 anchor="middle", extra=f' transform="rotate(-90 {_PAD + 10:.1f} {cy:.1f})"'))
        every = math.ceil(15 / self.slot) if self.rotate else 1  # thin out labels closer than a line apart
        for i, text in enumerate(self.x_text[::every]):
            x = self.xc(i * every)
            turn = f' transform="rotate(-40 {x:.1f} {self.label_y:.1f})"' if self.rotate else ""
            out.append(_svg_text(text, x=x, y=self.label_y, size=11, max_w=170,
                                 anchor="end" if self.rotate else "middle", extra=turn))
        if self.x_label:
            out.append(_svg_text(self.x_label, x=self.left + self.plot_w / 2, y=self.height - _PAD - 4,
                                 size=12, max_w=self.plot_w, anchor="middle"))
        return out


def _empty_chart(title: str) -> str:
    return (f'<svg class="chart" role="img" width="{_WIDTH:g}" height="90" viewBox="0 0 {_WIDTH:g} 90" '
            f'fill="currentColor" font-family="system-ui, sans-serif"><title>{_esc(title)}</title>'
            + _svg_text(title, x=_PAD, y=_PAD + 16, size=15, max_w=_WIDTH - 2 * _PAD, extra=' font-weight="600"')
            + f'<text x="{_WIDTH / 2:g}" y="64" font-size="13" text-anchor="middle">no data</text></svg>')


def line_chart(*, title: str, x_labels: Sequence[str], series: Mapping[str, Sequence[float | None]],
               y_label: str, y_min: float | None = None, x_label: str = "") -> str:
    """Inline SVG with one line and markers per series; None/NaN values leave a gap.

    ``y_min`` fixes the bottom of the axis (it is lowered if data go below it);
    by default the axis spans the data with round ticks.

    >>> line_chart(title="Tokens per word", x_labels=["top 1k", "rarer"], series={"wp-8k": [1.0, 2.4]}, y_label="tokens")[:4]
    '<svg'
    """
    rows = _columns(series, len(x_labels), "x labels")
    present = [v for row in rows for v in row if v is not None]
    if not present:
        return _empty_chart(title)
    lo = min(present) if y_min is None else min(min(present), float(y_min))
    ticks = _nice_ticks(lo, max(present))
    bottom = ticks[0] if y_min is None else lo
    ticks = [t for t in ticks if t >= bottom - 1e-12 * max(1.0, abs(bottom))]  # ticks[-1] >= max > bottom
    frame = _Frame(title=title, names=list(series), x_labels=x_labels, y_label=y_label, x_label=x_label,
                   ticks=ticks, domain=(bottom, ticks[-1]), percent=False, swatch="line")
    out = frame.open()
    for k, (name, row) in enumerate(zip(series, rows)):
        path, pen_down, points = [], False, []
        for i, value in enumerate(row):
            if value is None:
                pen_down = False
                continue
            x, y = frame.xc(i), frame.y(value)
            path.append(f"{'L' if pen_down else 'M'}{x:.1f} {y:.1f}")
            pen_down = True
            tip = _esc(f"{name} \u2014 {x_labels[i]}: {_exact(value)}")
            points.append(f'<g class="point"><title>{tip}</title>{_marker(k, x, y)}'
                          f'<circle cx="{x:.1f}" cy="{y:.1f}" r="9" fill="#000" fill-opacity="0"/></g>')
        out.append(f'<g class="series" data-series="{_esc(name)}">'
                   f'<path class="line" d="{" ".join(path)}" fill="none" stroke="{PALETTE[k % 8]}" '
                   f'stroke-width="2.2" stroke-linejoin="round"{_dash(k)}/>' + "".join(points) + "</g>")
    out.append("</svg>")
    return "\n".join(out)


def _bars(*, title: str, categories: Sequence[str], series: Mapping[str, Sequence[float | None]],
          y_label: str, x_label: str, percent: bool, fill: float, turn_labels: bool,
          name_bars: bool = False) -> str:
    rows = _columns(series, len(categories), "categories")
    present = [v for row in rows for v in row if v is not None]
    if not present:
        return _empty_chart(title)
    lo, hi = min(0.0, *present), max(0.0, *present)
    ticks = _nice_ticks(lo, hi if hi > lo else 1.0)
    x_labels = [""] * len(categories) if name_bars else categories
    args = dict(title=title, names=list(series), x_labels=x_labels, y_label=y_label, x_label=x_label,
                ticks=ticks, domain=(ticks[0], ticks[-1]), percent=percent, swatch="bar")
    frame = _Frame(**args)  # type: ignore[arg-type]
    width = frame.slot * fill / max(len(rows), 1)
    labels = [[None if v is None else _short(v, percent=percent) for v in row] for row in rows]
    widest = max((_text_w(t, 10) for row in labels for t in row if t), default=0.0)
    mode = "flat" if widest <= width - 6 else "up" if width >= 10 and turn_labels else "none"
    above, below, span = 0.0, 0.0, ticks[-1] - ticks[0]  # label room needed beyond the plot edges
    for value, text in ((v, t) for row, texts in zip(rows, labels) for v, t in zip(row, texts) if v is not None):
        extent = {"flat": 14.0, "up": _text_w(text or "", 10) + 6, "none": 0.0}[mode]
        if value >= 0:
            above = max(above, extent - (ticks[-1] - value) / span * _PLOT_H)
        else:
            below = max(below, extent - (value - ticks[0]) / span * _PLOT_H)
    frame = _Frame(**args, top_extra=above, bottom_extra=below)  # type: ignore[arg-type]
    out, zero = frame.open(), frame.y(0.0)
    for k, (name, row) in enumerate(zip(series, rows)):
        group = [f'<g class="series" data-series="{_esc(name)}">']
        for i, value in enumerate(row):
            if value is None:
                continue
            x = frame.left + i * frame.slot + frame.slot * (1 - fill) / 2 + k * width
            top, bar_h = min(frame.y(value), zero), abs(frame.y(value) - zero)
            tip = _esc(f"{name} \u2014 {categories[i]}: {_exact(value, percent=percent)}")
            group.append(f'<rect class="bar" x="{x + width * 0.06:.1f}" y="{top:.1f}" '
                         f'width="{max(width * 0.88, 1.0):.1f}" height="{bar_h:.1f}" fill="{PALETTE[k % 8]}" '
                         f'stroke="currentColor" stroke-opacity="0.4" stroke-width="0.6"><title>{tip}</title></rect>')
            if mode != "none":
                cx, up = x + width / 2, value >= 0
                ly = top - 4 if up else top + bar_h + (11 if mode == "flat" else 4)
                turn = f' transform="rotate(-90 {cx:.1f} {ly:.1f})"' if mode == "up" else ""
                anchor = "middle" if mode == "flat" else "start" if up else "end"
                dy = 3.5 if mode == "up" else 0.0
                group.append(f'<text class="value" x="{cx:.1f}" y="{ly + dy:.1f}" font-size="10" '
                             f'text-anchor="{anchor}"{turn}>{_esc(labels[k][i])}</text>')
            if name_bars:
                group.append(_svg_text(name, x=x + width / 2, y=frame.label_y, size=11, max_w=width,
                                       anchor="middle"))
        out.append("".join(group) + "</g>")
    out.append("</svg>")
    return "\n".join(out)


def bar_chart(*, title: str, categories: Sequence[str], series: Mapping[str, Sequence[float | None]],
              y_label: str, percent: bool = False, x_label: str = "", name_bars: bool = False) -> str:
    """Inline SVG of grouped bars: per category, one bar per series side by side, labelled.

    With ``percent=True`` values are fractions (0.15) shown as percentages (15.0%).
    Bars always start at zero. A None value leaves its bar out. With
    ``name_bars=True`` each bar is named by its series below it, in place of
    the category labels (for a chart of one measure).

    >>> bar_chart(title="Masking rate", categories=["rate"], series={"token": [0.15], "pmi": [0.149]}, y_label="share", percent=True)[:4]
    '<svg'
    """
    return _bars(title=title, categories=categories, series=series, y_label=y_label,
                 x_label=x_label, percent=percent, fill=0.8, turn_labels=True, name_bars=name_bars)


def histogram_chart(*, title: str, bins: Sequence[str], series: Mapping[str, Sequence[float]],
                    y_label: str, normalize: bool = False, x_label: str = "") -> str:
    """Inline SVG of a distribution per series, as grouped bars per bin (values labelled where they fit).

    With ``normalize=True`` each series is divided by its own total and shown
    as a percentage, so series with different totals compare directly.

    >>> histogram_chart(title="Unit length", bins=["1", "2", "3+"], series={"word": [80, 15, 5]}, y_label="units")[:4]
    '<svg'
    """
    if normalize:
        shares: dict[str, list[float | None]] = {}
        for name, row in zip(series, _columns(series, len(bins), "bins")):
            if any(v is not None and v < 0 for v in row):
                raise ValueError(f"series {name!r}: cannot normalise negative counts")
            total = sum(v for v in row if v is not None)
            shares[name] = [None if v is None else (v / total if total else 0.0) for v in row]
        series = shares  # type: ignore[assignment]
    return _bars(title=title, categories=bins, series=series, y_label=y_label,
                 x_label=x_label, percent=normalize, fill=0.94, turn_labels=False)


def _formatted(value: float, fmt: Format) -> str:
    if callable(fmt):
        return fmt(value)
    return fmt.format(value) if "{" in fmt else format(value, fmt)


def table(*, headers: Sequence[str], rows: Sequence[Sequence[object]], numeric_format: Format = ",.3f",
          integer_format: Format = ",d", column_formats: Mapping[str, Format] | None = None,
          caption: str = "") -> str:
    """An HTML table: numbers formatted and right-aligned, everything else escaped.

    Floats use ``numeric_format``, integers ``integer_format`` (format specs like
    ``".2f"``, templates like ``"{:.1%}"``, or callables); ``column_formats``
    overrides both for the named columns. None is an empty cell, booleans read yes/no.

    >>> table(headers=["tokenizer", "tokens/word"], rows=[["wp-8k", 1.2345]], numeric_format=".2f").count("1.23")
    1
    """
    formats = dict(column_formats or {})
    has_number, has_text = [False] * len(headers), [False] * len(headers)
    body = []
    for r, row in enumerate(rows):
        if len(row) != len(headers):
            raise ValueError(f"table row {r} has {len(row)} cells for {len(headers)} headers")
        cells = []
        for c, value in enumerate(row):
            if isinstance(value, numbers.Real) and not isinstance(value, bool):
                is_int = isinstance(value, numbers.Integral)
                chosen = formats.get(headers[c]) or (integer_format if is_int else numeric_format)
                text = _formatted(int(value) if is_int else float(value), chosen)
                has_number[c] = True
                cells.append(f'<td class="num">{_esc(text)}</td>')
            else:
                text = "" if value is None else ("yes" if value else "no") if isinstance(value, bool) else str(value)
                has_text[c] = has_text[c] or value is not None
                cells.append(f"<td>{_esc(text)}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    right = ' class="num"'
    head = "".join(f'<th{right if has_number[c] and not has_text[c] else ""} scope="col">{_esc(h)}</th>'
                   for c, h in enumerate(headers))
    cap = f"<caption>{_esc(caption)}</caption>" if caption else ""
    return (f'<div class="tablewrap"><table>{cap}<thead><tr>{head}</tr></thead>'
            f'<tbody>{"".join(body)}</tbody></table></div>')


def _shown(token: str) -> str:
    if token == "":
        return "\u2205"
    return token.replace(" ", "\u2423").translate(_SHOWN) if token.isspace() else token.translate(_SHOWN)


def highlighted_sequence(tokens: Sequence[str], *, masked: Sequence[bool], unit_ids: Sequence[int] | None = None,
                         originals: Sequence[str] | None = None) -> str:
    """HTML of one sequence with each masked unit in one highlighted box.

    Consecutive masked tokens with the same unit id (>= 0) share a box; without
    ``unit_ids`` every token is its own unit. ``originals`` (the tokens before
    masking) appear under each masked token and in its tooltip. Tokens with unit
    id -1 (special tokens) are dimmed.

    >>> highlighted_sequence(["the", "[MASK]", "[MASK]"], masked=[False, True, True], unit_ids=[0, 1, 1], originals=["the", "new", "york"]).count("<mark")
    1
    """
    n = len(tokens)
    for name, other in (("masked", masked), ("unit_ids", unit_ids), ("originals", originals)):
        if other is not None and len(other) != n:
            raise ValueError(f"{name} has {len(other)} entries for {n} tokens")
    out, i = ['<div class="seq">'], 0
    while i < n:
        unit = -1 if unit_ids is None else int(unit_ids[i])
        if not masked[i]:
            special = ' sp' if unit_ids is not None and unit < 0 else ''
            out.append(f'<span class="t{special}">{_esc(_shown(tokens[i]))}</span>')
            i += 1
            continue
        j = i + 1
        if unit_ids is not None and unit >= 0:
            while j < n and masked[j] and int(unit_ids[j]) == unit:
                j += 1
        tip = f"masked unit {unit}" if unit_ids is not None and unit >= 0 else "masked token"
        tip += f", {j - i} token{'s' if j - i > 1 else ''}" + (": " + " ".join(originals[i:j]) if originals else "")
        boxed = (_esc(_shown(tokens[p])) + ("" if originals is None else
                 f'<span class="o">{_esc(_shown(originals[p]))}</span>') for p in range(i, j))
        out.append(f'<mark title="{_esc(tip)}">' + "".join(f'<span class="t m">{b}</span>' for b in boxed) + "</mark>")
        i = j
    out.append("</div>")
    return "".join(out)


def paragraph(text: str) -> str:
    """Escaped text as one HTML paragraph: ``paragraph("a < b") == "<p>a &lt; b</p>"``."""
    return f"<p>{_esc(text)}</p>"


_CSS = """
:root{color-scheme:light dark;--bg:#fff;--fg:#1d1f23;--muted:#5b6270;--rule:#d3d7dd;--zebra:#f4f6f8;
--mark:#ffe28a;--markline:#9a6b00}
@media (prefers-color-scheme:dark){:root{--bg:#15171b;--fg:#e4e6ea;--muted:#a3aab5;--rule:#3a3f47;
--zebra:#1d2025;--mark:#5b4700;--markline:#e2b33c}}
*{box-sizing:border-box} html{background:var(--bg);color:var(--fg)} a{color:inherit} p,li{max-width:46rem}
body{margin:0;font:16px/1.55 system-ui,-apple-system,"Segoe UI",Roboto,Helvetica,Arial,sans-serif}
main{max-width:60rem;margin:0 auto;padding:2rem 1.25rem 3rem} h1{font-size:1.85rem;line-height:1.2;margin:0 0 .3rem}
.subtitle{color:var(--muted);margin:0 0 1.5rem;font-size:1.05rem} nav ol{margin:.5rem 0 0;padding-left:1.4rem;columns:2}
h2{font-size:1.3rem;margin:2.4rem 0 .8rem;padding-bottom:.3rem;border-bottom:1px solid var(--rule)}
svg.chart{display:block;max-width:100%;height:auto;margin:1.2rem 0;break-inside:avoid}
.tablewrap{overflow-x:auto;margin:1rem 0} caption{text-align:left;color:var(--muted);padding-bottom:.3rem}
table{border-collapse:collapse;font-size:.92rem;font-variant-numeric:tabular-nums}
th,td{padding:.32rem .7rem;border-bottom:1px solid var(--rule);text-align:left;vertical-align:top}
th{border-bottom:2px solid var(--rule);font-weight:600} .num{text-align:right;white-space:nowrap}
tbody tr:nth-child(even){background:var(--zebra)} footer{margin-top:3rem;color:var(--muted);font-size:.85rem}
.seq{display:flex;flex-wrap:wrap;align-items:flex-start;gap:.35rem .2rem;margin:.8rem 0;padding:.7rem;
border:1px solid var(--rule);border-radius:6px;font:.9rem/1.3 ui-monospace,Menlo,Consolas,monospace;break-inside:avoid}
.seq .t{display:inline-flex;flex-direction:column;align-items:center;padding:.05rem .15rem;white-space:pre}
.seq mark{display:inline-flex;gap:.1rem;background:var(--mark);color:inherit;border:1px solid var(--markline);
border-radius:4px;padding:0 .1rem} .seq .sp{color:var(--muted)} .seq .m{font-weight:600}
.seq .o{font-size:.7rem;font-weight:400;color:var(--muted);line-height:1.1}
@media print{:root{--bg:#fff;--fg:#000;--muted:#444;--rule:#999;--zebra:#f2f2f2;--mark:#ffe28a;--markline:#7a5500}
main{max-width:none;padding:0} nav{display:none} h2{break-after:avoid}
*{-webkit-print-color-adjust:exact;print-color-adjust:exact}}
"""


def page(*, title: str, sections: Sequence[tuple[str, str]], subtitle: str = "",
         notes: Sequence[str] = ()) -> str:
    """One complete, self-contained HTML5 document (inline CSS, no scripts, no network).

    Headings, title, subtitle and notes are escaped; section bodies are trusted
    markup from this module. Three or more sections get a contents list.

    >>> page(title="Audit", sections=[("Tokens per word", paragraph("1.3 on average"))]).startswith("<!DOCTYPE html>")
    True
    """
    out = ["<!DOCTYPE html>", '<html lang="en">', "<head>", '<meta charset="utf-8">',
           '<meta name="viewport" content="width=device-width, initial-scale=1">',
           '<meta http-equiv="Content-Security-Policy" content="default-src \'none\'; '
           'style-src \'unsafe-inline\'; img-src data:">',
           '<meta name="generator" content="maskprep">', f"<title>{_esc(title)}</title>",
           f"<style>{_CSS}</style>", "</head>", "<body>", "<main>", "<header>", f"<h1>{_esc(title)}</h1>"]
    if subtitle:
        out.append(f'<p class="subtitle">{_esc(subtitle)}</p>')
    out.append("</header>")
    if len(sections) >= 3:
        links = "".join(f'<li><a href="#section-{k}">{_esc(h)}</a></li>' for k, (h, _) in enumerate(sections, 1))
        out.append(f'<nav aria-label="Contents"><strong>Contents</strong><ol>{links}</ol></nav>')
    for k, (heading, body) in enumerate(sections, 1):
        out.append(f'<section id="section-{k}">\n<h2>{_esc(heading)}</h2>\n{body}\n</section>')
    if notes:
        items = "".join(f"<li>{_esc(n)}</li>" for n in notes)
        out.append(f'<section class="notes">\n<h2>Notes</h2>\n<ul>{items}</ul>\n</section>')
    out += ["<footer>Written by maskprep. This page is self-contained: it loads nothing and runs no scripts."
            "</footer>", "</main>", "</body>", "</html>", ""]
    return "\n".join(out)


def write_page(path: str | os.PathLike[str], html: str) -> Path:
    """Write ``html`` atomically (temp file beside ``path``, then rename): ``write_page("out/audit.html", html)``.

    Parent directories are created; an OSError becomes a `MaskprepError` naming the path.
    """
    target = Path(path)
    data = html.encode("utf-8", errors="replace")
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
        try:
            with os.fdopen(fd, "wb") as handle:
                handle.write(data)
                handle.flush()
                os.fsync(handle.fileno())
            os.chmod(tmp, 0o644)
            os.replace(tmp, target)
        except BaseException:
            Path(tmp).unlink(missing_ok=True)
            raise
    except OSError as exc:
        raise MaskprepError(f"{target}: cannot write the report ({exc.strerror or exc}); "
                            "choose a writable output directory") from exc
    return target
