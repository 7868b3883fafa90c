"""Outside references for unit lists: WordNet's multi-word lemmas and real English prose.

- WordNet 3.0 as installed by the Debian package ``wordnet-base`` (files
  ``index.noun``, ``index.verb``, ``index.adj``, ``index.adv`` under
  /usr/share/wordnet): every lemma with an underscore is a multi-word
  expression (*vice_versa*, *garbage_collector*, *at_least*). A lexicon nobody
  on this project wrote, used to score unit lists (the share of units that are
  WordNet lemmas).
- Prose from the HTML of the Python documentation installed by the Debian
  package ``python3.11-doc`` (the text of every ``<p>`` element: no code, no
  navigation), one paragraph per line.

Used by tests/test_unit_precision.py and scripts/unit_precision.py.
"""

from __future__ import annotations

import html.parser
import re
from pathlib import Path
from typing import Any, Iterable, Sequence

WORDNET_DIR = Path("/usr/share/wordnet")
PYTHON_DOC_DIRS = sorted(Path("/usr/share/doc").glob("python3.*/html"))


def wordnet_multiword_lemmas(root: Path = WORDNET_DIR) -> list[str]:
    """Sorted multi-word lemmas of WordNet, words joined by one space: ``'vice versa'``.

    Empty when WordNet is not installed.
    """
    out: set[str] = set()
    for pos in ("noun", "verb", "adj", "adv"):
        path = root / f"index.{pos}"
        if not path.is_file():
            return []
        with open(path, encoding="utf-8") as fh:
            for line in fh:
                if line.startswith(" "):  # the licence header lines
                    continue
                lemma = line.split(" ", 1)[0]
                if "_" in lemma:
                    out.add(lemma.replace("_", " "))
    return sorted(out)


def lemma_word_keys(info: Any, lemmas: Sequence[str]) -> set[tuple[int, ...]]:
    """The word-key rows of the lemmas under a tokenizer (the words a unit would need).

    Each lemma is read by the tokenizer exactly as corpus text is, so it
    matches a unit when their words are the same (the tokenizer's case folding
    and word splitting apply to both). Lemmas with punctuation (*rock 'n' roll*,
    *12-tone music*) can never be units and are left out.
    """
    from maskprep.tokenizer.encoding import WORD

    batch = info.encode(list(lemmas))
    out = set()
    for d in range(batch.num_docs):
        start, stop = int(batch.doc_offsets[d]), int(batch.doc_offsets[d + 1])
        if stop - start >= 2 and (batch.word_kinds[start:stop] == WORD).all():
            out.add(tuple(batch.word_keys[start:stop].tolist()))
    return out


def precision_at(
    word_keys: Iterable[Any], lexicon: set[tuple[int, ...]], cuts: Sequence[int]
) -> list[float | None]:
    """Share of the first `cut` units (word-key arrays, best first) that are in `lexicon`; None
    where the list is shorter than the cut."""
    hits = [tuple(int(k) for k in row) in lexicon for row in word_keys]
    return [sum(hits[:c]) / c if len(hits) >= c else None for c in cuts]


class _Paragraphs(html.parser.HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.depth = 0
        self.buf: list[str] = []
        self.out: list[str] = []

    def handle_starttag(self, tag: str, attrs: Any) -> None:
        if tag == "p":
            self.depth += 1

    def handle_endtag(self, tag: str) -> None:
        if tag == "p" and self.depth:
            self.depth -= 1
            if not self.depth:
                text = re.sub(r"\s+", " ", "".join(self.buf)).strip()
                self.buf = []
                if text:
                    self.out.append(text)

    def handle_data(self, data: str) -> None:
        if self.depth:
            self.buf.append(data)


def html_prose(path: Path) -> list[str]:
    """The text of each ``<p>`` element of an HTML file, whitespace collapsed."""
    parser = _Paragraphs()
    parser.feed(path.read_text(encoding="utf-8", errors="replace"))
    parser.close()
    return parser.out


def python_doc_prose(out: Path, root: Path | None = None) -> Path | None:
    """Write the prose of the installed Python HTML documentation to `out`, one paragraph a
    line; None when no python3.X-doc package is installed."""
    if root is None:
        if not PYTHON_DOC_DIRS:
            return None
        root = PYTHON_DOC_DIRS[-1]
    files = sorted(root.rglob("*.html"))
    if not files:
        return None
    with open(out, "w", encoding="utf-8") as fh:
        for f in files:
            for para in html_prose(f):
                fh.write(para + "\n")
    return out


PLAIN = {"edge_words": 0, "fragment_share": 0.0}
"""build_units options that turn both filters off: a measure's plain ranking."""

RANKINGS: list[tuple[str, dict[str, Any]]] = [
    ("llr, edge words + fragments (the default)", {"measure": "llr"}),
    ("llr, edge words only", {"measure": "llr", "fragment_share": 0.0}),
    ("llr, fragments only", {"measure": "llr", "edge_words": 0}),
    ("pmi, edge words + fragments", {"measure": "pmi"}),
    ("npmi, edge words + fragments", {"measure": "npmi"}),
    ("t, edge words + fragments", {"measure": "t"}),
    ("pmi (plain)", {"measure": "pmi", **PLAIN}),
    ("npmi (plain)", {"measure": "npmi", **PLAIN}),
    ("llr (plain)", {"measure": "llr", **PLAIN}),
    ("t (plain)", {"measure": "t", **PLAIN}),
    ("pmi-naive (plain)", {"measure": "pmi-naive", **PLAIN}),
]
"""The rankings of the precision table: label and ``build_units`` options."""


def wordnet_precision(
    counts_dir: Path,
    rankings: Sequence[tuple[str, dict[str, Any]]] = RANKINGS,
    cuts: Sequence[int] = (100, 500, 2000),
) -> list[tuple[str, list[float | None], int]]:
    """For each ranking: (label, WordNet precision at each cut, units listed), units built from
    `counts_dir` at the counts' own min count."""
    from maskprep.tokenizer.encoding import load_tokenizer
    from maskprep.units.select import build_units

    lexicon = lemma_word_keys(
        load_tokenizer(counts_dir / "tokenizer.json"), wordnet_multiword_lemmas()
    )
    out = []
    for label, options in rankings:
        vocab = build_units(counts_dir, top=max(cuts), quiet=True, **options)
        out.append((label, precision_at(vocab.word_keys, lexicon, cuts), len(vocab)))
    return out
