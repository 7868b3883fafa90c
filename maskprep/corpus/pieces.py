"""Documents longer than a bound, cut into pieces, so memory never depends on document length.

A document of more than ``PIECE_BYTES`` bytes of UTF-8 is cut into pieces of at most that many
bytes, and every later stage treats each piece as a document of its own: n-grams never span a
cut, packing puts a separator between pieces as between documents (with ``--no-pack`` each piece
starts its own sequences), and the counts of documents count the document once. Documents up to
the bound are untouched, so outputs for them are what they always were.

Where a cut falls depends on the document's bytes only (never on batch sizes, tasks, workers or
``--memory``): within the first ``PIECE_BYTES`` bytes still to cut, after the last ASCII
whitespace byte in their second half; without one there, at the last UTF-8 character boundary.
Text files are read a piece at a time, so a line of any length costs at most a few pieces of
memory; a JSONL record or a table cell is held whole once (as the parser gives it), then cut.

This module does not read files (see `maskprep.corpus.reader`).
"""

from __future__ import annotations

from collections.abc import Callable, Iterator

__all__ = ["PIECE_BYTES", "Continued", "cut_point", "text_pieces", "line_pieces"]

PIECE_BYTES = 1 << 18
_SPACES = b" \t\n\r\x0b\x0c"


class Continued(str):
    """A piece after the first of one document (it is not counted as a document again)."""


def cut_point(data: bytes, bound: int = PIECE_BYTES) -> int:
    """Length of the first piece of `data` (longer than `bound` bytes).

    >>> cut_point(b"aaaa bbbb cccc", 11), cut_point("ééé".encode(), 3)
    (10, 2)
    """
    window = data[:bound]
    ws = max(window.rfind(c, bound // 2) for c in (b" ", b"\t", b"\n", b"\r", b"\x0b", b"\x0c"))
    if ws >= 0:
        return ws + 1
    j = bound
    while j > 0 and (data[j] & 0xC0) == 0x80:  # a UTF-8 continuation byte: not a character start
        j -= 1
    return j or bound


def text_pieces(text: str, bound: int = PIECE_BYTES) -> list[str]:
    """A document as pieces of at most `bound` UTF-8 bytes (one piece when it fits).

    >>> text_pieces("to be or not to be", 8)
    ['to be ', 'or not ', 'to be']
    """
    if len(text) <= bound // 4:  # at most 4 bytes a character: it fits
        return [text]
    data = text.encode("utf-8", "surrogatepass")
    if len(data) <= bound:
        return [text]
    pieces, pos = [], 0
    while len(data) - pos > bound:
        cut = cut_point(data[pos:pos + bound + 1], bound)
        pieces.append(data[pos:pos + cut])
        pos += cut
    pieces.append(data[pos:])
    return [p.decode("utf-8", "surrogatepass") for p in pieces]


def line_pieces(first: bytes, readline: Callable[[int], bytes],
                bound: int = PIECE_BYTES) -> Iterator[tuple[int, bytes, bool, int]]:
    """The pieces of a line longer than `bound` bytes whose first `bound` + 1 bytes are `first`.

    Yields (offset in the line, piece without the line end, is it the last piece, bytes read
    from `readline` so far, `first` included); never holds more than about two pieces.
    """
    buf, read, off = first, len(first), 0
    ended = first.endswith(b"\n")
    while True:
        while not ended and len(buf) <= bound:
            want = bound + 1 - len(buf)
            more = readline(want)
            read += len(more)
            ended = len(more) < want or more.endswith(b"\n")
            buf += more
        content = (
            buf.rstrip(b"\r\n") if buf.endswith(b"\n") else (buf.rstrip(b"\r") if ended else buf)
        )
        if ended and len(content) <= bound:
            yield off, content, True, read
            return
        cut = cut_point(buf, bound)
        yield off, buf[:cut], False, read
        off += cut
        buf = buf[cut:]
