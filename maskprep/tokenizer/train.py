"""Train tokenizers for the later stages: WordPiece, byte-level BPE or Unigram.

`train_tokenizer` trains on an iterable of documents and gives each tokenizer
the five special tokens the later stages need (padding, unknown, sequence
start, separator, mask) and a post-processor template that puts the start
and separator tokens around a sequence. `TrainConfig` says which family and
size; `check_trained_size` refuses a tokenizer that stopped short of it.
WordPiece training gets its ties broken in a fixed order (see wordcounts.py),
and its vocabulary is renumbered in a fixed order after training, so ids
depend only on which tokens exist: training is byte-identical from run to run.

Unigram vocabularies are learnt by sentencepiece (see unigram.py).

A lowercased WordPiece normaliser also strips every combining mark (category Mn after
NFD): harmless for uncased English (é -> e), but in other scripts it removes letters (kana
voicing marks, Thai vowel and tone marks, Devanagari matras, Hebrew and Arabic points).
`train_tokenizer` then counts the corpus's code points (`CharTally`, numpy), asks the trained
normaliser what it does to each distinct character (`mark_loss`) and prints one warning line
(`warn_mark_loss`) when more than `MARK_LOSS_WARN` of the letters outside Latin, Greek and
Cyrillic lose a mark. BPE and Unigram only lowercase (NFC, NFKC): they keep marks.

It does not load, save or encode with tokenizers (see encoding.py).
"""

from __future__ import annotations

import itertools
import json
import re
import sys
import unicodedata
from dataclasses import dataclass, field
from typing import Any, Iterable, Iterator

import numpy as np

from ..errors import MaskprepError
from .encoding import TokenizerInfo
from .unigram import VocabSizeError, size_message, train_unigram, unigram_skeleton
from .wordcounts import drop_added, train_wordpiece

MODELS = ("wordpiece", "bpe", "unigram")
ROLE_ORDER = ("pad", "unk", "cls", "sep", "mask")  # special tokens take ids 0-4 in this order
# Special tokens of tokenizers trained here, by role.
SPECIALS = {
    "wordpiece": {"pad": "[PAD]", "unk": "[UNK]", "cls": "[CLS]", "sep": "[SEP]", "mask": "[MASK]"},
    "bpe": {"pad": "<pad>", "unk": "<unk>", "cls": "<s>", "sep": "</s>", "mask": "<mask>"},
    "unigram": {"pad": "<pad>", "unk": "<unk>", "cls": "<s>", "sep": "</s>", "mask": "<mask>"},
}


@dataclass(frozen=True)
class TrainConfig:
    """How to train a tokenizer: ``TrainConfig(model="wordpiece", vocab_size=8000)``."""

    model: str = "wordpiece"
    vocab_size: int = 30000
    lowercase: bool = True
    min_frequency: int = (
        0  # the library default: keep every pair, so a small corpus can reach large sizes
    )

    def __post_init__(self) -> None:
        if self.model not in MODELS:
            raise MaskprepError(f"--model: expected one of {', '.join(MODELS)}, got {self.model!r}")
        if not isinstance(self.vocab_size, int) or self.vocab_size < 100:
            raise MaskprepError(f"--vocab-size: {self.vocab_size} is too small; use at least 100")
        if self.vocab_size > 2_000_000:
            raise MaskprepError(
                f"--vocab-size: {self.vocab_size} is absurdly large; use at most 2,000,000"
            )


def build_empty_tokenizer(config: TrainConfig) -> tuple[Any, Any]:
    """An untrained tokenizer and its `tokenizers` trainer for `config` (None for Unigram)."""
    from tokenizers import (
        Tokenizer,
        decoders,
        models,
        normalizers,
        pre_tokenizers,
        processors,
        trainers,
    )

    sp = SPECIALS[config.model]
    special_list = [sp[r] for r in ROLE_ORDER]
    trainer: trainers.Trainer | None
    norms: list[normalizers.Normalizer]
    if config.model == "wordpiece":
        tok = Tokenizer(models.WordPiece(unk_token=sp["unk"]))
        tok.normalizer = normalizers.BertNormalizer(lowercase=config.lowercase, clean_text=True,
                                                    handle_chinese_chars=True, strip_accents=None)
        tok.pre_tokenizer = pre_tokenizers.BertPreTokenizer()
        tok.decoder = decoders.WordPiece(cleanup=False)
        trainer = trainers.WordPieceTrainer(
            vocab_size=config.vocab_size,
            special_tokens=special_list,
            min_frequency=config.min_frequency,
            show_progress=False,
        )
    elif config.model == "bpe":
        tok = Tokenizer(models.BPE(unk_token=None))
        norms = [normalizers.NFC()] + ([normalizers.Lowercase()] if config.lowercase else [])
        tok.normalizer = normalizers.Sequence(norms)
        tok.pre_tokenizer = pre_tokenizers.ByteLevel(add_prefix_space=True)
        tok.decoder = decoders.ByteLevel()
        trainer = trainers.BpeTrainer(vocab_size=config.vocab_size, special_tokens=special_list,
                                      min_frequency=config.min_frequency, show_progress=False,
                                      initial_alphabet=pre_tokenizers.ByteLevel.alphabet())
    else:
        # Trained by sentencepiece in train_tokenizer (see unigram.py for why).
        tok = unigram_skeleton(config.lowercase)
        trainer = None
    cls, sep = sp["cls"], sp["sep"]
    tok.post_processor = processors.TemplateProcessing(
        single=f"{cls} $A {sep}", pair=f"{cls} $A {sep} $B:1 {sep}:1",
        special_tokens=[(cls, special_list.index(cls)), (sep, special_list.index(sep))])
    return tok, trainer


def train_tokenizer(texts: Iterable[str], config: TrainConfig = TrainConfig(), *,
                    name: str | None = None, check_size: bool = True,
                    option: str = "--vocab-size") -> TokenizerInfo:
    """Train a tokenizer on an iterable of documents.

    >>> info = train_tokenizer(iter_corpus(["sample_corpus"]),
    ...                        TrainConfig(vocab_size=2000))  # doctest: +SKIP
    >>> info.vocab_size  # doctest: +SKIP
    2000

    A size the corpus cannot give raises `MaskprepError` naming `option` (with
    ``check_size=False`` a short WordPiece or BPE vocabulary is returned as it is;
    Unigram training always reaches the size exactly or fails).
    """
    tok, trainer = build_empty_tokenizer(config)
    tally = CharTally() if config.model == "wordpiece" and config.lowercase else None
    if tally is not None:
        texts = tally.wrap(texts)
    if trainer is None:
        sp = SPECIALS["unigram"]
        try:
            train_unigram(tok, texts, config.vocab_size, [sp[r] for r in ROLE_ORDER], sp["unk"])
        except VocabSizeError as exc:
            message = size_message(option, exc.requested, exc.supported, exc.too_small)
            raise MaskprepError(message) from None
    elif config.model == "wordpiece":
        specials = [SPECIALS["wordpiece"][r] for r in ROLE_ORDER]
        train_wordpiece(tok, texts, specials, vocab_size=config.vocab_size,
                        min_frequency=config.min_frequency, show_progress=False)
        tok = _from_str(drop_added(tok.to_str(), specials))
    else:
        tok.train_from_iterator(_batched(texts), trainer=trainer)
    # One save/load round trip settles float formatting, so the hash of the
    # tokenizer in memory equals the hash of the file it is saved to.
    tok = _from_str(_canonical_ids(tok.to_str()))
    info = TokenizerInfo(tok, name=name or f"{config.model}-{config.vocab_size}")
    if tally is not None:
        warn_mark_loss(mark_loss(tok, tally.counts(), tally.head), info.name)
    if check_size:
        check_trained_size(info, config, option)
    return info


def _canonical_ids(text: str) -> str:
    """Give a trained WordPiece vocabulary ids in a fixed order.

    The library's WordPiece trainer numbers its tokens in an order that varies
    from run to run (its alphabet comes from a hash map); ties between equally
    frequent merges are settled by `train_wordpiece` (wordcounts.py).
    WordPiece encoding depends only on which tokens exist, so special tokens
    keep their ids and the others are numbered in sorted order: ids are then a
    function of the token set. (Byte-level BPE training is reproducible as it
    is, and so is Unigram training, which runs a fixed number of threads.)
    """
    spec = json.loads(text)
    model = spec.get("model") or {}
    if model.get("type") != "WordPiece":
        return text
    special = {t["content"]: t["id"] for t in spec.get("added_tokens", []) if t.get("special")}
    vocab = model["vocab"]
    rest = sorted(t for t in vocab if t not in special)
    renumbered = dict(sorted(special.items(), key=lambda kv: kv[1]))
    next_id = 0
    taken = set(renumbered.values())
    for t in rest:
        while next_id in taken:
            next_id += 1
        renumbered[t] = next_id
        next_id += 1
    model["vocab"] = dict(sorted(renumbered.items(), key=lambda kv: kv[1]))
    return json.dumps(spec, ensure_ascii=False)


def _from_str(text: str) -> Any:
    from tokenizers import Tokenizer

    return Tokenizer.from_str(text)


def check_trained_size(
    info: TokenizerInfo, config: TrainConfig, option: str = "--vocab-size"
) -> None:
    """Raise, naming `option`, if training stopped short of the requested vocabulary size."""
    if info.vocab_size < config.vocab_size:
        raise MaskprepError(
            f"{option}: {config.vocab_size:,} is larger than this corpus supports for "
            f"{config.model}: "
            f"training reached {info.vocab_size:,} tokens; use a smaller size or a larger corpus"
        )


def _batched(texts: Iterable[str], size: int = 1000) -> Iterator[list[str]]:
    it = iter(texts)
    while batch := list(itertools.islice(it, size)):
        yield batch


# Warn when more than this share of the letters (and marks) of the corpus lose a combining
# mark outside Latin, Greek and Cyrillic: one in a thousand letters is about one word in two
# hundred, so the marks belong to the corpus's own language; a few foreign names in an English
# corpus stay below it.
MARK_LOSS_WARN = 0.001
_KEEP_SCRIPTS = ("LATIN", "GREEK", "CYRILLIC")  # where stripping accents is the usual practice
# Combining marks without a script of their own (Unicode script "Inherited": Combining
# Diacritical Marks and its Extended and Supplement blocks, marks for symbols, half marks),
# written mostly on Latin, Greek and Cyrillic letters.
_INHERITED = ((0x0300, 0x036F), (0x1AB0, 0x1AFF), (0x1DC0, 0x1DFF), (0x20D0, 0x20FF),
              (0xFE20, 0xFE2F))
_WARNED: set[tuple[str, ...]] = set()


class CharTally:
    """Counts of the code points of the documents that pass through `wrap` (numpy, batched).

    >>> tally = CharTally(); list(tally.wrap(["ガガ"])); int(tally.counts()[ord("ガ")])
    ['ガガ']
    2
    """

    def __init__(self, batch_chars: int = 1 << 22) -> None:
        self._counts = np.zeros(0x110000, dtype=np.int64)
        self._batch: list[str] = []
        self._size = 0
        self._limit = batch_chars
        self.head = ""  # the first batch's text, where `mark_loss` finds its examples

    def wrap(self, texts: Iterable[str]) -> Iterator[str]:
        """Yield `texts` unchanged, counting their characters."""
        for text in texts:
            self._batch.append(text)
            self._size += len(text)
            if self._size >= self._limit:
                self._flush()
            yield text
        self._flush()

    def _flush(self) -> None:
        if self._batch:
            text = "".join(self._batch)
            if not self.head:
                self.head = text
            raw = text.encode("utf-32-le", "surrogatepass")
            cps = np.frombuffer(raw, dtype="<u4")
            self._counts += np.bincount(cps, minlength=0x110000)[:0x110000]
        self._batch, self._size = [], 0

    def counts(self) -> np.ndarray:
        """Occurrences of each code point (an array of 0x110000 int64)."""
        self._flush()
        return self._counts


@dataclass
class MarkLoss:
    """What a normaliser's accent stripping removes outside Latin, Greek and Cyrillic."""

    letters: int = 0  # characters of category L* or M* in the corpus
    lost: int = 0  # of them, those outside Latin, Greek and Cyrillic that lose a mark
    scripts: dict[str, int] = field(default_factory=dict)  # lost, by script (name's first word)
    examples: list[tuple[str, str, int]] = field(default_factory=list)  # before, after, count

    @property
    def share(self) -> float:
        return self.lost / self.letters if self.letters else 0.0


def _marks(text: str) -> int:
    return sum(unicodedata.category(c) == "Mn" for c in unicodedata.normalize("NFD", text))


def mark_script(ch: str) -> str | None:
    """The script of `ch` by its Unicode name's first word; None for Latin, Greek, Cyrillic.

    A base letter's decomposition names it (Å: LATIN); a combining mark of the inherited
    blocks is taken as Latin-Greek-Cyrillic (None), another ``COMBINING ...`` mark by its
    second word (U+3099: KATAKANA-HIRAGANA).
    """
    cp = ord(ch)
    if any(lo <= cp <= hi for lo, hi in _INHERITED):
        return None
    base = unicodedata.normalize("NFD", ch)[0]
    words = unicodedata.name(base, unicodedata.name(ch, "")).split()
    if not words:
        return "UNNAMED"
    script = words[1] if words[0] == "COMBINING" and len(words) > 1 else words[0]
    return None if script in _KEEP_SCRIPTS else script


def mark_loss(tok: Any, counts: np.ndarray, head: str = "") -> MarkLoss:
    """Which counted characters lose a combining mark under `tok`'s own normaliser.

    One call of ``tok.normalizer.normalize_str`` per distinct character with a mark. The
    examples are the three most frequent such characters, each shown with up to two
    characters before it and one after, from its first place in `head` (a standalone Thai
    mark means little alone).
    """
    loss = MarkLoss()
    lost: dict[str, tuple[str, int]] = {}
    for cp in np.flatnonzero(counts).tolist():
        ch, n = chr(cp), int(counts[cp])
        if unicodedata.category(ch)[0] not in "LM":
            continue
        loss.letters += n
        before = _marks(ch)
        if not before or tok.normalizer is None:
            continue
        script = mark_script(ch)
        if script is None:
            continue
        after = tok.normalizer.normalize_str(ch).strip()
        if _marks(after) < before:
            loss.lost += n
            loss.scripts[script] = loss.scripts.get(script, 0) + n
            lost[ch] = (after, n)
    loss.scripts = dict(sorted(loss.scripts.items(), key=lambda kv: (-kv[1], kv[0])))
    top = sorted(lost.items(), key=lambda kv: (-kv[1][1], kv[0]))[:3]
    loss.examples = []
    for ch, (after, n) in top:
        found = re.search(r"\S{0,2}" + re.escape(ch) + r"\S?", head)
        shown = found.group(0) if found else ch
        if found:
            after = "".join(tok.normalizer.normalize_str(shown).split())
        loss.examples.append((shown, after, n))
    return loss


def warn_mark_loss(loss: MarkLoss, name: str) -> bool:
    """One line on stderr if more than `MARK_LOSS_WARN` of the letters lose a mark.

    Printed even with --quiet (as every warning), once per process for the same figures
    (an audit trains several sizes on one corpus). Returns whether the share is over it.
    """
    if loss.share <= MARK_LOSS_WARN:
        return False
    scripts = ", ".join(loss.scripts)
    key = (scripts, str(loss.lost), str(loss.letters))
    if key in _WARNED:
        return True
    _WARNED.add(key)
    examples = ", ".join(f"{b} -> {a or '(nothing)'}" for b, a, _n in loss.examples)
    sys.stderr.write(
        f"warning: tokenizer {name}: lowercasing WordPiece also strips combining marks, and "
        f"{loss.share:.2%} of the corpus's letters ({loss.lost:,} of {loss.letters:,}; "
        f"{scripts}) lose one ({examples}), so different words become one; train with "
        "--no-lowercase to keep the marks (and the case).\n"
    )
    sys.stderr.flush()
    return True
