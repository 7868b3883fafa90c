"""The options of a unit-vocabulary build: defaults, help text, checks and per-length quotas.

``check_options`` checks the keywords of ``build_units`` against the counts
directory's own ``max_n`` and ``min_count`` and returns a ``UnitOptions``;
``parse_per_length`` reads ``--per-length`` and ``quotas`` splits ``--top``
between the listed lengths. It reads no file and scores nothing (see
``maskprep.units.select``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Mapping, Union

import numpy as np

from .cohesion import MAX_N, Measure
from .filters import DEFAULT_EDGE_WORDS, DEFAULT_FRAGMENT_SHARE
from .._checks import is_whole
from ..errors import MaskprepError

__all__ = [
    "UnitOptions",
    "check_options",
    "parse_per_length",
    "quotas",
    "DEFAULT_TOP",
    "DEFAULT_MEASURE",
    "OPTION_HELP",
]

DEFAULT_TOP = 50_000
DEFAULT_MEASURE = Measure.LLR

OPTION_HELP: dict[str, str] = {
    "measure": "cohesion measure. "
    + "; ".join(m.description for m in Measure)
    + ". Units must attract: score > 0 (llr: more frequent than chance on every binary split).",
    "top": f"keep at most this many units, best first (default {DEFAULT_TOP:,}).",
    "min_count": "keep only n-grams counted at least this often (default and minimum: the "
    "--min-count given to maskprep count).",
    "per_length": "shares of --top per unit length, e.g. 2:0.5,3:0.3,4:0.1,5:0.1 (must add up "
    "to 1; unused places flow to the other listed lengths; unlisted lengths get none). "
    "Default: one ranking over all lengths.",
    "max_n": "longest unit in words, 2..the longest n-gram counted (default: all counted lengths).",
    "edge_words": "no unit begins or ends with one of the corpus's K most frequent words (they "
    f"may stand inside a unit); 0: no such filter (default {DEFAULT_EDGE_WORDS}).",
    "fragment_share": "drop an n-gram when one n-gram a word longer holds at least this share of "
    f"its occurrences (a fragment of it); 0: keep fragments (default {DEFAULT_FRAGMENT_SHARE}).",
}
"""Help text for each option of ``maskprep units`` (keys are ``build_units`` keywords)."""


@dataclass(frozen=True)
class UnitOptions:
    """Options of one unit-vocabulary build (validated; see ``build_units``)."""

    measure: Measure
    top: int
    min_count: int
    max_n: int
    per_length: tuple[tuple[int, float], ...] | None = None
    edge_words: int = DEFAULT_EDGE_WORDS
    fragment_share: float = DEFAULT_FRAGMENT_SHARE

    def to_json(self) -> dict[str, Any]:
        return {
            "measure": self.measure.value,
            "top": self.top,
            "min_count": self.min_count,
            "max_n": self.max_n,
            "per_length": None
            if self.per_length is None
            else {str(n): s for n, s in self.per_length},
            "edge_words": self.edge_words,
            "fragment_share": self.fragment_share,
        }


def parse_per_length(spec: Union[str, Mapping[int, float], None], *, max_n: int = MAX_N,
                     option: str = "--per-length") -> tuple[tuple[int, float], ...] | None:
    """Parse ``"2:0.5,3:0.5"`` into ``((2, 0.5), (3, 0.5))``; shares must add up to 1.

    >>> parse_per_length("3:0.25,2:0.75")
    ((2, 0.75), (3, 0.25))
    """
    if spec is None:
        return None
    example = "e.g. 2:0.5,3:0.3,4:0.1,5:0.1"
    if isinstance(spec, str):
        items: list[tuple[Any, Any]] = []
        for piece in spec.split(","):
            piece = piece.strip()
            if piece.count(":") != 1:
                raise MaskprepError(f"{option}: {piece!r} is not LENGTH:SHARE ({example})")
            items.append(tuple(p.strip() for p in piece.split(":")))  # type: ignore[arg-type]
    else:
        items = list(spec.items())
    shares: dict[int, float] = {}
    for raw_n, raw_share in items:
        try:
            length = int(raw_n)
        except (TypeError, ValueError):
            raise MaskprepError(
                f"{option}: length {raw_n!r} is not a whole number ({example})"
            ) from None
        try:
            share = float(raw_share)
        except (TypeError, ValueError):
            raise MaskprepError(
                f"{option}: share {raw_share!r} for length {length} is not a number ({example})"
            ) from None
        if not 2 <= length <= max_n:
            raise MaskprepError(f"{option}: length {length} is outside 2..{max_n} "
                                f"(units have 2 or more words, counted up to {max_n})")
        if not (math.isfinite(share) and 0.0 < share <= 1.0):
            raise MaskprepError(
                f"{option}: share {raw_share} for length {length} must be in (0, 1]"
            )
        if length in shares:
            raise MaskprepError(f"{option}: length {length} is given twice")
        shares[length] = share
    if not shares:
        raise MaskprepError(f"{option}: no LENGTH:SHARE pairs given ({example})")
    total = sum(shares.values())
    if abs(total - 1.0) > 1e-6:
        raise MaskprepError(
            f"{option}: the shares add up to {total:g}; they must add up to 1 ({example})"
        )
    return tuple(sorted(shares.items()))


def quotas(top: int, shares: Mapping[int, float], available: Mapping[int, int]) -> dict[int, int]:
    """Split `top` by `shares` (largest remainder); unused places flow to lengths with room."""
    take = {n: 0 for n in shares}
    left = top
    while left > 0:
        room = {n: available[n] - take[n] for n in shares if available[n] > take[n]}
        if not room:
            break
        weight = sum(shares[n] for n in room)
        exact = {n: left * shares[n] / weight for n in room}
        alloc = {n: int(math.floor(exact[n])) for n in room}
        spare = left - sum(alloc.values())
        for n in sorted(room, key=lambda k: (-(exact[k] - alloc[k]), k))[:spare]:
            alloc[n] += 1
        placed = {n: min(alloc[n], room[n]) for n in room}
        take.update({n: take[n] + placed[n] for n in room})
        left -= sum(placed.values())
        if not any(placed.values()):
            break
    return take


def check_options(
    meta: Mapping[str, Any],
    *,
    measure: Union[Measure, str],
    top: int,
    min_count: int | None,
    per_length: Union[str, Mapping[int, float], None],
    max_n: int | None,
    edge_words: int = 0,
    fragment_share: float = 0.0,
) -> UnitOptions:
    counted_max = int(meta["max_n"])
    if counted_max < 2:
        raise MaskprepError(
            "COUNTS_DIR: the counts hold only single words (max_n 1); re-run maskprep count "
            "with --max-n 2 or more to find multi-word units"
        )
    m = Measure.parse(measure)
    floor = int(meta["min_count"])
    min_count = floor if min_count is None else min_count
    for option, value in (("--top", top), ("--min-count", min_count)):
        if not is_whole(value, 1):
            raise MaskprepError(f"{option}: must be a whole number >= 1, got {value!r}")
    if min_count < floor:
        raise MaskprepError(
            f"--min-count {min_count}: the counts were pruned at {floor}, so rarer n-grams are "
            f"not known; use --min-count {floor} or more, or re-run maskprep count "
            f"--min-count {min_count}"
        )
    max_n = min(counted_max, MAX_N) if max_n is None else max_n
    if not is_whole(max_n, 2) or max_n > counted_max:
        raise MaskprepError(
            f"--max-n: must be in 2..{counted_max} (the longest n-grams counted), got {max_n!r}"
        )
    if not is_whole(edge_words, 0):
        raise MaskprepError(
            f"--edge-words: must be a whole number >= 0 (0: no filter), got {edge_words!r}"
        )
    if (
        isinstance(fragment_share, bool)
        or not isinstance(fragment_share, (int, float, np.floating))
        or not 0.0 <= float(fragment_share) <= 1.0
    ):
        raise MaskprepError(f"--fragment-share: must be a number in [0, 1] (0: keep fragments), "
                            f"got {fragment_share!r}")
    shares = parse_per_length(per_length, max_n=int(max_n))
    return UnitOptions(
        measure=m,
        top=int(top),
        min_count=int(min_count),
        max_n=int(max_n),
        per_length=shares,
        edge_words=int(edge_words),
        fragment_share=float(fragment_share),
    )
