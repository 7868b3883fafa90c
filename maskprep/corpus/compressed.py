"""Open corpus files as binary streams, decompressing ``.gz`` and ``.zst`` on the fly.

The zstd reader notices a truncated last frame (`EOFError`), which the decompressor alone
would not. This module does not split or decode text (see `maskprep.corpus.reader`).
"""

from __future__ import annotations

import gzip
import io
from typing import IO, cast

__all__ = ["open_binary"]


def open_binary(path: str, compression: str | None) -> IO[bytes]:
    if compression == "gzip":
        return cast(IO[bytes], gzip.open(path, "rb"))
    if compression == "zstd":
        return io.BufferedReader(_ZstdReader(path), buffer_size=1 << 20)
    return open(path, "rb")


class _ZstdReader(io.RawIOBase):
    """Streaming zstd reader that notices a truncated last frame (EOFError)."""

    def __init__(self, path: str) -> None:
        import zstandard

        self._zstd = zstandard
        self._fh = open(path, "rb")
        self._dctx = zstandard.ZstdDecompressor()
        self._dobj = self._dctx.decompressobj()
        self._buf = b""
        self._pending = False  # bytes fed to a frame that has not ended

    def readable(self) -> bool:
        return True

    def readinto(self, b: "bytearray | memoryview") -> int:  # type: ignore[override]
        while not self._buf:
            chunk = self._fh.read(1 << 20)
            if not chunk:
                if self._pending:
                    raise EOFError("zstd stream ended in the middle of a frame")
                return 0
            parts = []
            while chunk:
                parts.append(self._dobj.decompress(chunk))
                self._pending = True
                if self._dobj.eof:  # frame complete; the rest starts another frame
                    chunk = self._dobj.unused_data
                    self._dobj = self._dctx.decompressobj()
                    self._pending = False
                else:
                    chunk = b""
            self._buf = b"".join(parts)
        n = min(len(b), len(self._buf))
        b[:n] = self._buf[:n]
        self._buf = self._buf[n:]
        return n

    def close(self) -> None:
        self._fh.close()
        super().close()
