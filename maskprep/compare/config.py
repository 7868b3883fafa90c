"""The options of `maskprep compare`: which strategies, how they mask, how many sequences.

`CompareConfig` checks every option on construction with the same checks as
`maskprep mask` (`MaskingConfig`, `PackingConfig`), so a comparison masks
exactly as a mask run with the same options would; `resolve_strategies` says
which strategies run when none are named (pmi only with a unit vocabulary).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

from .._checks import is_whole
from ..errors import MaskprepError
from ..masking.sampler import UNITS_REMEDY, MaskingConfig, MixPer, Strategy, needs_units
from ..masking.strategies import check_seed
from ..packing import PackingConfig
from ..stats.targets import TOP_WORDS

__all__ = ["CompareConfig", "parse_strategies", "resolve_strategies", "ALL_STRATEGIES",
           "DEFAULT_SAMPLE", "MAX_EXAMPLES"]

ALL_STRATEGIES: tuple[Strategy, ...] = (Strategy.TOKEN, Strategy.WORD, Strategy.SPAN, Strategy.PMI)
DEFAULT_SAMPLE = 10_000
MAX_EXAMPLES = 20


def parse_strategies(value: str | Sequence[str | Strategy] | None, *, option: str = "--strategies",
                     ) -> tuple[Strategy, ...] | None:
    """``"token,pmi"`` or ``["token", "pmi"]`` -> strategies in the given order; None stays None.

    >>> parse_strategies("token, span")
    (<Strategy.TOKEN: 'token'>, <Strategy.SPAN: 'span'>)
    """
    if value is None:
        return None
    parts = [p.strip() for p in value.split(",")] if isinstance(value, str) else list(value)
    names = ", ".join(s.value for s in ALL_STRATEGIES)
    out: list[Strategy] = []
    for p in parts:
        try:
            s = p if isinstance(p, Strategy) else Strategy(p)
        except ValueError:
            raise MaskprepError(f"{option}: {p!r} is not a strategy; choose from {names} "
                                "(comma-separated, e.g. token,word,span,pmi)") from None
        if s in out:
            raise MaskprepError(f"{option}: {s.value} is listed twice")
        out.append(s)
    if not out:
        raise MaskprepError(f"{option}: give at least one strategy of {names}")
    return tuple(out)


@dataclass(frozen=True)
class CompareConfig:
    """Options of a comparison, validated on construction.

    ``strategies=None`` means all four, pmi only when a unit vocabulary is given.
    ``sample``: most sequences compared (None: all). ``top_words``: how many of
    the sample's most frequent words count as easy targets.

    >>> CompareConfig(strategies="token,word", sample=500).strategies
    (<Strategy.TOKEN: 'token'>, <Strategy.WORD: 'word'>)
    """

    strategies: tuple[Strategy, ...] | None = None
    rate: float = 0.15
    mix: tuple[float, float, float] = (0.8, 0.1, 0.1)
    mix_per: MixPer = MixPer.TOKEN
    span_p: float = 0.2
    span_max: int = 10
    seq_len: int = 128
    pack: bool = True
    seed: int = 0
    sample: int | None = DEFAULT_SAMPLE
    examples: int = 3
    top_words: int = TOP_WORDS

    def __post_init__(self) -> None:
        base = MaskingConfig(rate=self.rate, mix=self.mix, mix_per=self.mix_per, span_p=self.span_p,
                             span_max=self.span_max)
        packing = PackingConfig(seq_len=self.seq_len, pack=self.pack)
        check_seed(self.seed, 0)
        set_ = object.__setattr__
        set_(self, "strategies", parse_strategies(self.strategies))
        for name in ("rate", "mix", "mix_per", "span_p", "span_max"):
            set_(self, name, getattr(base, name))
        set_(self, "seq_len", packing.seq_len)
        set_(self, "pack", packing.pack)
        set_(self, "seed", int(self.seed))
        if self.sample is not None and not is_whole(self.sample, 1):
            raise MaskprepError(
                f"--sample must be a whole number of sequences >= 1 or 'all', got {self.sample!r}"
            )
        for name, value, low, high in (("--examples", self.examples, 0, MAX_EXAMPLES),
                                       ("--top-words", self.top_words, 1, 1_000_000)):
            if not is_whole(value, low, high):
                raise MaskprepError(
                    f"{name} must be a whole number from {low} to {high}, got {value!r}"
                )

    def masking(self, strategy: Strategy) -> MaskingConfig:
        """The `MaskingConfig` of one strategy: ``config.masking(Strategy.SPAN)``."""
        return MaskingConfig(strategy=strategy, rate=self.rate, mix=self.mix, mix_per=self.mix_per,
                             span_p=self.span_p, span_max=self.span_max)

    def packing(self) -> PackingConfig:
        """The `PackingConfig`: ``CompareConfig(seq_len=256).packing().seq_len`` -> 256."""
        return PackingConfig(seq_len=self.seq_len, pack=self.pack)

    def to_json(self) -> dict[str, Any]:
        """The options as JSON values: ``CompareConfig().to_json()["mix"]`` -> [0.8, 0.1, 0.1]."""
        return {
            "rate": self.rate,
            "mix": list(self.mix),
            "mix_per": self.mix_per.value,
            "span_p": self.span_p,
            "span_max": self.span_max,
            "seq_len": self.seq_len,
            "pack": self.pack,
            "seed": self.seed,
            "sample": self.sample,
            "examples": self.examples,
            "top_words": self.top_words,
        }


def resolve_strategies(
    config: CompareConfig, has_units: bool
) -> tuple[tuple[Strategy, ...], dict[str, str]]:
    """The strategies to run and the skipped ones with the reason.

    >>> resolve_strategies(CompareConfig(), False)[1]["pmi"][:30]
    'needs a unit vocabulary: pass '
    """
    if config.strategies is None:
        if has_units:
            return ALL_STRATEGIES, {}
        return ALL_STRATEGIES[:3], {
            "pmi": needs_units(
                "", UNITS_REMEDY + "; skipped, and within-unit leakage is not measured"
            ).lstrip()
        }
    if Strategy.PMI in config.strategies and not has_units:
        raise MaskprepError(
            needs_units("--strategies lists pmi, which", UNITS_REMEDY + " or leave pmi out")
        )
    return config.strategies, {}
