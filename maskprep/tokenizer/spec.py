"""What a tokenizer.json says beyond its vocabulary: roles of special tokens, length, word starts.

`find_roles` names the special tokens (padding, unknown, sequence start,
separator, mask) of tokenizers made here or elsewhere; `model_max_length`
reads a truncation length; `word_start_table` tells, for the tokenizers where
that is exact, which token ids start a word. It does not load files (see
`maskprep.tokenizer.encoding`).
"""

from __future__ import annotations

import string
from typing import Any

import numpy as np

__all__ = ["find_roles", "model_max_length", "word_start_table"]

# Names by which the roles are recognised in tokenizers made elsewhere.
_ROLE_NAMES = {
    "pad": ("[PAD]", "<pad>", "<|pad|>", "[pad]"),
    "unk": ("[UNK]", "<unk>", "<|unk|>", "[unk]"),
    "cls": ("[CLS]", "<s>", "<bos>", "<|startoftext|>", "[BOS]", "<cls>"),
    "sep": ("[SEP]", "</s>", "<eos>", "<|endoftext|>", "[EOS]", "<sep>"),
    "mask": ("[MASK]", "<mask>", "<|mask|>", "[mask]"),
}


def find_roles(tokenizer: Any, spec: dict[str, Any]) -> dict[str, int | None]:
    vocab = tokenizer.get_vocab(with_added_tokens=True)
    roles: dict[str, int | None] = {}
    for role, names in _ROLE_NAMES.items():
        roles[role] = next((vocab[n] for n in names if n in vocab), None)
    # The post-processor template, when present, is the truth for start/separator.
    post = spec.get("post_processor") or {}
    if post.get("type") == "TemplateProcessing":
        single = post.get("single") or []
        specials = [item["SpecialToken"]["id"] for item in single if "SpecialToken" in item]
        if len(specials) >= 1 and specials[0] in vocab and single and "SpecialToken" in single[0]:
            roles["cls"] = vocab[specials[0]]
        if len(specials) >= 1 and specials[-1] in vocab and "SpecialToken" in single[-1]:
            roles["sep"] = vocab[specials[-1]]
    elif post.get("type") in ("BertProcessing", "RobertaProcessing"):
        roles["sep"] = post["sep"][1]
        roles["cls"] = post["cls"][1]
    model = spec.get("model") or {}
    unk = model.get("unk_token")
    if isinstance(unk, str) and unk in vocab:
        roles["unk"] = vocab[unk]
    elif model.get("type") == "Unigram" and isinstance(model.get("unk_id"), int):
        roles["unk"] = model["unk_id"]
    return roles


def model_max_length(spec: dict[str, Any]) -> int | None:
    trunc = spec.get("truncation")
    if isinstance(trunc, dict) and isinstance(trunc.get("max_length"), int):
        return int(trunc["max_length"])
    return None


def word_start_table(tokenizer: Any, spec: dict[str, Any], added: list[Any]) -> np.ndarray | None:
    """`TokenizerInfo.word_start_table`, or None where word starts need the word ids."""
    model = spec.get("model") or {}
    prefix = model.get("continuing_subword_prefix")
    if (
        model.get("type") != "WordPiece"
        or spec.get("pre_tokenizer") != {"type": "BertPreTokenizer"}
        or not isinstance(prefix, str)
        or len(prefix) < 2
        or prefix[0] not in string.punctuation
        or any(t.content.startswith(prefix) for t in added)
        or str(model.get("unk_token", "")).startswith(prefix)
    ):
        return None
    vocab = tokenizer.get_vocab(with_added_tokens=True)
    size = tokenizer.get_vocab_size(with_added_tokens=True)
    if len(vocab) != size or set(vocab.values()) != set(range(size)):
        return None  # holes in the ids: keep the general path
    table = np.ones(size, dtype=bool)
    table[[i for tok, i in vocab.items() if tok.startswith(prefix)]] = False
    return table
