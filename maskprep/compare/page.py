"""The compare.html page: what each masking strategy hides, side by side.

`render_compare_html` turns the JSON of `compare.compare_strategies` into one
self-contained page built with `maskprep.report.html` and `maskprep.report.charts`: a
summary table, a grid of small bar charts, one per measure (strategies side
by side), targets by word-frequency band against the band's share of all
tokens (bands without tokens left out), unit-length
and targets-per-sequence histograms, the replacement mix, and example
sequences with every masked unit highlighted (the tokenizer's tokens,
originals under masked ones). All corpus text goes through `report`'s
escaping (charts use it too). A strategy has one colour on every chart; the
"all maskable tokens" reference is grey. This module computes no statistic:
every number shown is read from the comparison's JSON.
"""

from __future__ import annotations

import html
from typing import Any, Sequence

from ..report import charts
from ..report import html as report
from ..wording import name_files
__all__ = ["render_compare_html", "length_bins"]

_MEASURES = (  # (key path, chart title, axis label, percent)
    (("masking_rate", "corpus"), "Actual masking rate (targets / maskable tokens)", "rate", True),
    (("multiword_share",), "Share of targets inside multi-word units", "share of targets", True),
    (
        ("within_word_leakage",),
        "Within-word leakage: targets whose word keeps a visible token",
        "share of targets",
        True,
    ),
    (
        ("within_unit_leakage",),
        "Within-unit leakage: targets whose vocabulary unit keeps a visible token",
        "share of targets",
        True,
    ),
    (
        ("easy_target_share",),
        "Easy targets: punctuation or the sample's most frequent words",
        "share of targets",
        True,
    ),
    (("unit_lengths", "mean_tokens"), "Mean length of masked units in tokens", "tokens", False),
    (("unit_lengths", "mean_words"), "Mean length of masked units in words", "words", False),
    (("targets_per_sequence", "mean"), "Mean targets per sequence", "targets", False),
)


_ALL_TOKENS = "all maskable tokens"
_SMALL_W, _SMALL_H = 400.0, 170.0  # the one-measure charts, side by side in a grid


def _get(figures: dict[str, Any], path: Sequence[str]) -> Any:
    value: Any = figures
    for key in path:
        value = value.get(key) if isinstance(value, dict) else None
    return value


def length_bins(hists: Sequence[dict[str, int]], *, cap: int) -> tuple[list[str], list[list[int]]]:
    """Bins "1".."cap-1" and "cap+" over histograms keyed by length (as strings).

    >>> length_bins([{"1": 5, "2": 1, "7": 2}], cap=3)
    (['1', '2', '3+'], [[5, 1, 2]])
    """
    longest = max((int(k) for h in hists for k in h), default=1)
    top = max(1, min(cap, longest))
    labels = [str(k) for k in range(1, top)] + [f"{top}+" if longest > top else str(top)]
    rows = []
    for h in hists:
        row = [0] * top
        for k, v in h.items():
            row[min(int(k), top) - 1] += int(v)
        rows.append(row)
    return labels, rows


def _value_bins(
    hists: Sequence[dict[str, int]], *, most: int = 30
) -> tuple[list[str], list[list[int]]]:
    """Integer bins from the smallest to the largest value seen, in ranges when there are many."""
    values = [int(k) for h in hists for k in h]
    lo, hi = (min(values), max(values)) if values else (0, 0)
    width = max(1, -(-(hi - lo + 1) // most))
    starts = list(range(lo, hi + 1, width))
    labels = [str(a) if width == 1 else f"{a}-{min(a + width - 1, hi)}" for a in starts]
    rows = []
    for h in hists:
        row = [0] * len(starts)
        for k, v in h.items():
            row[(int(k) - lo) // width] += int(v)
        rows.append(row)
    return labels, rows


def _summary(doc: dict[str, Any], order: list[str]) -> str:
    """Two tables, so each fits the page: what is hidden, then what leaks and how targets look."""
    pct = "{:.2%}"
    hidden, leaks = [], []
    for name in order:
        f = doc["strategies"][name]
        hidden.append(
            [
                name,
                f["targets"],
                f["masking_rate"]["corpus"],
                f["unit_lengths"]["mean_tokens"],
                f["unit_lengths"]["mean_words"],
                f["multiword_share"],
                f["targets_per_sequence"]["mean"],
            ]
        )
        leaks.append(
            [
                name,
                f["within_word_leakage"],
                f["within_unit_leakage"],
                f["easy_target_share"],
                f["mix"]["mask"],
                f["mix"]["random"],
                f["mix"]["keep"],
            ]
        )
    first = report.table(
        headers=[
            "strategy",
            "targets",
            "masking rate",
            "tokens/unit",
            "words/unit",
            "multi-word share",
            "targets/sequence",
        ],
        rows=hidden,
        column_formats={
            "masking rate": pct,
            "multi-word share": pct,
            "tokens/unit": ".2f",
            "words/unit": ".2f",
            "targets/sequence": ".1f",
        },
        caption=f"What is hidden: {doc['sample']['sequences']:,} sequences, "
        "the same for every strategy",
    )
    shares = ["within-word leakage", "within-unit leakage", "easy targets", "shown as mask",
              "random", "kept"]
    second = report.table(
        headers=["strategy", *shares],
        rows=leaks,
        column_formats={h: pct for h in shares},
        caption="What stays visible and how targets are shown (shares of targets); "
        "an empty cell was not measured",
    )
    return first + second


def _bands(doc: dict[str, Any], order: list[str], slots: dict[str, int]) -> str:
    first = doc["strategies"][order[0]]["targets_by_band"]
    shown = [i for i, b in enumerate(first) if b["tokens"]]  # the same sample for every strategy
    labels = [first[i]["band"] for i in shown]
    series: dict[str, list[float | None]] = {_ALL_TOKENS: [first[i]["token_share"] for i in shown]}
    for name in order:
        band = doc["strategies"][name]["targets_by_band"]
        series[name] = [band[i]["target_share"] for i in shown]
    chart = charts.bar_chart(title="Targets by word-frequency band (ranks counted in the sample)",
                             categories=labels, series=series, y_label="share", percent=True,
                             slots={_ALL_TOKENS: -1, **slots})
    rows = []
    for i in shown:
        b = first[i]
        rows.append([b["band"], b["types"], b["tokens"], b["token_share"]]
                    + [doc["strategies"][n]["targets_by_band"][i]["rate"] for n in order])
    empty = [b["band"] for i, b in enumerate(first) if i not in shown]
    table = report.table(
        headers=["band", "word types", "maskable tokens", "share of tokens"]
        + [f"rate: {n}" for n in order],
        rows=rows,
        column_formats={h: "{:.2%}" for h in ["share of tokens"] + [f"rate: {n}" for n in order]},
        caption="Masking rate within each band; a strategy that spreads its "
        "budget evenly masks every band at about the asked rate"
        + (f". No tokens in {', '.join(empty)}, left out." if empty else ""),
    )
    return chart + table


def _histograms(doc: dict[str, Any], order: list[str], slots: dict[str, int]) -> str:
    figs = [doc["strategies"][n] for n in order]
    out = []
    for what, cap in (("tokens", 13), ("words", 11)):
        labels, rows = length_bins([f["unit_lengths"][what] for f in figs], cap=cap)
        out.append(
            charts.histogram_chart(
                title=f"Length of masked units in {what}",
                bins=labels,
                series=dict(zip(order, rows)),
                y_label="share of masked units",
                normalize=True,
                x_label=what,
                slots=slots,
            )
        )
    labels, rows = _value_bins([f["targets_per_sequence"]["histogram"] for f in figs])
    out.append(charts.histogram_chart(title="Targets per sequence", bins=labels,
                                      series=dict(zip(order, rows)), y_label="share of sequences",
                                      normalize=True, x_label="targets", slots=slots))
    return "".join(out)


def _examples(
    doc: dict[str, Any], order: list[str], examples: Sequence[dict[str, Any]], tokenizer: Any
) -> str:
    if not examples:
        return report.paragraph("No sequences to show.")
    tok = tokenizer.tokenizer

    def pieces(ids: list[int]) -> list[str]:
        return [tok.id_to_token(int(i)) or "?" for i in ids]

    out = [
        report.paragraph(
            "The same sequences under each strategy. Highlighted boxes are masked units "
            "(one box per unit), with the original token under each target; a target shown "
            "unchanged or as a random token is highlighted too. Padding is left out."
        )
    ]
    for ex in examples:
        length = sum(ex["attention_mask"])
        original = ex["input_ids"][:length]
        seq = ex["sequence_id"]
        out.append(f"<h3>{html.escape(f'Sequence {seq >> 32}:{seq & 0xFFFFFFFF}')}</h3>")
        out.append(report.paragraph("Text: " + tok.decode(original, skip_special_tokens=True)))
        for name in order:
            row = ex["strategies"].get(name)
            if row is None:
                continue
            labels = row["labels"][:length]
            masked = [lab != -100 for lab in labels]
            out.append(report.paragraph(f"{name}: {sum(masked)} targets"))
            out.append(
                report.highlighted_sequence(
                    pieces(row["input_ids"][:length]),
                    masked=masked,
                    unit_ids=row["unit_ids"][:length],
                    originals=pieces(original),
                )
            )
    return "".join(out)


def render_compare_html(
    doc: dict[str, Any], *, examples: Sequence[dict[str, Any]], tokenizer: Any
) -> str:
    """The whole page of a comparison, as HTML text.

    ``write_page("cmp/compare.html", render_compare_html(doc, examples=ex, tokenizer=info))``
    """
    order = list(doc["order"])
    slots = {name: k for k, name in enumerate(order)}  # one colour per strategy on every chart
    measure_charts = []
    for path, title, axis, percent in _MEASURES:
        values = {n: [_get(doc["strategies"][n], path)] for n in order}
        if all(v[0] is None for v in values.values()):
            continue
        measure_charts.append(charts.bar_chart(title=title, categories=[title.split(":")[0]],
                                               series=values, y_label=axis, percent=percent,
                                               name_bars=True, slots=slots, width=_SMALL_W,
                                               plot_height=_SMALL_H))
    mix = charts.bar_chart(
        title="How targets are shown",
        categories=["mask token", "random token", "unchanged"],
        series={
            n: [doc["strategies"][n]["mix"][k] for k in ("mask", "random", "keep")] for n in order
        },
        y_label="share of targets",
        percent=True,
        slots=slots,
    )
    sections = [
        ("Summary", _summary(doc, order)),
        ("Measures, strategy by strategy", report.grid(measure_charts)),
        ("Targets by word frequency", _bands(doc, order, slots)),
        ("Unit lengths and targets per sequence", _histograms(doc, order, slots)),
        ("Replacement mix", mix),
        ("Example sequences", _examples(doc, order, examples, tokenizer)),
    ]
    skipped = [f"{name}: {why}" for name, why in doc.get("skipped", {}).items()]
    units = doc.get("units")
    subtitle = (
        f"Corpus: {name_files(doc['corpus']['files'], 5)}. Tokenizer: {doc['tokenizer']['name']} "
        f"({doc['tokenizer']['vocab_size']:,} tokens)."
        + (
            f" Units: {units['path']} ({units['units']:,} units, {units['measure']})."
            if units
            else ""
        )
    )
    return report.page(title="Masking strategies compared", subtitle=subtitle, sections=sections,
                       notes=list(doc["notes"]) + skipped)
