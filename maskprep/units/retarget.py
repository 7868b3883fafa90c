"""Use units built with one tokenizer with another one, when the two have the same words.

Units are word n-grams: a unit is a run of words, matched in the corpus by
the words' content keys, and only its ``token_ids`` column belongs to one
tokenizer. So units built with, say, a 30,000-token WordPiece vocabulary
serve a 2,000-token one trained the same way: both split text into the same
words, only the pieces inside a word differ. Two checks establish that the
words are the same:

1. **The same word splitting.** Words are the pre-tokens of the normalised
   text, so the tokenizers must have the same normaliser, the same
   pre-tokenizer and the same added tokens (content and matching flags; ids
   may differ), compared as configurations (``word_splitting``). Then any
   text, the corpus included, falls into the same words under both (case
   folding, accent stripping, punctuation and digit splitting alike).
2. **Every unit word reads the same.** Each unit text is encoded with the new
   tokenizer as corpus text is, and must give the unit's own words: the same
   number, every one a word (not punctuation or a special token), with the
   same content keys. This catches what the configuration does not: a word
   the new vocabulary cannot spell (WordPiece's ``[UNK]``), or a decoder that
   writes pieces back differently.

When both hold, the units are returned with ``token_ids`` re-derived for the
new tokenizer, ``tokenizer_hash`` set to it and the building tokenizer's hash
kept in ``source["units_tokenizer_hash"]``. Otherwise the units are refused
with the reason: which part of the word splitting differs, or which unit
words read differently. The refusal is whole: a vocabulary with some units
silently unmatched would mask differently from what its file says.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
from typing import Any, Mapping

import numpy as np

from ..errors import MaskprepError
from ..wording import plural

__all__ = ["word_splitting", "retarget_units", "unit_token_ids"]

_PREFIX_WORD = "x"  # a word put before each unit, so its tokens take their mid-sentence form
_LONG = 200  # strings longer than this (e.g. a precompiled character map) are kept as their hash


def word_splitting(tokenizer_json: str | Mapping[str, Any]) -> dict[str, Any]:
    """The parts of a tokenizer that decide its words: normaliser, pre-tokenizer, added tokens.

    >>> ws = word_splitting('{"normalizer": {"type": "Lowercase"}, '
    ...                     '"pre_tokenizer": {"type": "Whitespace"}, '
    ...                     '"added_tokens": [{"id": 0, "content": "[UNK]", "special": true}]}')
    >>> ws["normalizer"], ws["added_tokens"]
    ({'type': 'Lowercase'}, [['[UNK]', False, False, False, False, True]])
    """
    spec = json.loads(tokenizer_json) if isinstance(tokenizer_json, str) else dict(tokenizer_json)
    added = sorted(
        [
            str(t.get("content", "")),
            bool(t.get("single_word")),
            bool(t.get("lstrip")),
            bool(t.get("rstrip")),
            bool(t.get("normalized")),
            bool(t.get("special")),
        ]
        for t in spec.get("added_tokens") or []
    )
    return {
        "normalizer": _compact(spec.get("normalizer")),
        "pre_tokenizer": _compact(spec.get("pre_tokenizer")),
        "added_tokens": added,
    }


def _compact(value: Any) -> Any:
    if isinstance(value, str) and len(value) > _LONG:
        return "sha256:" + hashlib.sha256(value.encode("utf-8")).hexdigest()[:16]
    if isinstance(value, Mapping):
        return {str(k): _compact(v) for k, v in sorted(value.items())}
    if isinstance(value, (list, tuple)):
        return [_compact(v) for v in value]
    return value


def describe(section: Any) -> str:
    """A short readable form of a normaliser or pre-tokenizer configuration.

    >>> describe({"type": "Sequence", "normalizers": [{"type": "NFD"}, {"type": "Lowercase"}]})
    'NFD + Lowercase'
    >>> describe({"type": "BertNormalizer", "lowercase": True, "strip_accents": None})
    'BertNormalizer(lowercase=true, strip_accents=null)'
    >>> describe(None)
    'none'
    """
    if section is None:
        return "none"
    if isinstance(section, Mapping):
        kind = section.get("type", "?")
        children = [
            v
            for k, v in section.items()
            if k != "type"
            and isinstance(v, list)
            and all(isinstance(x, Mapping) and "type" in x for x in v)
        ]
        if kind == "Sequence" and children:
            return " + ".join(describe(x) for x in children[0])
        params = [
            f"{k}={json.dumps(v, ensure_ascii=False)}"
            for k, v in section.items()
            if k != "type" and not isinstance(v, (Mapping, list))
        ]
        return f"{kind}({', '.join(params)})" if params else str(kind)
    return json.dumps(section, ensure_ascii=False)


_PARTS = {
    "normalizer": "normaliser",
    "pre_tokenizer": "pre-tokenizer",
    "added_tokens": "added tokens",
}


def retarget_units(vocab: Any, info: Any, *, path: Any) -> Any:
    """`vocab` (built with another tokenizer) for tokenizer `info`, or `MaskprepError` saying
    why not."""
    from ..tokenizer.encoding import WORD

    built = vocab.word_splitting
    if not built:
        raise MaskprepError(
            f"--units {path}: the units were built with another tokenizer (hash "
            f"{vocab.tokenizer_hash[:12] or 'unknown'}, this one {info.hash[:12]}) and the file "
            "does not record how that tokenizer splits words (an older units file); rebuild "
            "them with maskprep count and maskprep units using this tokenizer"
        )
    here = word_splitting(info.json)
    diffs = []
    for key, name in _PARTS.items():
        if built.get(key) != here.get(key):
            if key == "added_tokens":
                a, b = {x[0] for x in built.get(key) or []}, {x[0] for x in here.get(key) or []}
                what = ", ".join(sorted(a ^ b)[:6]) or "the same tokens, other matching flags"
                diffs.append(f"added tokens differ ({what})")
            else:
                was, now = describe(built.get(key)), describe(here.get(key))
                diffs.append(
                    f"{name}: {was} for the units, {now} here"
                    if was != now
                    else f"{name}: {was} with other settings"
                )
    if diffs:
        raise MaskprepError(
            f"--units {path}: the units were built with a tokenizer that splits text into "
            f"words differently from this one ({'; '.join(diffs)}); units are word n-grams, so "
            "they only carry over between tokenizers with the same words: rebuild them with "
            "maskprep count and maskprep units using this tokenizer"
        )
    texts = list(vocab.text)
    batch = info.encode(texts)
    n = np.asarray(vocab.n, np.int64)
    bad_unit = np.diff(batch.doc_offsets) != n
    if len(texts) and not bad_unit.any():  # word rows line up unit by unit: compare them flat
        stored = np.concatenate(vocab.word_keys).astype(np.uint64)
        bad_word = (batch.word_keys != stored) | (batch.word_kinds != WORD)
        np.logical_or.at(bad_unit, np.repeat(np.arange(len(texts)), n), bad_word)
    if bad_unit.any():
        raise MaskprepError(_words_differ(path, vocab, info, np.flatnonzero(bad_unit)))
    token_ids = unit_token_ids(info.tokenizer, texts)
    source = {**dict(vocab.source), "units_tokenizer_hash": vocab.tokenizer_hash}
    return dataclasses.replace(
        vocab, token_ids=token_ids, tokenizer_hash=info.hash, source=source, word_splitting=here
    )


def _words_differ(path: Any, vocab: Any, info: Any, bad: np.ndarray) -> str:
    examples = []
    for i in bad[:4].tolist():
        text = vocab.text[i]
        enc = info.tokenizer.encode(text, add_special_tokens=False)
        groups: dict[int, list[int]] = {}
        for tid, w in zip(enc.ids, enc.word_ids):
            groups.setdefault(-1 if w is None else w, []).append(tid)
        now = [
            info.tokenizer.decode(ids, skip_special_tokens=False).strip()
            for _, ids in sorted(groups.items())
        ]
        was = text.split(" ")
        if len(now) == len(was):
            pairs = [f"{a!r} reads as {b!r}" for a, b in zip(was, now) if a != b] or [
                "its words get other keys"
            ]
            examples.append(f"{', '.join(pairs)} (in {text!r})")
        else:
            examples.append(f"{text!r} reads as {plural(len(now), 'word')} {' | '.join(now)!r}")
    more = f" and {len(bad) - 4:,} more" if len(bad) > 4 else ""
    return (
        f"--units {path}: the words are split the same way, but this tokenizer reads the "
        f"words of {len(bad):,} of the {plural(len(vocab), 'unit')} differently from the "
        f"tokenizer that built them: {'; '.join(examples)}{more}; rebuild the units with "
        "maskprep count and maskprep units using this tokenizer"
    )


def unit_token_ids(tok: Any, texts: list[str]) -> tuple[np.ndarray, ...]:
    """Token ids of each unit as it appears after another word (batch-encoded)."""
    if not texts:
        return ()
    with_prefix = tok.encode_batch(
        [f"{_PREFIX_WORD} {t}" for t in texts], add_special_tokens=False
    )
    plain = None
    out: list[np.ndarray] = []
    for i, enc in enumerate(with_prefix):
        word_ids = enc.word_ids
        ids = [t for t, w in zip(enc.ids, word_ids) if w is not None and w != word_ids[0]]
        if not ids:  # the tokenizer does not split words apart; use the unit on its own
            if plain is None:
                plain = tok.encode_batch(texts, add_special_tokens=False)
            ids = plain[i].ids
        out.append(np.asarray(ids, dtype=np.int32))
    return tuple(out)
