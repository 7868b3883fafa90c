"""Token ids as readable text, for terminal tables, `show` and the HTML pages.

Byte-level (``Ġ``, byte symbols such as ``å½``) and metaspace (``▁``) pieces
and WordPiece continuations (``##``) are turned into the text the tokenizer's
decoder writes for them, so every script reads as itself. One convention
everywhere:

- the pieces of one word are joined by `JOIN` (``·``): ``play·ing``, ``清华·大学``;
- a leading space that belongs to a piece is shown as `SPACE_MARK` (``␣``)
  only where it is all the piece holds;
- a piece holding only part of a character's bytes is shown as `PARTIAL`
  (``…``); the character appears in the piece that completes it.

Display only: nothing here is on a hot path.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

#: Shown between the pieces of a word, in the terminal and on the pages.
JOIN = "\u00b7"
#: Shown for a piece that is only a space.
SPACE_MARK = "\u2423"
#: Shown for a piece that holds only part of a character's bytes.
PARTIAL = "\u2026"


def readable_pieces(info: Any, ids: Sequence[int]) -> tuple[list[str], bool]:
    """The text of each token of one word (or sequence), and whether it starts with whitespace.

    Each piece is what the decoder adds for that token after a preceding word
    (a reference token is put in front, so word-initial spaces survive). A
    character spread over several tokens is given to the token that completes
    it; the tokens before hold ``""``. Where decoding is not incremental the
    raw token strings are returned.

    >>> readable_pieces(info, info.tokenizer.encode("清华大学").ids)  # doctest: +SKIP
    (['清华', '大学'], True)
    """
    tok = info.tokenizer if hasattr(info, "tokenizer") else info
    ids = [int(i) for i in ids]
    ref = tok.encode("a", add_special_tokens=False).ids[:1]
    texts = tok.decode_batch(
        [ref + ids[:k] for k in range(len(ids) + 1)], skip_special_tokens=False
    )
    base, done, pieces = texts[0], "", []
    for k, text in enumerate(texts[1:], 1):
        if not text.startswith(base):
            return [tok.id_to_token(i) or "?" for i in ids], False
        now = text[len(base):]
        if k < len(ids) and now.endswith("\ufffd"):
            now = now[:-1]  # an incomplete character, completed by a later token
        if not now.startswith(done):
            return [tok.id_to_token(i) or "?" for i in ids], False
        pieces.append(now[len(done):])
        done = now
    lead = bool(done) and done[0].isspace()
    return pieces, lead


def shown_pieces(info: Any, ids: Sequence[int]) -> list[str]:
    """One word's pieces as shown.

    Spaces are dropped; `SPACE_MARK` / `PARTIAL` stand for space-only / partial pieces.
    """
    pieces, _lead = readable_pieces(info, ids)
    return [PARTIAL if not p else (p.strip() or SPACE_MARK) for p in pieces]


def word_pieces(info: Any, ids: Sequence[int]) -> str:
    """One word's pieces joined by `JOIN`: ``word_pieces(info, ids)`` -> ``"彻头·彻尾"``."""
    return JOIN.join(shown_pieces(info, ids))


def running_text(info: Any, ids: Sequence[int]) -> list[str]:
    """Text of each token of a sequence as it reads in running text (spaces included).

    Special tokens keep their own text; characters split over tokens go to the
    token completing them. Spaces that a decoder puts between two CJK
    characters (WordPiece writes one between every two) are left out, so
    Chinese and Japanese read without gaps.
    """
    pieces, _lead = readable_pieces(info, ids)
    out = []
    prev = ""
    for p in pieces:
        if p.startswith(" ") and len(p) > 1 and _cjk(p[1]) and prev and _cjk(prev[-1]):
            p = p[1:]
        out.append(p)
        if p:
            prev = p
    if out and out[0].startswith(" "):
        out[0] = out[0][1:]
    return out


def _cjk(ch: str) -> bool:
    c = ord(ch)
    return (
        0x3040 <= c <= 0x30FF
        or 0x3400 <= c <= 0x4DBF
        or 0x4E00 <= c <= 0x9FFF
        or 0xF900 <= c <= 0xFAFF
        or 0x3000 <= c <= 0x303F
        or 0xFF00 <= c <= 0xFFEF
        or 0x20000 <= c <= 0x3134F
    )
