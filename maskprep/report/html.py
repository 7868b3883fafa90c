"""Self-contained HTML reports: tables, highlighted sequences, paragraphs, the page.

What it does: renders tables and token sequences with masked units
highlighted as markup strings, assembles them (and charts) into one HTML5
page with inline CSS that reads well on screen, in dark mode and on paper,
and writes it atomically. All text that could come from a corpus or a user is
escaped (characters XML forbids become U+FFFD, so charts parse as XML). Same
inputs, same bytes.

What it does not do: draw charts (that is `charts.py`, which uses the escaping
here), compute statistics (that is `stats.py`), load anything from anywhere,
or run scripts (tooltips are SVG ``<title>`` and HTML ``title``). Section
bodies given to `page` are trusted markup built with this module or
`charts.py`.
"""

from __future__ import annotations

import html as _html
import numbers
import os
import re
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path

from maskprep.errors import MaskprepError

_XML_BAD = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ud800-\udfff\ufffe\uffff]")
_SHOWN = str.maketrans({"\n": "\u21b5", "\r": "\u240d", "\t": "\u21e5"})
Format = str | Callable[[float], str]


def esc(value: object) -> str:
    return _html.escape(_XML_BAD.sub("\ufffd", str(value)), quote=True)


def _formatted(value: float, fmt: Format) -> str:
    if callable(fmt):
        return fmt(value)
    return fmt.format(value) if "{" in fmt else format(value, fmt)


def table(
    *,
    headers: Sequence[str],
    rows: Sequence[Sequence[object]],
    numeric_format: Format = ",.3f",
    integer_format: Format = ",d",
    column_formats: Mapping[str, Format] | None = None,
    caption: str = "",
) -> str:
    """An HTML table: numbers formatted and right-aligned, everything else escaped.

    Floats use ``numeric_format``, integers ``integer_format`` (format specs like
    ``".2f"``, templates like ``"{:.1%}"``, or callables); ``column_formats``
    overrides both for the named columns. None is an empty cell, booleans read yes/no.
    Text in the first column (the row's name) does not wrap; headers do.

    >>> table(headers=["tokenizer", "tokens/word"], rows=[["wp-8k", 1.2345]],
    ...       numeric_format=".2f").count("1.23")
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
                number = int(value) if is_int else float(value)  # type: ignore[call-overload]
                text = _formatted(number, chosen)
                has_number[c] = True
                cells.append(f'<td class="num">{esc(text)}</td>')
            else:
                text = (
                    ""
                    if value is None
                    else ("yes" if value else "no")
                    if isinstance(value, bool)
                    else str(value)
                )
                has_text[c] = has_text[c] or value is not None
                name = ' class="name"' if c == 0 else ""
                cells.append(f"<td{name}>{esc(text)}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    right = ' class="num"'
    head = "".join(f'<th{right if has_number[c] and not has_text[c] else ""} scope="col">'
                   f"{_breakable(h)}</th>" for c, h in enumerate(headers))
    cap = f"<caption>{esc(caption)}</caption>" if caption else ""
    return (f'<div class="tablewrap"><table>{cap}<thead><tr>{head}</tr></thead>'
            f'<tbody>{"".join(body)}</tbody></table></div>')


def _breakable(header: str) -> str:
    """An escaped header that may also break after a slash (``tokens/word``): narrow columns."""
    return esc(header).replace("/", "/<wbr/>")


def _shown(token: str) -> str:
    if token == "":
        return "\u2205"
    return (
        token.replace(" ", "\u2423").translate(_SHOWN)
        if token.isspace()
        else token.translate(_SHOWN)
    )


def highlighted_sequence(
    tokens: Sequence[str],
    *,
    masked: Sequence[bool],
    unit_ids: Sequence[int] | None = None,
    originals: Sequence[str] | None = None,
) -> str:
    """HTML of one sequence with each masked unit in one highlighted box.

    Consecutive masked tokens with the same unit id (>= 0) share a box; without
    ``unit_ids`` every token is its own unit. ``originals`` (the tokens before
    masking) appear under each masked token and in its tooltip. Tokens with unit
    id -1 (special tokens) are dimmed.

    >>> highlighted_sequence(["the", "[MASK]", "[MASK]"], masked=[False, True, True],
    ...                      unit_ids=[0, 1, 1], originals=["the", "new", "york"]).count("<mark")
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
            out.append(f'<span class="t{special}">{esc(_shown(tokens[i]))}</span>')
            i += 1
            continue
        j = i + 1
        if unit_ids is not None and unit >= 0:
            while j < n and masked[j] and int(unit_ids[j]) == unit:
                j += 1
        tip = f"masked unit {unit}" if unit_ids is not None and unit >= 0 else "masked token"
        tip += f", {j - i} token{'s' if j - i > 1 else ''}" + (
            ": " + " ".join(originals[i:j]) if originals else ""
        )
        boxed = (esc(_shown(tokens[p])) + ("" if originals is None else
                 f'<span class="o">{esc(_shown(originals[p]))}</span>') for p in range(i, j))
        out.append(
            f'<mark title="{esc(tip)}">'
            + "".join(f'<span class="t m">{b}</span>' for b in boxed)
            + "</mark>"
        )
        i = j
    out.append("</div>")
    return "".join(out)


def definitions(items: Sequence[tuple[str, str]]) -> str:
    """Escaped terms and their definitions as one definition list.

    >>> definitions([("split share", "words in 2+ tokens")])
    '<dl class="defs"><dt>split share</dt><dd>words in 2+ tokens</dd></dl>'
    """
    pairs = "".join(f"<dt>{esc(t)}</dt><dd>{esc(d)}</dd>" for t, d in items)
    return f'<dl class="defs">{pairs}</dl>'


def grid(parts: Sequence[str]) -> str:
    """Trusted markup fragments (small charts) laid out side by side as far as the page is wide."""
    return '<div class="grid">' + "".join(parts) + "</div>"


def paragraph(text: str) -> str:
    """Escaped text as one HTML paragraph: ``paragraph("a < b") == "<p>a &lt; b</p>"``."""
    return f"<p>{esc(text)}</p>"


_CSS = """
:root{color-scheme:light dark;--bg:#fff;--fg:#1d1f23;--muted:#5b6270;--rule:#d3d7dd;--zebra:#f4f6f8;
--mark:#ffe28a;--markline:#9a6b00}
@media (prefers-color-scheme:dark){:root{--bg:#15171b;--fg:#e4e6ea;--muted:#a3aab5;--rule:#3a3f47;
--zebra:#1d2025;--mark:#5b4700;--markline:#e2b33c}}
*{box-sizing:border-box} html{background:var(--bg);color:var(--fg)} a{color:inherit} \
p,li{max-width:46rem}
body{margin:0;font:16px/1.55 system-ui,-apple-system,"Segoe UI",Roboto,Helvetica,Arial,sans-serif}
main{max-width:96rem;margin:0 auto;padding:2rem 1.25rem 3rem}
h1{font-size:1.85rem;line-height:1.2;margin:0 0 .3rem}
.subtitle{color:var(--muted);margin:0 0 1.5rem;font-size:1.05rem} \
nav ol{margin:.5rem 0 0;padding-left:1.4rem;columns:2}
h2{font-size:1.3rem;margin:2.4rem 0 .8rem;padding-bottom:.3rem;border-bottom:1px solid var(--rule)}
svg.chart{display:block;max-width:100%;height:auto;margin:1.2rem 0;break-inside:avoid}
.tablewrap{overflow-x:auto;margin:1rem 0} \
caption{text-align:left;color:var(--muted);padding-bottom:.3rem}
table{border-collapse:collapse;font-size:.92rem;font-variant-numeric:tabular-nums}
th,td{padding:.32rem .6rem;border-bottom:1px solid var(--rule);text-align:left;vertical-align:top}
th{border-bottom:2px solid var(--rule);font-weight:600;overflow-wrap:break-word;hyphens:auto}
.num{text-align:right;white-space:nowrap} th.num{white-space:normal} td.name{white-space:nowrap}
tbody tr:nth-child(even){background:var(--zebra)}
.grid{display:grid;grid-template-columns:repeat(auto-fill,minmax(min(100%,25rem),1fr));
gap:0 1.5rem;align-items:start} .grid svg.chart{margin:.6rem 0}
.blocks{display:flex;flex-wrap:wrap;gap:0 2.5rem;align-items:flex-start}
.blocks>*{min-width:0;max-width:100%} h3{font-size:1.08rem;margin:1.4rem 0 .4rem}
dl.defs{display:grid;grid-template-columns:max-content minmax(0,46rem);gap:.35rem 1.2rem}
dl.defs dt{font-weight:600} dl.defs dd{margin:0}
@media (max-width:40rem){main{padding:1rem .6rem 2rem} nav ol{columns:1}
dl.defs{grid-template-columns:1fr}
dl.defs dd{margin:0 0 .5rem}}
footer{margin-top:3rem;color:var(--muted);font-size:.85rem}
.seq{display:flex;flex-wrap:wrap;align-items:flex-start;gap:.35rem .2rem;margin:.8rem 0;\
padding:.7rem;
border:1px solid var(--rule);border-radius:6px;\
font:.9rem/1.3 ui-monospace,Menlo,Consolas,monospace;break-inside:avoid}
.seq .t{display:inline-flex;flex-direction:column;align-items:center;padding:.05rem .15rem;\
white-space:pre}
.seq mark{display:inline-flex;flex-wrap:wrap;max-width:100%;gap:.1rem;background:var(--mark);
color:inherit;border:1px solid var(--markline);border-radius:4px;padding:0 .1rem}
.seq .sp{color:var(--muted)} .seq .m{font-weight:600}
.seq .o{font-size:.7rem;font-weight:400;color:var(--muted);line-height:1.1}
@media print{:root{--bg:#fff;--fg:#000;--muted:#444;--rule:#999;--zebra:#f2f2f2;--mark:#ffe28a;\
--markline:#7a5500}
main{max-width:none;padding:0} nav{display:none} h2{break-after:avoid}
*{-webkit-print-color-adjust:exact;print-color-adjust:exact}}
"""


def page(*, title: str, sections: Sequence[tuple[str, str]], subtitle: str = "",
         notes: Sequence[str] = ()) -> str:
    """One complete, self-contained HTML5 document (inline CSS, no scripts, no network).

    Headings, title, subtitle and notes are escaped; section bodies are trusted
    markup from this module. Three or more sections get a contents list.

    >>> page(title="Audit", sections=[("Tokens per word", paragraph("1.3 on average"))])[:15]
    '<!DOCTYPE html>'
    """
    out = [
        "<!DOCTYPE html>",
        '<html lang="en">',
        "<head>",
        '<meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        '<meta http-equiv="Content-Security-Policy" content="default-src \'none\'; '
        "style-src 'unsafe-inline'; img-src data:\">",
        '<meta name="generator" content="maskprep">',
        f"<title>{esc(title)}</title>",
        f"<style>{_CSS}</style>",
        "</head>",
        "<body>",
        "<main>",
        "<header>",
        f"<h1>{esc(title)}</h1>",
    ]
    if subtitle:
        out.append(f'<p class="subtitle">{esc(subtitle)}</p>')
    out.append("</header>")
    if len(sections) >= 3:
        links = "".join(
            f'<li><a href="#section-{k}">{esc(h)}</a></li>' for k, (h, _) in enumerate(sections, 1)
        )
        out.append(f'<nav aria-label="Contents"><strong>Contents</strong><ol>{links}</ol></nav>')
    for k, (heading, body) in enumerate(sections, 1):
        out.append(f'<section id="section-{k}">\n<h2>{esc(heading)}</h2>\n{body}\n</section>')
    if notes:
        items = "".join(f"<li>{esc(n)}</li>" for n in notes)
        out.append(f'<section class="notes">\n<h2>Notes</h2>\n<ul>{items}</ul>\n</section>')
    out += [
        "<footer>Written by maskprep. This page is self-contained: it loads nothing and runs "
        "no scripts.</footer>",
        "</main>",
        "</body>",
        "</html>",
        "",
    ]
    return "\n".join(out)


def write_page(path: str | os.PathLike[str], html: str) -> Path:
    """Write ``html`` atomically (temp file beside ``path``, then rename).

    ``write_page("out/audit.html", html)``

    Parent directories are created; an OSError becomes a `MaskprepError` naming the path.
    """
    from .._files import atomic_write_bytes

    target = Path(path)
    try:
        atomic_write_bytes(target, html.encode("utf-8", errors="replace"))
    except OSError as exc:
        raise MaskprepError(f"{target}: cannot write the report ({exc.strerror or exc}); "
                            "choose a writable output directory") from exc
    return target
