"""Inline SVG charts for the HTML reports: line charts, grouped bar charts, histograms.

What it does: renders each chart as one SVG markup string with a title, a
legend, round y ticks and x labels (long labels are turned or clipped with an
ellipsis, the full text in a tooltip), in colours safe for colour-vision
deficiencies, with marker shapes and dash patterns that stay apart in
greyscale. None and NaN values leave gaps; a chart without data says so. All
text goes through `report`'s escaping, so charts parse as XML. Same inputs,
same bytes.

What it does not do: compute statistics (that is `stats.py`), build tables,
highlighted sequences or pages, or write files (that is `report.py`).
"""

from __future__ import annotations

import math
import unicodedata
from collections.abc import Mapping, Sequence

from maskprep._checks import is_real
from maskprep.report.html import esc

#: Series colours, one per series up to twelve: the Okabe-Ito set (safe for the
#: common colour-vision deficiencies) without its yellow, then four of Kelly's
#: colours of maximum contrast, then the yellow (faint on white, so last). Slot 6
#: is the text colour (black on light pages, light on dark ones). Lines also
#: differ by marker shape and dash pattern, so they stay apart in greyscale print
#: and past twelve series, where colours repeat with another marker fill and dash.
PALETTE: tuple[str, ...] = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9",
                            "currentColor", "#875692", "#8DB600", "#BE0032", "#654522", "#F0E442")
#: The colour of a reference series (slot -1, e.g. "all tokens" beside strategies).
NEUTRAL = "#9AA0A6"
_DASHES = ("", "7 4", "2 3", "9 3 2 3")
_WIDTH = 760.0
_PLOT_H = 260.0
_PAD = 12.0
_ROT = math.radians(40)


def _char_w(ch: str, size: float) -> float:
    """Estimated advance of one character: wide East Asian 1 em, combining 0, others 0.6 em."""
    return (
        0.0
        if unicodedata.combining(ch)
        else size * (1.0 if unicodedata.east_asian_width(ch) in "WF" else 0.6)
    )


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
    tip = f"<title>{esc(text)}</title>" if shown != text else ""
    return (f'<text x="{x:.1f}" y="{y:.1f}" font-size="{size:g}" text-anchor="{anchor}"{extra}>'
            f"{tip}{esc(shown)}</text>")


def _columns(
    series: Mapping[str, Sequence[object]], count: int, what: str
) -> list[list[float | None]]:
    """Each series as floats, None for a gap (None, NaN, infinities); checks lengths and types."""
    rows = []
    for name, values in series.items():
        if len(values) != count:
            raise ValueError(f"series {name!r} has {len(values)} values for {count} {what}")
        if any(v is not None and not is_real(v) for v in values):
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


def _short(value: float, *, percent: bool) -> str:
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


def _exact(value: float, *, percent: bool = False) -> str:
    text = f"{int(value):,}" if value.is_integer() and abs(value) < 1e15 else f"{value:.12g}"
    return f"{text} ({value * 100:.2f}%)" if percent else text


def _colour(k: int) -> str:
    return NEUTRAL if k < 0 else PALETTE[k % len(PALETTE)]


def _marker(k: int, x: float, y: float) -> str:
    """Marker of style slot ``k``: four shapes; filled or hollow alternating every four slots."""
    colour, s = _colour(k), 4.5
    hollow = k >= 0 and k % 8 >= 4
    paint = f'fill="none" stroke="{colour}" stroke-width="1.8"' if hollow else f'fill="{colour}"'
    if (shape := max(k, 0) % 4) == 0:
        return f'<circle cx="{x:.1f}" cy="{y:.1f}" r="{s}" {paint}/>'
    if shape == 1:
        return (f'<rect x="{x - s + .5:.1f}" y="{y - s + .5:.1f}" width="{2 * s - 1:g}" '
                f'height="{2 * s - 1:g}" {paint}/>')
    if shape == 2:
        pts = [(x, y - s * 1.2), (x + s * 1.15, y + s * 0.85), (x - s * 1.15, y + s * 0.85)]
    else:
        pts = [(x, y - s * 1.3), (x + s * 1.1, y), (x, y + s * 1.3), (x - s * 1.1, y)]
    return '<polygon points="' + " ".join(f"{a:.1f},{b:.1f}" for a, b in pts) + f'" {paint}/>'


def _dash(k: int) -> str:
    """Dash pattern of slot ``k``: it cycles within twelve slots, shifted by each colour round."""
    pattern = "4 3" if k < 0 else _DASHES[(k + k // len(PALETTE)) % 4]
    return f' stroke-dasharray="{pattern}"' if pattern else ""


def _bar_paint(k: int) -> str:
    """Fill of a bar and its legend swatch: solid for twelve slots, then pale, then hollow."""
    colour, round_ = _colour(k), (max(k, 0) // len(PALETTE)) % 3
    if round_ == 1:
        return f'fill="{colour}" fill-opacity="0.35" stroke="{colour}" stroke-width="1.6"'
    if round_ == 2:
        return f'fill="none" stroke="{colour}" stroke-width="1.6" stroke-dasharray="3 2"'
    return f'fill="{colour}" stroke="currentColor" stroke-opacity="0.4" stroke-width="0.6"'


def style_slots(names: Sequence[str], slots: Mapping[str, int] | None = None) -> list[int]:
    """The style slot (colour, marker, dash) of each series, in order.

    A page passes one ``slots`` mapping to all its charts so that a thing keeps
    its colour on every chart; names it does not list take the lowest slots no
    listed name uses. A negative slot is the neutral reference style.

    >>> style_slots(["all", "token", "pmi"], {"all": -1, "token": 0})
    [-1, 0, 1]
    """
    given = dict(slots or {})
    used = set(given.values())
    out, free = [], 0
    for name in names:
        if name in given:
            out.append(int(given[name]))
            continue
        while free in used:
            free += 1
        used.add(free)
        out.append(free)
    return out


def _wrap(text: str, size: float, max_w: float, lines: int) -> list[str]:
    """``text`` broken at spaces into at most ``lines`` lines that fit ``max_w`` (last clipped)."""
    out: list[str] = []
    words = text.split(" ")
    while words and len(out) < lines - 1:
        end = 1
        while end < len(words) and _text_w(" ".join(words[:end + 1]), size) <= max_w:
            end += 1
        if end == len(words) and _text_w(" ".join(words), size) <= max_w:
            break
        out.append(" ".join(words[:end]))
        words = words[end:]
    return out + [" ".join(words)] if words else out


class _Frame:
    """Layout and axes shared by every chart: title, legend, y ticks, x labels."""

    def __init__(self, *, title: str, names: Sequence[str], slots: Sequence[int],
                 x_labels: Sequence[str], y_label: str, x_label: str, ticks: Sequence[float],
                 domain: tuple[float, float],
                 percent: bool, swatch: str, width: float, plot_h: float, legend: bool = True,
                 top_extra: float = 0.0, bottom_extra: float = 0.0) -> None:
        self.title, self.names, self.slots, self.swatch = title, list(names), list(slots), swatch
        self.width, self.plot_h = width, plot_h
        self.y_label, self.x_label, self.ticks, self.domain = y_label, x_label, list(ticks), domain
        self.tick_text = _tick_labels(self.ticks, percent=percent)
        self.title_lines = _wrap(title, 15, width - 2 * _PAD, 3)
        self.legend: list[tuple[float, float, int]] = []
        x, row_y = _PAD, _PAD + 19 * len(self.title_lines) + 19
        name_w = min(260.0, width - 2 * _PAD - 30)
        for k, name in enumerate(self.names if legend else []):
            item_w = 30 + _text_w(_clip(name, 12, name_w), 12)
            if x + item_w > width - _PAD and x > _PAD:
                x, row_y = _PAD, row_y + 18
            self.legend.append((x, row_y, k))
            x += item_w + 18
        self.name_w = name_w
        self.top = (row_y + 24 if self.legend else row_y + 17) + top_extra
        self.x_text = list(x_labels)
        widths = [_text_w(_clip(t, 11, 170), 11) for t in self.x_text] or [0.0]
        self.left = _PAD + (20 if y_label else 0) + max(_text_w(t, 11) for t in self.tick_text) + 8
        self.rotate = False
        for _ in range(2):
            self.plot_w = width - self.left - _PAD - 10
            self.slot = self.plot_w / max(len(widths), 1)
            self.rotate = self.rotate or max(widths) > self.slot - 6
            if self.rotate:
                need = max(w * math.cos(_ROT) - (i + 0.5) * self.slot for i, w in enumerate(widths))
                self.left = max(self.left, _PAD + need)
        self.bottom = self.top + plot_h
        self.label_y = self.bottom + bottom_extra + 16
        room = max(widths) * math.sin(_ROT) + 14 if self.rotate else 12
        self.height = math.ceil(self.label_y + room + (24 if x_label else 0) + _PAD)

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
            out.append(_svg_text(line, x=_PAD, y=_PAD + 16 + 19 * i, size=15,
                                 max_w=self.width - 2 * _PAD, extra=' font-weight="600"'))
        for x, y, k in self.legend:
            slot = self.slots[k]
            if self.swatch == "line":
                out.append(
                    f'<line x1="{x:.1f}" y1="{y - 4:.1f}" x2="{x + 24:.1f}" y2="{y - 4:.1f}" '
                    f'stroke="{_colour(slot)}" stroke-width="2"{_dash(slot)}/>'
                    + _marker(slot, x + 12, y - 4)
                )
            else:
                out.append(f'<rect x="{x + 6:.1f}" y="{y - 10:.1f}" width="12" height="12" '
                           f'{_bar_paint(slot)}/>')
            out.append(_svg_text(self.names[k], x=x + 30, y=y, size=12, max_w=self.name_w))
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
                _svg_text(
                    self.y_label,
                    x=_PAD + 10,
                    y=cy,
                    size=12,
                    max_w=self.plot_h,
                    anchor="middle",
                    extra=f' transform="rotate(-90 {_PAD + 10:.1f} {cy:.1f})"',
                )
            )
        every = (
            math.ceil(15 / self.slot) if self.rotate else 1
        )  # thin out labels closer than a line apart
        for i, text in enumerate(self.x_text[::every]):
            x = self.xc(i * every)
            turn = f' transform="rotate(-40 {x:.1f} {self.label_y:.1f})"' if self.rotate else ""
            out.append(_svg_text(text, x=x, y=self.label_y, size=11, max_w=170,
                                 anchor="end" if self.rotate else "middle", extra=turn))
        if self.x_label:
            out.append(
                _svg_text(
                    self.x_label,
                    x=self.left + self.plot_w / 2,
                    y=self.height - _PAD - 4,
                    size=12,
                    max_w=self.plot_w,
                    anchor="middle",
                )
            )
        return out


def _empty_chart(title: str, width: float = _WIDTH) -> str:
    return (f'<svg class="chart" role="img" width="{width:g}" height="90" '
            f'viewBox="0 0 {width:g} 90" fill="currentColor" font-family="system-ui, sans-serif">'
            f'<title>{esc(title)}</title>'
            + _svg_text(title, x=_PAD, y=_PAD + 16, size=15, max_w=width - 2 * _PAD,
                        extra=' font-weight="600"')
            + f'<text x="{width / 2:g}" y="64" font-size="13" text-anchor="middle">no data</text>'
            '</svg>')


def line_chart(*, title: str, x_labels: Sequence[str], series: Mapping[str, Sequence[float | None]],
               y_label: str, y_min: float | None = None, x_label: str = "",
               slots: Mapping[str, int] | None = None, width: float = _WIDTH,
               plot_height: float = _PLOT_H) -> str:
    """Inline SVG with one line and markers per series; None/NaN values leave a gap.

    ``y_min`` fixes the bottom of the axis (it is lowered if data go below it);
    by default the axis spans the data with round ticks. ``slots`` fixes the
    style of named series (see `style_slots`); ``width`` and ``plot_height``
    are in pixels.

    >>> line_chart(title="Tokens per word", x_labels=["top 1k", "rarer"], series={"wp-8k": [1.0, 2.4]}, y_label="tokens")[:4]
    '<svg'
    """
    rows = _columns(series, len(x_labels), "x labels")
    present = [v for row in rows for v in row if v is not None]
    if not present:
        return _empty_chart(title, width)
    lo = min(present) if y_min is None else min(min(present), float(y_min))
    ticks = _nice_ticks(lo, max(present))
    bottom = ticks[0] if y_min is None else lo
    ticks = [
        t for t in ticks if t >= bottom - 1e-12 * max(1.0, abs(bottom))
    ]  # ticks[-1] >= max > bottom
    styles = style_slots(list(series), slots)
    frame = _Frame(title=title, names=list(series), slots=styles, x_labels=x_labels,
                   y_label=y_label, x_label=x_label, ticks=ticks, domain=(bottom, ticks[-1]),
                   percent=False, swatch="line", width=width, plot_h=plot_height)
    out = frame.open()
    for k, (name, row) in zip(styles, zip(series, rows)):
        path, pen_down, points = [], False, []
        for i, value in enumerate(row):
            if value is None:
                pen_down = False
                continue
            x, y = frame.xc(i), frame.y(value)
            path.append(f"{'L' if pen_down else 'M'}{x:.1f} {y:.1f}")
            pen_down = True
            tip = esc(f"{name} \u2014 {x_labels[i]}: {_exact(value)}")
            points.append(
                f'<g class="point"><title>{tip}</title>{_marker(k, x, y)}'
                f'<circle cx="{x:.1f}" cy="{y:.1f}" r="9" fill="#000" fill-opacity="0"/></g>'
            )
        out.append(
            f'<g class="series" data-series="{esc(name)}">'
            f'<path class="line" d="{" ".join(path)}" fill="none" stroke="{_colour(k)}" '
            f'stroke-width="2.2" stroke-linejoin="round"{_dash(k)}/>' + "".join(points) + "</g>"
        )
    out.append("</svg>")
    return "\n".join(out)


def _bars(*, title: str, categories: Sequence[str], series: Mapping[str, Sequence[float | None]],
          y_label: str, x_label: str, percent: bool, fill: float, turn_labels: bool,
          name_bars: bool = False, slots: Mapping[str, int] | None = None, width: float = _WIDTH,
          plot_height: float = _PLOT_H) -> str:
    rows = _columns(series, len(categories), "categories")
    present = [v for row in rows for v in row if v is not None]
    if not present:
        return _empty_chart(title, width)
    lo, hi = min(0.0, *present), max(0.0, *present)
    ticks = _nice_ticks(lo, hi if hi > lo else 1.0)
    x_labels = [""] * len(categories) if name_bars else categories
    styles = style_slots(list(series), slots)
    args = dict(title=title, names=list(series), slots=styles, x_labels=x_labels,
                y_label=y_label, x_label=x_label, ticks=ticks, domain=(ticks[0], ticks[-1]),
                percent=percent, swatch="bar", width=width, plot_h=plot_height,
                legend=not name_bars)  # bars named under them need no legend
    frame = _Frame(**args)  # type: ignore[arg-type]
    bar_w = frame.slot * fill / max(len(rows), 1)
    labels = [[None if v is None else _short(v, percent=percent) for v in row] for row in rows]
    widest = max((_text_w(t, 10) for row in labels for t in row if t), default=0.0)
    mode = "flat" if widest <= bar_w - 6 else "up" if bar_w >= 10 and turn_labels else "none"
    above, below, span = 0.0, 0.0, ticks[-1] - ticks[0]  # label room needed beyond the plot edges
    for value, text in (
        (v, t) for row, texts in zip(rows, labels) for v, t in zip(row, texts) if v is not None
    ):
        extent = {"flat": 14.0, "up": _text_w(text or "", 10) + 6, "none": 0.0}[mode]
        if value >= 0:
            above = max(above, extent - (ticks[-1] - value) / span * plot_height)
        else:
            below = max(below, extent - (value - ticks[0]) / span * plot_height)
    frame = _Frame(**args, top_extra=above, bottom_extra=below)  # type: ignore[arg-type]
    out, zero = frame.open(), frame.y(0.0)
    for k, (slot, (name, row)) in enumerate(zip(styles, zip(series, rows))):
        group = [f'<g class="series" data-series="{esc(name)}">']
        for i, bar in enumerate(row):
            if bar is None:
                continue
            x = frame.left + i * frame.slot + frame.slot * (1 - fill) / 2 + k * bar_w
            top, bar_h = min(frame.y(bar), zero), abs(frame.y(bar) - zero)
            tip = esc(f"{name} \u2014 {categories[i]}: {_exact(bar, percent=percent)}")
            group.append(f'<rect class="bar" x="{x + bar_w * 0.06:.1f}" y="{top:.1f}" '
                         f'width="{max(bar_w * 0.88, 1.0):.1f}" height="{bar_h:.1f}" '
                         f'{_bar_paint(slot)}><title>{tip}</title></rect>')
            if mode != "none":
                cx, up = x + bar_w / 2, bar >= 0
                ly = top - 4 if up else top + bar_h + (11 if mode == "flat" else 4)
                turn = f' transform="rotate(-90 {cx:.1f} {ly:.1f})"' if mode == "up" else ""
                anchor = "middle" if mode == "flat" else "start" if up else "end"
                dy = 3.5 if mode == "up" else 0.0
                group.append(f'<text class="value" x="{cx:.1f}" y="{ly + dy:.1f}" font-size="10" '
                             f'text-anchor="{anchor}"{turn}>{esc(labels[k][i])}</text>')
            if name_bars:
                group.append(_svg_text(name, x=x + bar_w / 2, y=frame.label_y, size=11,
                                       max_w=bar_w, anchor="middle"))
        out.append("".join(group) + "</g>")
    out.append("</svg>")
    return "\n".join(out)


def bar_chart(
    *,
    title: str,
    categories: Sequence[str],
    series: Mapping[str, Sequence[float | None]],
    y_label: str,
    percent: bool = False,
    x_label: str = "",
    name_bars: bool = False,
    slots: Mapping[str, int] | None = None,
    width: float = _WIDTH,
    plot_height: float = _PLOT_H,
) -> str:
    """Inline SVG of grouped bars: per category, one bar per series side by side, labelled.

    With ``percent=True`` values are fractions (0.15) shown as percentages (15.0%).
    Bars always start at zero. A None value leaves its bar out. With
    ``name_bars=True`` each bar is named by its series below it, in place of
    the category labels (for a chart of one measure). ``slots``, ``width`` and
    ``plot_height`` as for `line_chart`.

    >>> bar_chart(title="Masking rate", categories=["rate"], series={"token": [0.15], "pmi": [0.149]}, y_label="share", percent=True)[:4]
    '<svg'
    """
    return _bars(title=title, categories=categories, series=series, y_label=y_label,
                 x_label=x_label, percent=percent, fill=0.8, turn_labels=True, name_bars=name_bars,
                 slots=slots, width=width, plot_height=plot_height)


def histogram_chart(*, title: str, bins: Sequence[str], series: Mapping[str, Sequence[float]],
                    y_label: str, normalize: bool = False, x_label: str = "",
                    slots: Mapping[str, int] | None = None, width: float = _WIDTH,
                    plot_height: float = _PLOT_H) -> str:
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
    return _bars(title=title, categories=bins, series=series, y_label=y_label, x_label=x_label,
                 percent=normalize, fill=0.94, turn_labels=False, slots=slots, width=width,
                 plot_height=plot_height)
