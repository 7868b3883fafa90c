"""Tests for the HTML report toolkit (report and charts): structure, escaping, gaps, formatting.

Same inputs give the same bytes (determinism) too."""

from __future__ import annotations

import os
import re
import subprocess
import sys
import xml.etree.ElementTree as ET
from html.parser import HTMLParser
from pathlib import Path

import pytest

from maskprep.report import charts, frame
from maskprep.report import html as report
from maskprep.errors import MaskprepError

EVIL = "<script>alert(1)</script> & \"quoted\" 'single'"
BANDS = ["top 1k", "1k-10k", "10k-100k", "rarer"]


def parse(svg: str) -> ET.Element:
    return ET.fromstring(svg)


def series_groups(root: ET.Element) -> list[ET.Element]:
    return [g for g in root.iter("g") if g.get("class") == "series"]


def path_vertices(d: str) -> list[tuple[str, float, float]]:
    return [(cmd, float(x), float(y)) for cmd, x, y in re.findall(r"([ML])([-\d.]+) ([-\d.]+)", d)]


def all_text(root: ET.Element) -> list[str]:
    return ["".join(el.itertext()) for el in root.iter()]


def sample_line() -> str:
    return charts.line_chart(title="Tokens per word", x_labels=BANDS, y_label="tokens per word",
                             series={"wp-2k": [1.1, 1.6, 2.4, 3.1], "wp-8k": [1.0, 1.2, 1.9, 2.7],
                                     "wp-30k": [1.0, 1.0, 1.3, 2.0]})


def sample_bars() -> str:
    return charts.bar_chart(title="Masking", categories=["rate", "leakage", "easy targets"],
                            series={"token": [0.15, 0.3, 0.4], "word": [0.15, 0.0, 0.35],
                                    "span": [0.15, 0.0, 0.3], "pmi": [0.15, 0.0, 0.2]},
                            y_label="share", percent=True)


def sample_histogram() -> str:
    return charts.histogram_chart(title="Unit length", bins=["1", "2", "3", "4+"], y_label="units",
                                  series={"word": [70, 20, 8, 2], "span": [20, 30, 30, 20]})


# --- structure -----------------------------------------------------------------------------

def test_line_chart_has_one_path_per_series_and_one_marker_per_value() -> None:
    root = parse(sample_line())
    assert root.tag == "svg"
    groups = series_groups(root)
    assert [g.get("data-series") for g in groups] == ["wp-2k", "wp-8k", "wp-30k"]
    for g in groups:
        paths = [p for p in g.iter("path") if p.get("class") == "line"]
        assert len(paths) == 1
        assert len(path_vertices(paths[0].get("d", ""))) == 4
        assert len([p for p in g.iter("g") if p.get("class") == "point"]) == 4


def test_line_chart_series_differ_in_colour_marker_and_dash() -> None:
    names = [f"s{k}" for k in range(8)]
    root = parse(charts.line_chart(title="t", x_labels=["a", "b"], y_label="y",
                                   series={n: [float(k), k + 1.0] for k, n in enumerate(names)}))
    looks = set()
    for g in series_groups(root):
        line = next(p for p in g.iter("path") if p.get("class") == "line")
        point = next(p for p in g.iter("g") if p.get("class") == "point")
        shape = point[1]
        looks.add((line.get("stroke"), line.get("stroke-dasharray"), shape.tag, shape.get("fill")))
    assert len(looks) == 8
    assert len({c for c, *_ in looks}) == 8  # eight different colours


def line_looks(svg: str) -> list[tuple[str | None, ...]]:
    looks = []
    for g in series_groups(parse(svg)):
        line = next(p for p in g.iter("path") if p.get("class") == "line")
        shape = next(p for p in g.iter("g") if p.get("class") == "point")[1]
        looks.append((line.get("stroke"), line.get("stroke-dasharray"), shape.tag,
                      shape.get("fill")))
    return looks


def test_twelve_series_get_twelve_colours_and_more_stay_distinct() -> None:
    # Ten tokenizers in one audit must not share a colour; past twelve the look still differs.
    names = [f"s{k}" for k in range(40)]
    series = {n: [float(k), k + 1.0] for k, n in enumerate(names)}
    looks = line_looks(charts.line_chart(title="t", x_labels=["a", "b"], y_label="y",
                                         series=series))
    assert len({look[0] for look in looks[:12]}) == 12
    assert len(set(looks)) == 40
    bars = parse(charts.bar_chart(title="t", categories=["a"], y_label="y",
                                  series={n: [1.0] for n in names[:30]}))
    place = ("x", "y", "width", "height")
    paints = [tuple(sorted((k, v) for k, v in r.attrib.items() if k not in place))
              for r in bars.iter("rect") if r.get("class") == "bar"]
    assert len(set(paints)) == 30


def test_slots_keep_a_series_colour_from_chart_to_chart() -> None:
    # A page passes one mapping to all its charts: adding a reference series first shifts nothing.
    slots = {"token": 0, "word": 1, "span": 2, "pmi": 3}
    plain = parse(charts.bar_chart(title="t", categories=["a"], y_label="y", slots=slots,
                                   series={n: [0.1] for n in slots}))
    with_ref = parse(charts.bar_chart(title="t", categories=["a"], y_label="y",
                                      slots={"all": -1, **slots},
                                      series={"all": [0.1], **{n: [0.1] for n in slots}}))

    def fills(root: ET.Element) -> dict[str | None, str | None]:
        return {g.get("data-series"): next(g.iter("rect")).get("fill")
                for g in series_groups(root)}

    assert {k: v for k, v in fills(with_ref).items() if k != "all"} == fills(plain)
    assert fills(with_ref)["all"] == charts.NEUTRAL and charts.NEUTRAL not in charts.PALETTE
    assert charts.style_slots(["x", "token", "y"], {"token": 0}) == [1, 0, 2]
    line = line_looks(charts.line_chart(title="t", x_labels=["a"], y_label="y",
                                        slots={"b": 0, "a": 1}, series={"a": [1.0], "b": [2.0]}))
    assert [look[0] for look in line] == [charts.PALETTE[1], charts.PALETTE[0]]


def test_small_charts_wrap_titles_and_named_bars_drop_the_legend() -> None:
    title = "Within-unit leakage: targets whose vocabulary unit keeps a visible token"
    root = parse(charts.bar_chart(title=title, categories=["x"],
                                  series={"token": [0.4], "pmi": [0.0]}, y_label="share",
                                  percent=True, name_bars=True, width=400, plot_height=170))
    assert root.get("width") == "400" and root.get("viewBox", "").startswith("0 0 400 ")
    heading = [t for t in root.iter("text") if t.get("font-weight") == "600"]
    assert len(heading) == 2 and " ".join(t.text or "" for t in heading) == title
    assert all(frame.text_width(t.text or "", 15) <= 400 - 24 for t in heading)
    assert not [r for r in root.iter("rect") if r.get("class") != "bar"]  # no legend swatches


def test_line_chart_none_is_a_gap_not_zero() -> None:
    svg = charts.line_chart(
        title="t",
        x_labels=["a", "b", "c", "d", "e"],
        y_label="y",
        series={"s": [2.0, 3.0, None, 4.0, 5.0], "nan": [2.0, float("nan"), 3.0, 3.0, 3.0]},
    )
    root = parse(svg)
    first, second = series_groups(root)
    verts = path_vertices(next(p for p in first.iter("path")).get("d", ""))
    assert [cmd for cmd, _, _ in verts] == ["M", "L", "M", "L"]  # pen lifted over the gap
    xs = [x for _, x, _ in verts]
    assert len(xs) == 4 and xs == sorted(xs)
    # The axis starts at the lowest value (2), so a 0 would lie below the plot; every vertex is
    # inside it.
    ticks = [float(t.text) for t in root.iter("text") if t.get("text-anchor") == "end" and t.text
             and re.fullmatch(r"[\d.]+", t.text)]
    assert min(ticks) == 2.0
    bottom = max(
        float(line.get("y1", 0))
        for line in root.iter("line")
        if line.get("stroke-opacity") == "0.5"
    )
    assert all(y <= bottom + 0.05 for _, _, y in verts)
    assert len([g for g in first.iter("g") if g.get("class") == "point"]) == 4
    tips = [t.text for g in first.iter("g") if g.get("class") == "point" for t in g.iter("title")]
    assert not any(": 0" in (t or "") for t in tips)
    assert [
        cmd for cmd, _, _ in path_vertices(next(p for p in second.iter("path")).get("d", ""))
    ] == ["M", "M", "L", "L"]  # NaN is a gap too; a lone point has no segment


def test_line_chart_y_min_sets_axis_bottom() -> None:
    root = parse(charts.line_chart(title="t", x_labels=["a", "b"], y_label="y", y_min=0,
                                   series={"s": [1.2, 1.8]}))
    labels = [t.text for t in root.iter("text") if t.get("text-anchor") == "end"]
    assert labels[0] in {"0", "0.0"}


def test_bar_chart_has_one_group_per_series_with_labelled_bars() -> None:
    root = parse(sample_bars())
    groups = series_groups(root)
    assert [g.get("data-series") for g in groups] == ["token", "word", "span", "pmi"]
    for g in groups:
        assert len([r for r in g.iter("rect") if r.get("class") == "bar"]) == 3
    labels = [t.text for t in root.iter("text") if t.get("class") == "value"]
    assert labels.count("15.0%") == 4 and "40.0%" in labels
    # Bars of one category sit side by side, in series order, without overlapping.
    firsts = [next(r for r in g.iter("rect")) for g in groups]
    xs = [float(r.get("x", 0)) for r in firsts]
    widths = [float(r.get("width", 0)) for r in firsts]
    assert all(xs[i] + widths[i] <= xs[i + 1] for i in range(3))


def test_one_measure_chart_names_each_bar_under_it() -> None:
    root = parse(
        charts.bar_chart(
            title="Within-word leakage",
            categories=["Within-word leakage"],
            series={"token": [0.16], "word": [0.0], "span": [0.0]},
            y_label="share",
            percent=True,
            name_bars=True,
        )
    )
    bars = [r for r in root.iter("rect") if r.get("class") == "bar"]
    centres = [float(r.get("x", 0)) + float(r.get("width", 0)) / 2 for r in bars]
    bottom = max(float(r.get("y", 0)) + float(r.get("height", 0)) for r in bars)
    under = {t.text: float(t.get("x", 0)) for g in series_groups(root) for t in g.iter("text")
             if t.get("class") != "value" and float(t.get("y", 0)) > bottom}
    assert list(under) == ["token", "word", "span"]
    assert [under[n] for n in under] == pytest.approx(centres, abs=0.2)
    # the category label is not repeated under the bars
    assert not any(
        t.text == "Within-word leakage" and float(t.get("y", 0)) > bottom for t in root.iter("text")
    )


def test_bar_heights_are_proportional_and_start_at_zero() -> None:
    root = parse(
        charts.bar_chart(title="t", categories=["a", "b"], series={"s": [10.0, 40.0]}, y_label="n")
    )
    a, b = [r for r in root.iter("rect") if r.get("class") == "bar"]
    assert float(b.get("height", 0)) == pytest.approx(4 * float(a.get("height", 0)), rel=0.01)
    bottom_a = float(a.get("y", 0)) + float(a.get("height", 0))
    bottom_b = float(b.get("y", 0)) + float(b.get("height", 0))
    assert bottom_a == pytest.approx(bottom_b, abs=0.11)


def test_negative_bars_hang_below_zero() -> None:
    root = parse(
        charts.bar_chart(title="t", categories=["a", "b"], series={"s": [-5.0, 5.0]}, y_label="n")
    )
    neg, pos = [r for r in root.iter("rect") if r.get("class") == "bar"]
    assert float(neg.get("y", 0)) == pytest.approx(
        float(pos.get("y", 0)) + float(pos.get("height", 0)), abs=0.11
    )


def test_histogram_groups_and_normalisation() -> None:
    root = parse(sample_histogram())
    assert len(series_groups(root)) == 2
    assert all(len(list(g.iter("rect"))) == 4 for g in series_groups(root))
    shares = parse(
        charts.histogram_chart(
            title="t",
            bins=["1", "2"],
            series={"a": [3, 1], "b": [10, 30]},
            y_label="share",
            normalize=True,
        )
    )
    tips = [t.text for t in shares.iter("title") if t.text and " \u2014 " in t.text]
    assert tips == ["a \u2014 1: 0.75 (75.00%)", "a \u2014 2: 0.25 (25.00%)",
                    "b \u2014 1: 0.25 (25.00%)", "b \u2014 2: 0.75 (75.00%)"]
    with pytest.raises(ValueError, match="negative"):
        charts.histogram_chart(
            title="t", bins=["1"], series={"a": [-1]}, y_label="n", normalize=True
        )


def test_tick_labels_are_round_readable_numbers() -> None:
    for lo, hi in [(0, 0.37), (1.0, 3.1), (0, 1234567), (-3000, 13580), (0.001, 0.0042), (5, 5)]:
        ticks = frame.nice_ticks(lo, hi)
        assert ticks[0] <= lo and ticks[-1] >= hi and 3 <= len(ticks) <= 12
        step = ticks[1] - ticks[0]
        mantissa = step / 10 ** __import__("math").floor(__import__("math").log10(step))
        assert any(abs(mantissa - m) < 1e-6 for m in (1, 2, 2.5, 5))
    assert frame.tick_labels([0.0, 0.1, 0.2], percent=True) == ["0%", "10%", "20%"]
    assert frame.tick_labels([0.0, 2.5e6, 5e6], percent=False) == ["0", "2.5M", "5.0M"]
    assert frame.tick_labels([0.0, 5000.0, 10000.0], percent=False) == ["0", "5,000", "10,000"]
    assert frame.tick_labels([1.0, 1.25, 1.5], percent=False) == ["1.00", "1.25", "1.50"]


def test_mismatched_lengths_and_non_numbers_raise() -> None:
    with pytest.raises(ValueError, match="3 values for 2"):
        charts.line_chart(title="t", x_labels=["a", "b"], series={"s": [1, 2, 3]}, y_label="y")
    with pytest.raises(ValueError, match="numbers"):
        text_values: dict = {"s": ["1"]}  # not numbers
        charts.bar_chart(title="t", categories=["a"], series=text_values, y_label="y")
    with pytest.raises(ValueError, match="2 entries for 3 tokens"):
        report.highlighted_sequence(["a", "b", "c"], masked=[True, False])
    with pytest.raises(ValueError, match="row 0"):
        report.table(headers=["a", "b"], rows=[[1]])


def test_empty_data_still_renders_valid_svg() -> None:
    root = parse(
        charts.line_chart(title="nothing", x_labels=["a"], series={"s": [None]}, y_label="y")
    )
    assert "no data" in all_text(root)[0]
    parse(charts.bar_chart(title="nothing", categories=[], series={}, y_label="y"))


def test_long_labels_are_clipped_with_full_text_in_tooltip() -> None:
    long = "a very long category label " * 6
    root = parse(
        charts.bar_chart(title="t", categories=[long, "b"], series={"s": [1.0, 2.0]}, y_label="y")
    )
    label = next(t for t in root.iter("text") if any(x.text == long for x in t.iter("title")))
    assert "".join(label.itertext()).endswith("\u2026")


# --- escaping ------------------------------------------------------------------------------

def every_output() -> dict[str, str]:
    seq = report.highlighted_sequence([EVIL, "[MASK]", "b"], masked=[False, True, False],
                                      unit_ids=[0, 1, 2], originals=[EVIL, EVIL, "b"])
    outputs = {
        "line": charts.line_chart(
            title=EVIL, x_labels=[EVIL, "b"], series={EVIL: [1.0, 2.0]}, y_label=EVIL, x_label=EVIL
        ),
        "bar": charts.bar_chart(
            title=EVIL, categories=[EVIL], series={EVIL: [1.0]}, y_label=EVIL, x_label=EVIL
        ),
        "histogram": charts.histogram_chart(
            title=EVIL, bins=[EVIL], series={EVIL: [3.0]}, y_label=EVIL
        ),
        "table": report.table(headers=[EVIL, "n"], rows=[[EVIL, 1.5]], caption=EVIL),
        "sequence": seq,
        "paragraph": report.paragraph(EVIL),
    }
    outputs["page"] = report.page(title=EVIL, subtitle=EVIL, notes=[EVIL],
                                  sections=[(EVIL, body) for body in outputs.values()])
    return outputs


@pytest.mark.parametrize(
    "name", ["line", "bar", "histogram", "table", "sequence", "paragraph", "page"]
)
def test_markup_in_inputs_is_escaped(name: str) -> None:
    out = every_output()[name]
    assert "<script" not in out
    assert "alert(1)</script>" not in out
    assert '"quoted"' not in out
    assert (
        "&lt;script&gt;alert(1)&lt;/script&gt; &amp; &quot;quoted&quot; &#x27;single&#x27;" in out
    )


@pytest.mark.parametrize("name", ["line", "bar", "histogram", "table", "sequence", "paragraph"])
def test_fragments_parse_as_xml_and_text_round_trips(name: str) -> None:
    root = ET.fromstring(every_output()[name])
    texts = all_text(root) + [v for el in root.iter() for v in el.attrib.values()]
    assert any(EVIL in t for t in texts)  # escaped exactly once: the parser gets the original back


def test_characters_xml_forbids_are_replaced() -> None:
    bad = "nul\x00 bell\x07 esc\x1b surrogate\udcff"
    root = parse(charts.line_chart(title=bad, x_labels=[bad], series={bad: [1.0]}, y_label=bad))
    assert "nul\ufffd bell\ufffd esc\ufffd surrogate\ufffd" in all_text(root)[0]
    ET.fromstring(report.highlighted_sequence([bad, "\n", ""], masked=[True, False, False]))


# --- page ----------------------------------------------------------------------------------

class _Collector(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.tags: list[str] = []
        self.attrs: list[tuple[str, str | None]] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append(tag)
        self.attrs.extend(attrs)


def test_page_is_self_contained() -> None:
    html = every_output()["page"]
    assert html.startswith("<!DOCTYPE html>")
    for needle in (
        "http://",
        "https://",
        "//",
        "<script",
        "url(",
        "@import",
        "<link",
        "<img",
        "<iframe",
    ):
        assert needle not in html, needle
    collector = _Collector()
    collector.feed(html)
    names = {name for name, _ in collector.attrs}
    assert not names & {"src", "srcset", "action", "onload", "onclick", "onerror"}
    assert all(value.startswith("#") for name, value in collector.attrs if name == "href" and value)
    assert collector.tags.count("section") == 7  # six bodies + notes
    assert "style" in collector.tags and "script" not in collector.tags
    assert "prefers-color-scheme:dark" in html and "@media print" in html


def test_page_headings_notes_and_contents() -> None:
    html = report.page(title="Audit", subtitle="sample", notes=["one note"],
                       sections=[("A", "<p>x</p>"), ("B", "<p>y</p>"), ("C", "<p>z</p>")])
    assert "<h1>Audit</h1>" in html and '<p class="subtitle">sample</p>' in html
    assert html.count('<a href="#section-') == 3 and 'id="section-3"' in html
    assert "<li>one note</li>" in html
    short = report.page(title="Audit", sections=[("A", "<p>x</p>")])
    assert "<nav" not in short and "Notes" not in short


# --- table ---------------------------------------------------------------------------------

def test_table_formats_numbers_as_asked() -> None:
    out = report.table(
        headers=["name", "count", "rate", "score", "flag", "missing"],
        rows=[["a", 1234567, 0.1534, 3.14159, True, None], ["b", 12, 0.5, 2.0, False, None]],
        numeric_format=".2f",
        column_formats={"rate": ".1%"},
    )
    root = ET.fromstring(out)
    cells = [
        ["".join(td.itertext()) for td in tr.iter("td")]
        for tr in root.iter("tr")
        if list(tr.iter("td"))
    ]
    assert cells == [
        ["a", "1,234,567", "15.3%", "3.14", "yes", ""],
        ["b", "12", "50.0%", "2.00", "no", ""],
    ]
    numeric = [
        td.get("class")
        for td in next(tr for tr in root.iter("tr") if list(tr.iter("td"))).iter("td")
    ]
    assert numeric == ["name", "num", "num", "num", None, None]  # the row's name never wraps
    heads = [th.get("class") for th in root.iter("th")]
    assert heads == [None, "num", "num", "num", None, None]
    templated = report.table(headers=["x"], rows=[[0.5]], numeric_format="{:.0%}")
    assert ">50%<" in templated
    called = report.table(headers=["x"], rows=[[2.0]], numeric_format=lambda v: f"~{v:g}")
    assert ">~2<" in called
    # Headers may break after a slash, so a narrow number column keeps a narrow header.
    slashed = report.table(headers=["tokens/word"], rows=[[1.5]])
    assert "tokens/<wbr/>word" in slashed
    assert "".join(ET.fromstring(slashed).find(".//th").itertext()) == "tokens/word"


def test_definitions_and_grid_are_escaped_markup() -> None:
    root = ET.fromstring(report.definitions([(EVIL, EVIL)]))
    assert [el.tag for el in root] == ["dt", "dd"] and all(el.text == EVIL for el in root)
    assert report.grid(["<p>a</p>", "<p>b</p>"]) == '<div class="grid"><p>a</p><p>b</p></div>'


def test_table_formats_numpy_numbers() -> None:
    np = pytest.importorskip("numpy")
    out = report.table(
        headers=["n", "x"], rows=[[np.int64(5000), np.float32(0.25)]], numeric_format=".3f"
    )
    assert ">5,000<" in out and ">0.250<" in out


# --- highlighted sequence ------------------------------------------------------------------

def test_masked_units_are_boxed_together_with_originals() -> None:
    out = report.highlighted_sequence(
        ["[CLS]", "the", "[MASK]", "[MASK]", "met", "[MASK]", "[MASK]", "[SEP]"],
        masked=[False, False, True, True, False, True, True, False],
        unit_ids=[-1, 0, 1, 1, 2, 3, 4, -1],
        originals=["[CLS]", "the", "city", "council", "met", "late", "today", "[SEP]"])
    root = ET.fromstring(out)
    marks = list(root.iter("mark"))
    assert len(marks) == 3  # units 1 (two tokens), 3 and 4 (adjacent but separate units)
    assert [len([s for s in m if "m" in s.get("class", "").split()]) for m in marks] == [2, 1, 1]
    assert marks[0].get("title") == "masked unit 1, 2 tokens: city council"
    assert [s.text for s in marks[0].iter("span") if s.get("class") == "o"] == ["city", "council"]
    dimmed = [s.text for s in root.iter("span") if s.get("class") == "t sp"]
    assert dimmed == ["[CLS]", "[SEP]"]


def test_without_unit_ids_each_masked_token_is_its_own_box() -> None:
    root = ET.fromstring(report.highlighted_sequence(["a", "b", "c"], masked=[True, True, False]))
    assert len(list(root.iter("mark"))) == 2


# --- determinism and writing ---------------------------------------------------------------

def test_output_is_deterministic_bytes() -> None:
    first = every_output()["page"].encode()
    assert every_output()["page"].encode() == first
    code = ("import sys; sys.path.insert(0, sys.argv[1]); import test_report as t; "
            "sys.stdout.buffer.write(t.every_output()['page'].encode())")
    env = dict(os.environ, PYTHONHASHSEED="12345")
    other = subprocess.run([sys.executable, "-c", code, str(Path(__file__).parent)], env=env,
                           capture_output=True, check=True, cwd=Path(__file__).parent.parent).stdout
    assert other == first


def test_write_page_is_atomic(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    target = tmp_path / "out" / "audit.html"
    html = report.page(title="caf\u00e9 \u2713", sections=[])
    assert report.write_page(target, html) == target
    assert target.read_text(encoding="utf-8") == html
    assert sorted(p.name for p in target.parent.iterdir()) == ["audit.html"]

    def broken(src: str, dst: object) -> None:
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "replace", broken)
    with pytest.raises(MaskprepError, match="audit.html: cannot write the report"):
        report.write_page(target, "<p>new</p>")
    assert target.read_text(encoding="utf-8") == html  # the old file is untouched
    assert sorted(p.name for p in target.parent.iterdir()) == ["audit.html"]  # no temp file left


def test_write_page_into_unwritable_place_is_a_user_error(tmp_path: Path) -> None:
    blocker = tmp_path / "file"
    blocker.write_text("x")
    with pytest.raises(MaskprepError, match="cannot write the report"):
        report.write_page(blocker / "audit.html", "<p>x</p>")


def test_crowded_x_labels_turn_stay_inside_and_thin_out() -> None:
    import math

    labels = [f"category number {i} with a long label" for i in range(12)]
    root = parse(
        charts.bar_chart(title="t", categories=labels, series={"s": [1.0] * 12}, y_label="y")
    )
    turned = [t for t in root.iter("text") if "rotate(-40" in t.get("transform", "")]
    assert len(turned) == 12
    for t in turned:
        shown = "".join(x for x in t.itertext() if x not in labels)  # drop tooltip text
        assert float(t.get("x", 0)) - frame.text_width(shown, 11) * math.cos(math.radians(40)) >= 0
    many = [f"label {i}" for i in range(120)]
    root = parse(
        charts.line_chart(
            title="t", x_labels=many, series={"s": [float(i) for i in range(120)]}, y_label="y"
        )
    )
    drawn = [t.text for t in root.iter("text") if t.text in set(many)]
    assert 10 <= len(drawn) < 120 and drawn[0] == "label 0"
    height = float(root.get("height", 0))
    assert all(float(t.get("y", 0)) < height for t in root.iter("text"))
