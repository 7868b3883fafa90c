"""The audit's terminal summary and its page (audit.html), both read from the audit's JSON.

Both show the same bands (empty ones left out), the same definitions and the
same list of fragmented words (`words.fragmented_words`). It computes no
figure; every number comes from `measure`.
"""

from __future__ import annotations

import textwrap
from collections.abc import Sequence
from typing import Any

from .._tables import format_table
from ..corpus.sample import describe_sample
from ..report import charts
from ..report import html as report
from ..wording import name_files
from .words import JOIN, PARTIAL, SPACE_MARK, fragmented_words

#: What each column means, for the page (term, definition) and, shortened, the terminal legend.
DEFINITIONS = (
    ("tokens/word", "Tokens per word occurrence, over words that are not punctuation-only."),
    (
        "tokens/word (all)",
        "Tokens per word occurrence over every word: punctuation and special tokens included.",
    ),
    (
        "split share",
        "Share of word occurrences (punctuation-only words left out) that take 2 or more tokens.",
    ),
    (
        "tokens/char",
        "Tokens per character of the words' text (every word, whitespace not counted); lower "
        "means longer tokens.",
    ),
    (
        "unknown rate",
        "Share of all tokens that are the unknown token (text the vocabulary cannot write).",
    ),
    (
        "continuation share",
        "Share of all tokens that continue a word: every token of a word but its first.",
    ),
    (
        "words, word types",
        "Word occurrences and distinct words (punctuation-only words left out). A word is a "
        "piece of the tokenizer's own pre-tokenization, so it follows the tokenizer's "
        "casing and splitting.",
    ),
    (
        "frequency band",
        "Word types ranked by their count in this corpus: top 1k is the 1,000 most frequent, "
        "1k-10k the next 9,000, and so on. Bands with no words are left out.",
    ),
    (
        "pieces",
        f"The tokens of a word decoded to text, separated by {JOIN}; {SPACE_MARK} is a leading "
        f"space that belongs to the token; {PARTIAL} is a token holding only part of a "
        "character's bytes "
        "(the character is shown in the token that completes it).",
    ),
    (
        "forms",
        "Byte-level and metaspace vocabularies write a word one way after a space and another way "
        "without one (after a bracket or quote). The list shows the word's most frequent form and "
        "its tokens; share of uses is that form's share of the word's occurrences; tokens per use "
        "averages "
        "over every form.",
    ),
)

_LEGEND = (
    "tok/word: tokens per word, punctuation-only words left out; tok/word all: the same over "
    "every word; split: share of words in 2+ tokens; tok/char: tokens per character; unk: "
    "unknown tokens "
    "among all tokens; cont.: continuation tokens (every token of a word but its first) among all "
    "tokens."
)
_CROSSING = (" crossing: tokens running past the end of the word they start in (they join that "
             "word), among all tokens.")


def visible_bands(doc: dict[str, Any]) -> list[int]:
    """Indices of the bands that hold words for at least one tokenizer."""
    count = len(doc["bands"])
    return [
        i for i in range(count) if any(r["bands"][i]["occurrences"] for r in doc["tokenizers"])
    ]


def _word_text(w: dict[str, Any]) -> str:
    share = f", {w['share']:.0%} of uses" if len(w["forms"]) > 1 else ""
    return f"{w['word']} ({w['pieces']}{share})"


def _segmented(doc: dict[str, Any]) -> bool:
    """Whether the words are not the tokenizer's (then boundary-crossing tokens are shown)."""
    return bool(doc.get("words", {}).get("definition", "tokenizer") != "tokenizer")


def words_line(doc: dict[str, Any]) -> str:
    return "words: " + doc.get("words_label", "tokenizer (its pre-tokenization)")


def format_audit_table(doc: dict[str, Any]) -> str:
    """The terminal summary: a row per tokenizer, a legend, tokens per word by band, word lists."""
    crossing = _segmented(doc)
    rows = [
        ("tokenizer", "vocab", "tok/word", "tok/word all", "split", "tok/char", "unk", "cont.")
        + (("crossing",) if crossing else ())
    ]
    for r in doc["tokenizers"]:
        rows.append(
            (
                r["name"],
                f"{r['vocab_size']:,}",
                f"{r['tokens_per_word']:.3f}",
                f"{r['tokens_per_word_all']:.3f}",
                f"{r['split_share']:.1%}",
                f"{r['tokens_per_char']:.3f}",
                f"{r['unk_rate']:.2%}",
                f"{r['continuation_share']:.1%}",
            )
            + ((f"{r.get('boundary_crossing_share', 0.0):.2%}",) if crossing else ())
        )
    note = doc["notes"][0] if doc.get("notes") else ""
    out = [
        *([textwrap.fill(describe_sample(doc["sample"]), width=100)] if doc.get("sample") else []),
        words_line(doc),
        _format_rows(rows),
        textwrap.fill(_LEGEND + (_CROSSING if crossing else ""), width=100),
    ]
    if crossing or "written without spaces" in note:
        out.append(textwrap.fill("note: " + note, width=100))
    out += [
        "",
        "tokens per word by frequency band of word types",
    ]
    shown = visible_bands(doc)
    brow = [("tokenizer",) + tuple(doc["bands"][i] for i in shown)]
    for r in doc["tokenizers"]:
        bands = [r["bands"][i] for i in shown]
        brow.append(
            (r["name"],)
            + tuple(
                "-" if b["tokens_per_word"] is None else f"{b['tokens_per_word']:.3f}"
                for b in bands
            )
        )
    out.append(_format_rows(brow))
    hidden = [b for i, b in enumerate(doc["bands"]) if i not in shown]
    if hidden:
        out.append(f"(no words in band{'s' if len(hidden) > 1 else ''} {', '.join(hidden)})")
    for r in doc["tokenizers"][:3]:
        worst = fragmented_words(r, 8)
        if worst:
            out.append(
                f"\nmost fragmented frequent words ({r['name']}): "
                + ", ".join(_word_text(w) for w in worst)
            )
    return "\n".join(out)


def _format_rows(rows: Sequence[tuple[str, ...]]) -> str:
    return format_table(rows)


def _words_table(r: dict[str, Any], frequent: int | None) -> str:
    worst = fragmented_words(r)
    within = (
        f"the {frequent:,} most frequent word types"
        if frequent
        else "the most frequent word types"
    )
    if not worst:
        return report.paragraph(
            f"No word among {within} takes 2 or more tokens in its most frequent form."
        )
    several = any(len(w["forms"]) > 1 for w in worst)
    headers = ["word", "frequency rank", "count", "tokens", "pieces"]
    if several:
        headers += ["share of uses", "tokens per use", "other forms"]
    rows = []
    for w in worst:
        row: list[object] = [w["word"], w["rank"], w["count"], w["tokens"], w["pieces"]]
        if several:
            others = "; ".join(f"{f['pieces'] or '?'} ({f['share']:.0%})" for f in w["forms"][1:])
            row += [w["share"], w["tokens_per_use"], others]
        rows.append(row)
    return report.table(
        headers=headers,
        rows=rows,
        column_formats={"share of uses": "{:.0%}", "tokens per use": ".2f"},
        caption=f"Among {within}: words whose most frequent form takes 2+ tokens",
    )


def render_audit_html(doc: dict[str, Any]) -> str:
    """The audit page: charts by band (one colour per tokenizer), tables, definitions, words."""
    toks = doc["tokenizers"]
    shown = visible_bands(doc)
    labels = [doc["bands"][i] for i in shown]
    slots = {r["name"]: k for k, r in enumerate(toks)}
    chart = charts.line_chart(
        title="Tokens per word by frequency band of word types",
        x_labels=labels,
        series={r["name"]: [r["bands"][i]["tokens_per_word"] for i in shown] for r in toks},
        y_label="tokens per word",
        y_min=1.0,
        slots=slots,
    )
    split_chart = charts.bar_chart(
        title="Share of word occurrences split into 2+ tokens, by band",
        categories=labels,
        series={r["name"]: [r["bands"][i]["split_share"] for i in shown] for r in toks},
        y_label="split share",
        percent=True,
        slots=slots,
    )
    crossing = _segmented(doc)
    summary = report.table(
        headers=[
            "tokenizer",
            "vocab size",
            "tokens/word",
            "tokens/word (all)",
            "split share",
            "tokens/char",
            "unknown rate",
            "continuation share",
            *(["boundary-crossing tokens"] if crossing else []),
            "words",
            "word types",
        ],
        rows=[
            [
                r["name"],
                r["vocab_size"],
                r["tokens_per_word"],
                r["tokens_per_word_all"],
                r["split_share"],
                r["tokens_per_char"],
                r["unk_rate"],
                r["continuation_share"],
                *([r.get("boundary_crossing_share", 0.0)] if crossing else []),
                r["words"],
                r["word_types"],
            ]
            for r in toks
        ],
        column_formats={
            "split share": "{:.1%}",
            "unknown rate": "{:.2%}",
            "continuation share": "{:.1%}",
            "boundary-crossing tokens": "{:.2%}",
        },
    )
    band_rows = []
    for r in toks:
        for b in (r["bands"][i] for i in shown):
            band_rows.append(
                [
                    r["name"],
                    b["band"],
                    b["types"],
                    b["occurrences"],
                    b["occurrence_share"],
                    b["tokens_per_word"],
                    b["split_share"],
                ]
            )
    bands_table = report.table(
        headers=[
            "tokenizer",
            "band",
            "types",
            "occurrences",
            "share of words",
            "tokens/word",
            "split share",
        ],
        rows=band_rows,
        column_formats={"share of words": "{:.1%}", "split share": "{:.1%}"},
    )
    frequent = doc.get("fragmented_list", {}).get("frequent_types")
    blocks = [
        f"<div><h3>{report.esc(r['name'])}</h3>{_words_table(r, frequent)}</div>" for r in toks
    ]
    sections = [
        ("Tokens per word by frequency band", chart + split_chart),
        ("Summary", summary),
        ("What the figures mean", report.definitions(DEFINITIONS)),
        ("By frequency band", bands_table),
        ("Most fragmented frequent words", '<div class="blocks">' + "".join(blocks) + "</div>"),
    ]
    hidden = [b for i, b in enumerate(doc["bands"]) if i not in shown]
    notes = list(doc["notes"]) + (
        [
            f"No words in band{'s' if len(hidden) > 1 else ''} {', '.join(hidden)}, "
            "so charts and tables leave it out."
        ]
        if hidden
        else []
    )
    return report.page(
        title="Vocabulary fragmentation audit",
        subtitle="Corpus: " + name_files(doc["corpus"], 5) + "; " + words_line(doc)
        + (" " + describe_sample(doc["sample"]) if doc.get("sample") else ""),
        sections=sections,
        notes=notes,
    )
