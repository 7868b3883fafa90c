"""Checks of a tokenizer file made at load time, so that a run never fails deep inside.

A model whose unknown token is missing from its vocabulary would fail on the first character it
cannot encode; a JSON file of another kind (a counts.json, a shards manifest) is named as what it
is. This module does not load tokenizers (see `maskprep.tokenizer.encoding`).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from ..errors import MaskprepError

__all__ = ["check_unknown_token", "json_kind"]


def json_kind(doc: Any) -> str:
    """What a JSON file that is not a tokenizer seems to be, for the message."""
    if not isinstance(doc, dict):
        return ""
    if doc.get("format") == "maskprep-shards":
        return ": it is a shards manifest"
    if "N" in doc and "max_n" in doc:
        return ": it is a counts.json"
    keys = ", ".join(sorted(map(str, doc))[:6])
    return f"; its keys: {keys}" if keys else ""


def check_unknown_token(spec: dict[str, Any], path: str | Path) -> None:
    """Refuse a model whose unknown token is not in its vocabulary (it would fail on the first
    character it cannot encode, deep inside a run).

    >>> model = {"type": "WordPiece", "unk_token": "[UNK]", "vocab": {"a": 0}}
    >>> check_unknown_token({"model": model}, "t.json")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    maskprep.errors.MaskprepError: t.json: the model's unknown token '[UNK]' is not in its ...
    """
    model = spec.get("model") or {}
    vocab = model.get("vocab")
    unk = model.get("unk_token")
    if model.get("type") in ("WordPiece", "BPE", "WordLevel") and isinstance(unk, str):
        names = set(vocab) if isinstance(vocab, dict) else set()  # the model's own vocabulary
        if unk not in names:
            raise MaskprepError(
                f"{path}: the model's unknown token {unk!r} is not in its vocabulary; add it "
                "to the vocabulary (and as a special token), or retrain with maskprep "
                "train-tokenizer"
            )
    if model.get("type") == "Unigram" and model.get("unk_id") is not None:
        size = len(vocab) if isinstance(vocab, list) else 0
        unk_id = model.get("unk_id")
        if not isinstance(unk_id, int) or not 0 <= unk_id < size:
            raise MaskprepError(
                f"{path}: the model's unknown token id {unk_id!r} is not in its vocabulary "
                f"of {size} pieces; fix unk_id or retrain with maskprep train-tokenizer"
            )
