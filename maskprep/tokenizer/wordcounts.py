"""Reproducible WordPiece training: chunk counts and a fixed continuation alphabet.

Why. The `tokenizers` WordPiece trainer (a BPE trainer with the ``##``
continuation prefix) keeps its word counts in a hash map whose iteration order
changes from process to process. It gives each single-character continuation
token (``##a``, ``##k``, ...) its id the first time it meets that character
inside a word while walking that map, so those ids vary between runs; and it
breaks ties between equally frequent merge candidates by the ids of the pair.
Equal counts are common in any corpus, so two runs on the same text learnt
different tokens (seen: ``##iw kittiw`` in one run, ``##iwake ##wake`` in the
next). Byte-level BPE has no prefix: all its starting ids come from the
sorted alphabet, and it is reproducible as it is.

The fix. Before training, the continuation characters of the corpus are
found (every character that stands after the first one in a word) and their
``##`` tokens are handed to the trainer, in sorted order, after the special
tokens, so they take fixed ids before the trainer walks its map. Those
tokens are ones the trainer would have added anyway, so the vocabulary is the
same kind of vocabulary, only with ties always broken the same way. They are
then removed from the added-token list (`drop_added`), where the trainer put
them as special tokens: they stay ordinary vocabulary entries.

Counting. To read the corpus once, documents are split on the four
whitespace characters that the BERT normaliser always turns into spaces, and
the chunks are counted in C (`collections.Counter`). The normaliser and the
pre-tokenizer then run once per distinct chunk (both work character by
character, so a chunk gives the same words alone as inside its document),
and the trainer, with a plain whitespace split in place of the tokenizer's
own steps, is fed each distinct word repeated by its count: exactly the word
counts that the documents give. Memory grows with the number of distinct
chunks.
"""

from __future__ import annotations

import collections
import json
import re
from typing import Any, Iterable, Iterator

PREFIX = "##"
# Characters the BERT normaliser maps to a space whatever surrounds them. Other whitespace
# is left inside chunks: some of it (vertical tab, form feed) is removed by the normaliser
# instead, joining its neighbours, so splitting there would change the words.
_SPLIT = re.compile(r"[ \t\n\r]+")
_REPEAT = 10_000  # at most this many copies of a chunk in one string handed to the trainer


def chunk_counts(texts: Iterable[str]) -> collections.Counter[str]:
    """Counts of the chunks of the raw documents between spaces, tabs and line breaks."""
    counts: collections.Counter[str] = collections.Counter()
    split = _SPLIT.split
    for doc in texts:
        counts.update(split(doc))
    counts.pop("", None)
    return counts


def word_counts(tok: Any, chunks: collections.Counter[str]) -> collections.Counter[str]:
    """Counts of the words of `tok` (its normaliser, then pre-tokenizer) in the counted chunks.

    The normaliser and pre-tokenizer run once per distinct chunk.
    """
    norm, pre = tok.normalizer, tok.pre_tokenizer
    words: collections.Counter[str] = collections.Counter()
    for chunk, n in chunks.items():
        for word, _ in pre.pre_tokenize_str(norm.normalize_str(chunk)):
            words[word] += n
    return words


def continuation_tokens(words: Iterable[str]) -> list[str]:
    """The sorted ``##c`` tokens of every character c found after the first one in a word."""
    found: set[str] = set()
    for word in words:
        found.update(word[1:])
    return [PREFIX + c for c in sorted(found)]


def repeated(counts: collections.Counter[str], batch: int = 1000) -> Iterator[list[str]]:
    """Batches of strings holding each word as many times as it was counted (sorted order)."""
    out: list[str] = []
    for word in sorted(counts):
        n = counts[word]
        while n > 0:
            k = min(n, _REPEAT)
            out.append(" ".join([word] * k))
            n -= k
        if len(out) >= batch:
            yield out
            out = []
    if out:
        yield out


def train_wordpiece(
    tok: Any, texts: Iterable[str], specials: list[str], **trainer_args: Any
) -> Any:
    """Train `tok` (a WordPiece tokenizer with a BERT normaliser) reproducibly; returns `tok`.

    `specials` take the first ids in their order; `trainer_args` go to `WordPieceTrainer`.
    Use `drop_added` on the saved JSON to remove the continuation tokens from the added tokens.
    """
    from tokenizers import pre_tokenizers, trainers

    words = word_counts(tok, chunk_counts(texts))
    extra = [t for t in continuation_tokens(words) if t not in specials]
    trainer = trainers.WordPieceTrainer(special_tokens=specials + extra,
                                        continuing_subword_prefix=PREFIX, **trainer_args)
    # The words are normalised and split already: the trainer only splits at the spaces
    # between copies (words hold no whitespace), then the tokenizer's own steps come back.
    norm, pre = tok.normalizer, tok.pre_tokenizer
    tok.normalizer, tok.pre_tokenizer = None, pre_tokenizers.WhitespaceSplit()
    try:
        tok.train_from_iterator(repeated(words), trainer=trainer)
    finally:
        tok.normalizer, tok.pre_tokenizer = norm, pre
    return tok


def drop_added(text: str, keep: Iterable[str]) -> str:
    """Tokenizer JSON without the added tokens whose content is not in `keep` (vocabulary kept)."""
    keep = set(keep)
    spec = json.loads(text)
    spec["added_tokens"] = [t for t in spec.get("added_tokens", []) if t["content"] in keep]
    return json.dumps(spec, ensure_ascii=False)
