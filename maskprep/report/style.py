"""The look of chart series: colours, marker shapes, dash patterns and bar fills, by style slot.

A series' style slot picks its colour (safe for the common colour-vision
deficiencies), its marker, its dash pattern and its bar fill, so that series
stay apart in greyscale too; `style_slots` gives a page's series the same slot
on every chart. Drawing the charts is `maskprep.report.charts`.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

__all__ = ["PALETTE", "NEUTRAL", "style_slots", "series_colour", "marker", "dash", "bar_paint"]

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


def series_colour(k: int) -> str:
    return NEUTRAL if k < 0 else PALETTE[k % len(PALETTE)]


def marker(k: int, x: float, y: float) -> str:
    """Marker of style slot ``k``: four shapes; filled or hollow alternating every four slots."""
    colour, s = series_colour(k), 4.5
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


def dash(k: int) -> str:
    """Dash pattern of slot ``k``: it cycles within twelve slots, shifted by each colour round."""
    pattern = "4 3" if k < 0 else _DASHES[(k + k // len(PALETTE)) % 4]
    return f' stroke-dasharray="{pattern}"' if pattern else ""


def bar_paint(k: int) -> str:
    """Fill of a bar and its legend swatch: solid for twelve slots, then pale, then hollow."""
    colour, round_ = series_colour(k), (max(k, 0) // len(PALETTE)) % 3
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
