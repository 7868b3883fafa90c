"""Masking: strategies as unit segmentations, and the one budgeted sampler.

A strategy only decides the units (see `maskprep.masking.strategies`); `mask_batch` is
the single sampler for all of them, used both for static masking (pre-masked
shards) and on the fly for `--dynamic` shards, which store unmasked
`input_ids` plus `unit_ids`. Same arrays, seed and copy give the same result.

Sampler, per sequence (vectorised over the batch with numpy):

1. budget = floor(rate * maskable + 0.5), i.e. rate times the number of
   non-special tokens rounded half up (no minimum: a very short sequence can
   get a budget of 0);
2. units are visited in ascending order of a random priority per unit: the top
   40 bits of draw (PRIORITY, unit index), ties going to the lower unit index
   (at most 2**24 - 1 units per sequence); a unit is taken only if its token
   count fits the remaining budget; this goes on until the budget is met or
   nothing fits. Long units can therefore be skipped near the end of the
   budget, which makes the lengths of masked units somewhat shorter than the lengths of all units;
3. every token of a taken unit is a target; each target is replaced by the
   mask token, a random id from `random_token_ids` (which may equal the
   original), or kept, with probabilities `mix`, drawn per target token
   (draw (MIX, token position)) or per unit (draw (MIX_UNIT, unit index)).
   The random id is random_token_ids[draw (RANDOM, token position) % K].

Draws are counter-based (see `maskprep.masking.strategies`), so a sequence is masked the
same whatever batch it is in. This module does not pack sequences, write shards
or compute statistics.
"""

from __future__ import annotations

import enum
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from maskprep._checks import is_real, is_whole
from maskprep.errors import MaskprepError
from maskprep.masking.strategies import (
    TAG_MIX, TAG_MIX_UNIT, TAG_PRIORITY, TAG_RANDOM, UnitTable, absorb, check_seed, check_span,
    pmi_units, pmi_word_starts, sequence_states, span_lengths, span_units, span_word_starts,
    token_units, uniforms, units_from_word_starts, word_starts_from_units, word_units,
)

__all__ = [
    "Strategy",
    "MixPer",
    "MaskingConfig",
    "parse_mix",
    "needs_units",
    "strategy_units",
    "select_targets",
    "mask_batch",
    "token_units",
    "word_units",
    "span_units",
    "pmi_units",
    "span_word_starts",
    "pmi_word_starts",
    "units_from_word_starts",
    "word_starts_from_units",
    "span_lengths",
    "UnitTable",
    "IGNORE_LABEL",
]

IGNORE_LABEL = -100  # label of non-target tokens (common practice)
UNITS_REMEDY = "pass --units units.parquet (made by `maskprep units`)"


def needs_units(subject: str = "--strategy pmi", remedy: str = UNITS_REMEDY) -> str:
    """The one message for a pmi strategy without a unit vocabulary.

    >>> needs_units()
    '--strategy pmi needs a unit vocabulary: pass --units units.parquet (made by `maskprep units`)'
    """
    return f"{subject} needs a unit vocabulary: {remedy}"
_MASK64 = (1 << 64) - 1
_UNIT_MASK = (1 << 24) - 1
_MAX_UNITS = _UNIT_MASK


class Strategy(str, enum.Enum):
    """How tokens are grouped into units: token, word, span or pmi."""

    TOKEN = "token"
    WORD = "word"
    SPAN = "span"
    PMI = "pmi"


class MixPer(str, enum.Enum):
    """Whether the replacement mix is drawn per target token or per taken unit."""

    TOKEN = "token"
    UNIT = "unit"


def _enum(cls: type[enum.Enum], value: object, option: str) -> enum.Enum:
    try:
        return cls(value.value if isinstance(value, enum.Enum) else value)
    except ValueError:
        names = ", ".join(m.value for m in cls)
        raise MaskprepError(f"{option} must be one of {names}, got {value!r}") from None


def parse_mix(mix: object) -> tuple[float, float, float]:
    """``"0.8,0.1,0.1"`` or three numbers -> (mask, random, keep), checked.

    >>> parse_mix("0.8,0.1,0.1")
    (0.8, 0.1, 0.1)
    """
    msg = (f"--mix must be three non-negative numbers (mask, random, keep) summing to 1, "
           f"got {mix!r}; pass e.g. --mix 0.8,0.1,0.1")
    try:
        parts = mix.split(",") if isinstance(mix, str) else list(mix)  # type: ignore[call-overload]
        values = tuple(float(x) for x in parts)
    except (TypeError, ValueError):
        raise MaskprepError(msg) from None
    if len(values) != 3 or not all(np.isfinite(values)) or min(values) < 0 \
            or abs(sum(values) - 1.0) > 1e-6:
        raise MaskprepError(msg)
    return values


@dataclass(frozen=True)
class MaskingConfig:
    """Masking options, validated on construction (bad values raise MaskprepError).

    Fields hold the types their hints say. For convenience the constructor also takes
    an enum's value (``"span"``) or the mix as text (``"0.8,0.1,0.1"``, see `parse_mix`)
    and stores the enum or the tuple; typed code passes the enum and the tuple.

    >>> MaskingConfig(strategy="span", rate=0.15, mix="0.8,0.1,0.1").strategy
    <Strategy.SPAN: 'span'>
    """

    strategy: Strategy = Strategy.TOKEN
    rate: float = 0.15
    mix: tuple[float, float, float] = (0.8, 0.1, 0.1)
    mix_per: MixPer = MixPer.TOKEN
    span_p: float = 0.2
    span_max: int = 10

    def __post_init__(self) -> None:
        rate = self.rate
        if not is_real(rate) or not 0.0 < float(rate) < 1.0:
            raise MaskprepError(f"--rate must be a number strictly between 0 and 1, got {rate!r}; "
                                "pass e.g. --rate 0.15")
        span_p, span_max = check_span(self.span_p, self.span_max)
        set_ = object.__setattr__
        set_(self, "rate", float(rate))
        set_(self, "span_p", span_p)
        set_(self, "span_max", span_max)
        set_(self, "mix", parse_mix(self.mix))
        set_(self, "strategy", _enum(Strategy, self.strategy, "--strategy"))
        set_(self, "mix_per", _enum(MixPer, self.mix_per, "--mix-per"))


def strategy_units(special: np.ndarray, word_ids: np.ndarray, *, config: MaskingConfig,
                   sequence_ids: np.ndarray, seed: int, copy: int = 0,
                   word_keys: np.ndarray | None = None, word_kinds: np.ndarray | None = None,
                   units: UnitTable | Mapping[int, tuple[np.ndarray, np.ndarray]] | None = None,
                   ) -> np.ndarray:
    """unit_ids int32 (B, L) for `config.strategy` (pmi needs word_keys, word_kinds, units).

    >>> strategy_units(np.array([[1, 0, 0]], bool), np.array([[-1, 0, 0]]),
    ...     config=MaskingConfig(strategy="word"), sequence_ids=np.array([0], np.uint64),
    ...     seed=0).tolist()
    [[-1, 0, 0]]
    """
    strategy = config.strategy
    if strategy is Strategy.TOKEN:
        return token_units(special)
    if strategy is Strategy.WORD:
        return word_units(special, word_ids)
    if strategy is Strategy.SPAN:
        return span_units(special, word_ids, sequence_ids=sequence_ids, seed=seed, copy=copy,
                          span_p=config.span_p, span_max=config.span_max)
    if units is None or word_keys is None or word_kinds is None:
        raise MaskprepError(needs_units())
    return pmi_units(special, word_ids, word_keys, word_kinds, units=units)


def _check_units(unit_ids: np.ndarray, sequence_ids: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    unit_ids = np.asarray(unit_ids, dtype=np.int32)
    sequence_ids = np.asarray(sequence_ids, dtype=np.uint64)
    if unit_ids.ndim != 2 or sequence_ids.shape != unit_ids.shape[:1]:
        raise ValueError(f"unit_ids must be (B, L) and sequence_ids (B,), got {unit_ids.shape} "
                         f"and {sequence_ids.shape}")
    if unit_ids.size and unit_ids.min() < -1:
        raise ValueError("unit_ids must be >= 0 on maskable tokens and -1 on special tokens")
    return unit_ids, sequence_ids


def select_targets(unit_ids: np.ndarray, *, sequence_ids: np.ndarray, seed: int, copy: int = 0,
                   rate: float = 0.15) -> np.ndarray:
    """Budgeted greedy choice of whole units: bool (B, L), True on target tokens.

    >>> int(select_targets(np.array([[-1, 0, 1, 2, 3]]), sequence_ids=np.array([0], np.uint64),
    ...     seed=0, rate=0.5).sum())
    2
    """
    unit_ids, sequence_ids = _check_units(unit_ids, sequence_ids)
    rate = MaskingConfig(rate=rate).rate
    B, L = unit_ids.shape
    U = int(unit_ids.max(initial=-1)) + 1
    if B == 0 or U == 0:
        return np.zeros((B, L), dtype=bool)
    if U > _MAX_UNITS:
        raise ValueError(f"at most {_MAX_UNITS} units per sequence are supported, got {U}")
    maskable = unit_ids >= 0
    offsets = np.arange(B, dtype=np.int64)[:, None] * U
    flat_units = offsets + unit_ids  # only read where maskable
    lengths = np.bincount(flat_units[maskable], minlength=B * U).astype(np.int32)
    budget = np.floor(rate * maskable.sum(axis=1) + 0.5).astype(np.int32)

    # Priority: top 40 bits of the draw, unit index in the low 24 bits, so keys are
    # unique within a row and any sort gives the same order (ties -> lower index).
    states = sequence_states(sequence_ids, seed=seed, copy=copy, tag=TAG_PRIORITY)
    unit_col = np.arange(U, dtype=np.uint64)
    prio = absorb(states[:, None], unit_col[None, :])
    prio &= np.uint64(~_UNIT_MASK & _MASK64)
    prio |= unit_col[None, :]
    # the keys are unique in a row, so sorting them gives the argsort's order, faster
    order = (np.sort(prio, axis=1) & np.uint64(_UNIT_MASK)).astype(np.int64)
    order += offsets
    sorted_len = lengths[order]  # (B, U), units in visiting order
    taken_sorted = np.zeros((B, U), dtype=bool)
    remaining = budget
    stop = np.zeros(B, dtype=np.int32)  # first sorted index not yet decided
    col = np.arange(U, dtype=np.int32)
    active = np.flatnonzero(remaining > 0)
    full = active.size == B
    # Each pass: among undecided units that still fit on their own, the prefix whose
    # cumulative length fits is taken; the first one after it cannot fit and is
    # skipped; the next pass resumes after it with the smaller remainder. Units
    # longer than the remainder can never be taken later, so filtering them is exact.
    while active.size:
        sub = sorted_len if full else sorted_len[active]
        rem = (remaining if full else remaining[active])[:, None]
        eligible = sub <= rem
        if not full:
            eligible &= col >= stop[active][:, None]
        csum = np.cumsum(np.where(eligible, sub, 0), axis=1, dtype=np.int32)
        fits = eligible & (csum <= rem)
        over = eligible & ~fits
        rem_after = rem[:, 0] - np.where(fits, sub, 0).sum(axis=1, dtype=np.int32)
        if full:
            taken_sorted |= fits
        else:
            taken_sorted[active] |= fits
        remaining[active] = rem_after
        stop[active] = np.argmax(over, axis=1) + 1
        active = active[over.any(axis=1) & (rem_after > 0)]
        full = False
    taken = np.zeros(B * U, dtype=bool)
    taken[order[taken_sorted]] = True
    return taken[np.where(maskable, flat_units, 0)] & maskable


def mask_batch(input_ids: np.ndarray, unit_ids: np.ndarray, *, sequence_ids: np.ndarray,
               seed: int, copy: int = 0, config: MaskingConfig, mask_token_id: int,
               random_token_ids: np.ndarray | Sequence[int]) -> tuple[np.ndarray, np.ndarray]:
    """Mask a batch: (masked input_ids int32 (B, L), labels int32 (B, L), -100 off targets).

    >>> ids, labels = mask_batch(np.array([[101, 7, 8, 102]]), np.array([[-1, 0, 1, -1]]),
    ...     sequence_ids=np.array([0], np.uint64), seed=0,
    ...     config=MaskingConfig(rate=0.5, mix=(1, 0, 0)), mask_token_id=103,
    ...     random_token_ids=np.array([7, 8]))
    >>> int((ids == 103).sum()), int((labels != -100).sum())
    (1, 1)
    """
    input_ids = np.asarray(input_ids, dtype=np.int32)
    unit_ids, sequence_ids = _check_units(unit_ids, sequence_ids)
    if input_ids.shape != unit_ids.shape:
        raise ValueError(
            f"input_ids {input_ids.shape} and unit_ids {unit_ids.shape} differ in shape"
        )
    if not isinstance(config, MaskingConfig):
        raise MaskprepError(
            "config must be a maskprep.masking.sampler.MaskingConfig, e.g. MaskingConfig(rate=0.15)"
        )
    if not is_whole(mask_token_id, 0):
        raise MaskprepError(f"mask_token_id must be the tokenizer's mask token id (an int >= 0), "
                            f"got {mask_token_id!r}")
    random_ids = np.asarray(random_token_ids, dtype=np.int32).ravel()
    m_mask, m_random, _ = config.mix
    if random_ids.size == 0 and m_random > 0:
        raise MaskprepError("random_token_ids is empty but --mix has a random share: pass the "
                            "tokenizer's non-special token ids, or a mix with random share 0")
    seed, copy = check_seed(seed, copy)

    targets = select_targets(unit_ids, sequence_ids=sequence_ids, seed=seed, copy=copy,
                             rate=config.rate)
    tb, tt = np.nonzero(targets)
    labels = np.full(input_ids.shape, IGNORE_LABEL, dtype=np.int32)
    labels[tb, tt] = input_ids[tb, tt]
    masked = input_ids.copy()
    if config.mix_per is MixPer.UNIT:
        states = sequence_states(sequence_ids, seed=seed, copy=copy, tag=TAG_MIX_UNIT)
        u = uniforms(absorb(states[tb], unit_ids[tb, tt].astype(np.uint64)))
    else:
        states = sequence_states(sequence_ids, seed=seed, copy=copy, tag=TAG_MIX)
        u = uniforms(absorb(states[tb], tt.astype(np.uint64)))
    to_mask = u < m_mask
    to_random = ~to_mask & (u < m_mask + m_random)
    masked[tb[to_mask], tt[to_mask]] = mask_token_id
    if np.any(to_random):
        rb, rt = tb[to_random], tt[to_random]
        states = sequence_states(sequence_ids, seed=seed, copy=copy, tag=TAG_RANDOM)
        pick = absorb(states[rb], rt.astype(np.uint64)) % np.uint64(random_ids.size)
        masked[rb, rt] = random_ids[pick.astype(np.int64)]
    return masked, labels
