"""Unigram tokenizers: trained with the reference Unigram LM trainer, used through `tokenizers`.

`unigram_skeleton` gives the normaliser, pre-tokenizer and decoder of every
Unigram tokenizer trained here; `train_unigram` learns its vocabulary.

Words. The text is normalised (NFKC, runs of whitespace to one space, ends
stripped, optionally lowercased); Metaspace marks each space with ``▁`` and
splits before it; then every run of punctuation or symbols becomes a word of
its own, taking the ``▁`` of a space in front of it ("▁said", ":", "▁(",
"yes", ")"). So a space never stands alone as a token before punctuation, as
it did when Metaspace was followed by the library's Punctuation splitter.

Training. The vocabulary is learnt by `sentencepiece` (the reference
implementation of the Unigram language model, Kudo 2018) from the counts of
the whitespace-separated chunks of the normalised text, with its published
defaults for the EM schedule (seed of 1M substrings, pieces of at most 16
characters, 2 EM sub-iterations, pruning by 0.75 per round) and its rules
that a piece never mixes letters with punctuation or digits, and that ``▁``
only starts a piece. Every piece it can learn is then usable with the word
splitting above. Measured on real English (``scripts/tokenizer_quality.py``),
the `tokenizers` library's own Unigram trainer split 19% of the words of the
plays at 8,000 tokens against 6% for byte-level BPE, whatever its EM
settings; this trainer splits 5%. (Its seed takes only substrings repeated
across distinct training words, so a word seen in one form never becomes a
seed piece; that is our reading of the gap.) sentencepiece's result depends
on its thread count, so it always runs 4 threads: the same corpus gives the
same tokenizer on every machine.

Memory grows with the number of distinct chunks, not with the corpus.
"""

from __future__ import annotations

import collections
import io
import itertools
import re
import tempfile
from pathlib import Path
from typing import Any, Iterable

from ..errors import MaskprepError

# A run of punctuation or symbols, with the metaspace of a space before it. Letters, digits
# and combining marks (vowel signs of Indic scripts, accents) stay in their words.
PUNCT_RUN = r"▁?[^\s\p{L}\p{N}\p{M}▁]+"
THREADS = 4  # fixed: sentencepiece's scores depend on the number of threads
# The reference trainer's published defaults, stated so a library upgrade cannot move them.
SEED_SIZE = 1_000_000
MAX_PIECE_LENGTH = 16
SUB_ITERATIONS = 2
SHRINKING_FACTOR = 0.75


class VocabSizeError(MaskprepError):
    """The corpus cannot give a Unigram vocabulary of the size asked for."""

    def __init__(self, requested: int, supported: int | None, too_small: bool = False) -> None:
        self.requested, self.supported, self.too_small = requested, supported, too_small
        super().__init__(size_message("--vocab-size", requested, supported, too_small))


def size_message(
    option: str, requested: int, supported: int | None, too_small: bool = False
) -> str:
    if too_small:
        return (
            f"{option}: {requested:,} is too small for unigram on this corpus: "
            "its characters alone "
            f"need {supported:,} tokens; use at least {supported:,}"
        )
    most = f"at most {supported:,} tokens" if supported else "fewer tokens"
    return (
        f"{option}: {requested:,} is larger than this corpus supports for unigram ({most}); "
        "use a smaller size or a larger corpus"
    )


def unigram_skeleton(lowercase: bool) -> Any:
    """An untrained Unigram tokenizer: normaliser, pre-tokenizer and decoder."""
    from tokenizers import Regex, Tokenizer, decoders, models, normalizers, pre_tokenizers

    tok = Tokenizer(models.Unigram())
    norms = [normalizers.NFKC(), normalizers.Replace(Regex(r"\s+"), " "), normalizers.Strip()]
    norms += [normalizers.Lowercase()] if lowercase else []
    tok.normalizer = normalizers.Sequence(norms)
    tok.pre_tokenizer = pre_tokenizers.Sequence(
        [pre_tokenizers.Metaspace(), pre_tokenizers.Split(Regex(PUNCT_RUN), behavior="isolated")]
    )
    tok.decoder = decoders.Metaspace()
    return tok


def chunk_counts(tok: Any, texts: Iterable[str], batch: int = 1000) -> collections.Counter[str]:
    """Counts of the whitespace-separated chunks of the normalised documents.

    One normaliser call per batch of documents (joined by newlines, which the
    normaliser turns into spaces); splitting and counting run in C.
    """
    counts: collections.Counter[str] = collections.Counter()
    it = iter(texts)
    while docs := list(itertools.islice(it, batch)):
        counts.update(tok.normalizer.normalize_str("\n".join(docs)).split(" "))
    counts.pop("", None)
    return counts


def train_unigram(
    tok: Any, texts: Iterable[str], vocab_size: int, specials: list[str], unk: str
) -> Any:
    """Learn the vocabulary of `tok` (from `unigram_skeleton`); `specials` take the first ids."""
    import sentencepiece as spm
    from tokenizers import models

    counts = chunk_counts(tok, texts)
    if not counts:
        raise MaskprepError("corpus is empty (no non-empty documents)")
    learnt = vocab_size - (len(specials) - 1)  # sentencepiece's own <unk> stands for ours
    model = io.BytesIO()
    with tempfile.TemporaryDirectory(prefix="maskprep-unigram-") as tmp:
        tsv = Path(tmp) / "chunks.tsv"
        with open(tsv, "w", encoding="utf-8") as fh:
            for chunk, n in sorted(counts.items()):
                fh.write(f"{chunk}\t{n}\n")
        try:
            spm.SentencePieceTrainer.train(
                input=str(tsv),
                input_format="tsv",
                model_writer=model,
                model_type="unigram",
                vocab_size=learnt,
                character_coverage=1.0,
                hard_vocab_limit=True,
                seed_sentencepiece_size=SEED_SIZE,
                max_sentencepiece_length=MAX_PIECE_LENGTH,
                num_sub_iterations=SUB_ITERATIONS,
                shrinking_factor=SHRINKING_FACTOR,
                split_by_unicode_script=True,
                split_by_number=True,
                split_by_whitespace=True,
                split_digits=False,
                byte_fallback=False,
                normalization_rule_name="identity",
                add_dummy_prefix=True,
                remove_extra_whitespaces=True,
                num_threads=THREADS,
                unk_id=0,
                bos_id=-1,
                eos_id=-1,
                pad_id=-1,
                minloglevel=2,
            )
        except RuntimeError as exc:
            raise _size_error(str(exc), vocab_size, len(specials) - 1) from None
    sp = spm.SentencePieceProcessor(model_proto=model.getvalue())
    pieces = [
        (sp.id_to_piece(i), float(sp.get_score(i)))
        for i in range(sp.get_piece_size())
        if not sp.is_unknown(i)
    ]
    vocab = [(s, 0.0) for s in specials] + pieces
    tok.model = models.Unigram(vocab, unk_id=specials.index(unk), byte_fallback=False)
    tok.add_special_tokens(specials)
    return tok


def _size_error(text: str, requested: int, extra: int) -> MaskprepError:
    high = re.search(r"Vocabulary size too high \(\d+\)\. Please set it to a value <= (\d+)", text)
    if high:
        return VocabSizeError(requested, int(high.group(1)) + extra)
    low = re.search(r"Vocabulary size is smaller than required_chars\. \d+ vs (\d+)", text)
    if low:
        return VocabSizeError(requested, int(low.group(1)) + extra, too_small=True)
    line = text.strip().splitlines()[-1] if text.strip() else "unknown error"
    return MaskprepError(f"unigram training failed: {line}")
