"""Inline SVG charts for the HTML reports: line charts, grouped bar charts, histograms.

What it does: renders each chart as one SVG markup string with a title, a
legend, round y ticks and x labels (long labels are turned or clipped with an
ellipsis, the full text in a tooltip), in colours safe for colour-vision
deficiencies, with marker shapes and dash patterns that stay apart in
greyscale. None and NaN values leave gaps; a chart without data says so. All
text goes through `maskprep.report.html.esc`, so charts parse as XML. Same
inputs, same bytes. The frame and axes every chart shares are in
`maskprep.report.frame`, the series styles in `maskprep.report.style`.

What it does not do: compute statistics (that is `maskprep.stats`), build
tables, highlighted sequences or pages, or write files (that is
`maskprep.report.html`).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

from .frame import PLOT_H, WIDTH, Frame, empty_chart, exact_value, nice_ticks, series_columns, \
    short_value, svg_text, text_width
from .html import esc
from .style import NEUTRAL, PALETTE, bar_paint, dash, marker, series_colour, style_slots

__all__ = ["line_chart", "bar_chart", "histogram_chart", "style_slots", "PALETTE", "NEUTRAL"]


def line_chart(*, title: str, x_labels: Sequence[str], series: Mapping[str, Sequence[float | None]],
               y_label: str, y_min: float | None = None, x_label: str = "",
               slots: Mapping[str, int] | None = None, width: float = WIDTH,
               plot_height: float = PLOT_H) -> str:
    """Inline SVG with one line and markers per series; None/NaN values leave a gap.

    ``y_min`` fixes the bottom of the axis (it is lowered if data go below it);
    by default the axis spans the data with round ticks. ``slots`` fixes the
    style of named series (see `style_slots`); ``width`` and ``plot_height``
    are in pixels.

    >>> line_chart(title="Tokens per word", x_labels=["top 1k", "rarer"],
    ...            series={"wp-8k": [1.0, 2.4]}, y_label="tokens")[:4]
    '<svg'
    """
    rows = series_columns(series, len(x_labels), "x labels")
    present = [v for row in rows for v in row if v is not None]
    if not present:
        return empty_chart(title, width)
    lo = min(present) if y_min is None else min(min(present), float(y_min))
    ticks = nice_ticks(lo, max(present))
    bottom = ticks[0] if y_min is None else lo
    # ticks[-1] >= max > bottom
    ticks = [t for t in ticks if t >= bottom - 1e-12 * max(1.0, abs(bottom))]
    styles = style_slots(list(series), slots)
    frame = Frame(title=title, names=list(series), slots=styles, x_labels=x_labels,
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
            tip = esc(f"{name} \u2014 {x_labels[i]}: {exact_value(value)}")
            points.append(
                f'<g class="point"><title>{tip}</title>{marker(k, x, y)}'
                f'<circle cx="{x:.1f}" cy="{y:.1f}" r="9" fill="#000" fill-opacity="0"/></g>'
            )
        out.append(
            f'<g class="series" data-series="{esc(name)}">'
            f'<path class="line" d="{" ".join(path)}" fill="none" stroke="{series_colour(k)}" '
            f'stroke-width="2.2" stroke-linejoin="round"{dash(k)}/>' + "".join(points) + "</g>"
        )
    out.append("</svg>")
    return "\n".join(out)


def _bars(*, title: str, categories: Sequence[str], series: Mapping[str, Sequence[float | None]],
          y_label: str, x_label: str, percent: bool, fill: float, turn_labels: bool,
          name_bars: bool = False, slots: Mapping[str, int] | None = None, width: float = WIDTH,
          plot_height: float = PLOT_H) -> str:
    rows = series_columns(series, len(categories), "categories")
    present = [v for row in rows for v in row if v is not None]
    if not present:
        return empty_chart(title, width)
    lo, hi = min(0.0, *present), max(0.0, *present)
    ticks = nice_ticks(lo, hi if hi > lo else 1.0)
    x_labels = [""] * len(categories) if name_bars else categories
    styles = style_slots(list(series), slots)
    args = dict(title=title, names=list(series), slots=styles, x_labels=x_labels,
                y_label=y_label, x_label=x_label, ticks=ticks, domain=(ticks[0], ticks[-1]),
                percent=percent, swatch="bar", width=width, plot_h=plot_height,
                legend=not name_bars)  # bars named under them need no legend
    frame = Frame(**args)  # type: ignore[arg-type]
    bar_w = frame.slot * fill / max(len(rows), 1)
    labels = [[None if v is None else short_value(v, percent=percent) for v in row] for row in rows]
    widest = max((text_width(t, 10) for row in labels for t in row if t), default=0.0)
    mode = "flat" if widest <= bar_w - 6 else "up" if bar_w >= 10 and turn_labels else "none"
    above, below, span = 0.0, 0.0, ticks[-1] - ticks[0]  # label room needed beyond the plot edges
    for value, text in (
        (v, t) for row, texts in zip(rows, labels) for v, t in zip(row, texts) if v is not None
    ):
        extent = {"flat": 14.0, "up": text_width(text or "", 10) + 6, "none": 0.0}[mode]
        if value >= 0:
            above = max(above, extent - (ticks[-1] - value) / span * plot_height)
        else:
            below = max(below, extent - (value - ticks[0]) / span * plot_height)
    frame = Frame(**args, top_extra=above, bottom_extra=below)  # type: ignore[arg-type]
    out, zero = frame.open(), frame.y(0.0)
    for k, (slot, (name, row)) in enumerate(zip(styles, zip(series, rows))):
        group = [f'<g class="series" data-series="{esc(name)}">']
        for i, bar in enumerate(row):
            if bar is None:
                continue
            x = frame.left + i * frame.slot + frame.slot * (1 - fill) / 2 + k * bar_w
            top, bar_h = min(frame.y(bar), zero), abs(frame.y(bar) - zero)
            tip = esc(f"{name} \u2014 {categories[i]}: {exact_value(bar, percent=percent)}")
            group.append(f'<rect class="bar" x="{x + bar_w * 0.06:.1f}" y="{top:.1f}" '
                         f'width="{max(bar_w * 0.88, 1.0):.1f}" height="{bar_h:.1f}" '
                         f'{bar_paint(slot)}><title>{tip}</title></rect>')
            if mode != "none":
                cx, up = x + bar_w / 2, bar >= 0
                ly = top - 4 if up else top + bar_h + (11 if mode == "flat" else 4)
                turn = f' transform="rotate(-90 {cx:.1f} {ly:.1f})"' if mode == "up" else ""
                anchor = "middle" if mode == "flat" else "start" if up else "end"
                dy = 3.5 if mode == "up" else 0.0
                group.append(f'<text class="value" x="{cx:.1f}" y="{ly + dy:.1f}" font-size="10" '
                             f'text-anchor="{anchor}"{turn}>{esc(labels[k][i])}</text>')
            if name_bars:
                group.append(svg_text(name, x=x + bar_w / 2, y=frame.label_y, size=11,
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
    width: float = WIDTH,
    plot_height: float = PLOT_H,
) -> str:
    """Inline SVG of grouped bars: per category, one bar per series side by side, labelled.

    With ``percent=True`` values are fractions (0.15) shown as percentages (15.0%).
    Bars always start at zero. A None value leaves its bar out. With
    ``name_bars=True`` each bar is named by its series below it, in place of
    the category labels (for a chart of one measure). ``slots``, ``width`` and
    ``plot_height`` as for `line_chart`.

    >>> bar_chart(title="Masking rate", categories=["rate"],
    ...           series={"token": [0.15], "pmi": [0.149]}, y_label="share", percent=True)[:4]
    '<svg'
    """
    return _bars(title=title, categories=categories, series=series, y_label=y_label,
                 x_label=x_label, percent=percent, fill=0.8, turn_labels=True, name_bars=name_bars,
                 slots=slots, width=width, plot_height=plot_height)


def histogram_chart(*, title: str, bins: Sequence[str], series: Mapping[str, Sequence[float]],
                    y_label: str, normalize: bool = False, x_label: str = "",
                    slots: Mapping[str, int] | None = None, width: float = WIDTH,
                    plot_height: float = PLOT_H) -> str:
    """Inline SVG of a distribution per series, as grouped bars per bin (labelled where they fit).

    With ``normalize=True`` each series is divided by its own total and shown
    as a percentage, so series with different totals compare directly.

    >>> histogram_chart(title="Unit length", bins=["1", "2", "3+"],
    ...                 series={"word": [80, 15, 5]}, y_label="units")[:4]
    '<svg'
    """
    if normalize:
        shares: dict[str, list[float | None]] = {}
        for name, row in zip(series, series_columns(series, len(bins), "bins")):
            if any(v is not None and v < 0 for v in row):
                raise ValueError(f"series {name!r}: cannot normalise negative counts")
            total = sum(v for v in row if v is not None)
            shares[name] = [None if v is None else (v / total if total else 0.0) for v in row]
        series = shares  # type: ignore[assignment]
    return _bars(title=title, categories=bins, series=series, y_label=y_label, x_label=x_label,
                 percent=normalize, fill=0.94, turn_labels=False, slots=slots, width=width,
                 plot_height=plot_height)
