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

It does not load, save or encode with tokenizers (see encoding.py).
"""

from __future__ import annotations

import itertools
import json
from dataclasses import dataclass
from typing import Any, Iterable, Iterator

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
