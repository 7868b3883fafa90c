"""Compare masking strategies side by side on the same packed sequences.

`compare_strategies` packs (a sample of) a corpus exactly as `maskprep mask`
does, masks the same sequences with each strategy (copy 0, the same seed) and
measures what each one hides with the code that writes ``stats.json``
(`stats.MaskStats`) plus the target figures of `targetstats.TargetStats`:
within-unit leakage (against the pmi segmentation of the same words, when a
unit vocabulary is given), the easy-target share (punctuation or the 100 most
frequent words of the sample itself), targets by word-frequency band and
targets per sequence. It runs the task loop of `shards.write_shards`
(`shards.taskloop.TaskLoop`) and measures with `MaskStats.add`, so with the
whole corpus the figures equal the ``stats.json`` of ``maskprep mask`` with
the same options and seed. CORPUS may be an encoded directory
(`maskprep encode`): the figures are then byte for byte those of the raw corpus.

Sampling: ``sample=N`` takes at most N sequences, spread over the corpus
tasks in proportion to their bytes on disk (largest remainders), each task
contributing its first sequences; ``sample=None`` takes every sequence.

Outputs: ``compare.json`` (``{"strategies": {name: figures}, "options": ...}``)
and ``compare.html`` (see `maskprep.compare.page`). This module writes no
shards and does not choose units.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np

from .._checks import is_whole
from .._resume import LOCK_STATE, locked_output
from .._tables import format_table
from ..errors import MaskprepError
from ..wording import name_files, plural
from ..encoded.source import SourceTask
from ..masking.sampler import UNITS_REMEDY, MaskingConfig, MixPer, Strategy, needs_units
from ..packing import PackedBatch, PackingConfig
from ..shards.taskloop import LoopJob, TaskLoop
from ..masking.strategies import check_seed
from ..stats.masks import MaskStats
from ..stats.targets import TOP_WORDS, TargetStats, targets_per_sequence

__all__ = [
    "CompareConfig",
    "compare_strategies",
    "parse_strategies",
    "format_compare_table",
    "sample_quotas",
    "resolve_strategies",
    "ALL_STRATEGIES",
    "DEFAULT_SAMPLE",
]

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


# ------------------------------------------------------------------ the task function

@dataclass(frozen=True)
class _Job:
    loop: LoopJob
    config: CompareConfig
    strategies: tuple[Strategy, ...]


def _compare_task(job: _Job, task: SourceTask, quota: int | None) -> dict[str, Any]:
    """Pack one task (its first `quota` sequences) and mask them with every strategy (`TaskLoop`)."""
    loop = TaskLoop(job.loop, task)
    cfg = job.config
    masking = {s: cfg.masking(s) for s in job.strategies}
    pmi_cfg = cfg.masking(Strategy.PMI)
    stats = {s: MaskStats() for s in job.strategies}
    targets = {s: TargetStats() for s in job.strategies}
    examples: list[dict[str, Any]] = []
    fallback: list[dict[str, Any]] = []
    for pb in loop.packed(quota):
        # the vocabulary units of these words, for within-unit leakage (the pmi strategy's own units)
        groups = loop.units(pb, pmi_cfg) if loop.table is not None else None
        rows: dict[Strategy, tuple[np.ndarray, np.ndarray, np.ndarray]] = {}
        for s in job.strategies:
            units, masked, labels = loop.mask(pb, masking[s], 0)
            stats[s].add(
                masked_ids=masked,
                labels=labels,
                unit_ids=units,
                word_ids=pb.word_ids,
                attention_mask=pb.attention_mask,
                mask_token_id=loop.mask_id,
                first_copy=True,
            )
            targets[s].add(
                masked_ids=masked,
                labels=labels,
                unit_ids=units,
                word_ids=pb.word_ids,
                word_keys=pb.word_keys,
                word_kinds=pb.word_kinds,
                attention_mask=pb.attention_mask,
                mask_token_id=loop.mask_id,
                group_ids=groups,
            )
            rows[s] = (masked, labels, units)
        if len(examples) < cfg.examples:
            _pick_examples(pb, rows, groups, examples, fallback, cfg.examples)
    return {"task": task.index, "sequences": loop.sequences, "read": loop.read.to_dict(),
            "stats": {s.value: stats[s].to_state() for s in job.strategies},
            "targets": {s.value: targets[s].to_state() for s in job.strategies},
            "examples": (examples + fallback)[:cfg.examples]}


def _pick_examples(
    pb: PackedBatch,
    rows: Mapping[Strategy, tuple[np.ndarray, ...]],
    groups: np.ndarray | None,
    examples: list[dict[str, Any]],
    fallback: list[dict[str, Any]],
    want: int,
) -> None:
    """Keep rows to show: first those holding a multi-word vocabulary unit, else the first rows."""
    n_words = pb.word_ids.max(axis=1, initial=-1) + 1
    rich = (
        np.zeros(len(pb), bool)
        if groups is None
        else (groups.max(axis=1, initial=-1) + 1) < n_words
    )
    for r in range(len(pb)):
        dest = examples if rich[r] else fallback
        if len(examples) >= want or (dest is fallback and len(fallback) >= want):
            continue
        dest.append(
            {
                "sequence_id": int(pb.sequence_ids[r]),
                "rich": bool(rich[r]),
                "input_ids": pb.input_ids[r].tolist(),
                "attention_mask": pb.attention_mask[r].tolist(),
                "units": None if groups is None else groups[r].tolist(),
                "strategies": {
                    s.value: {
                        "input_ids": m[r].tolist(),
                        "labels": lab[r].tolist(),
                        "unit_ids": u[r].tolist(),
                    }
                    for s, (m, lab, u) in rows.items()
                },
            }
        )


# ------------------------------------------------------------------ the driver

def sample_quotas(weights: Sequence[float], sample: int | None) -> list[int | None]:
    """Split `sample` sequences over tasks in proportion to `weights` (largest remainders).

    >>> sample_quotas([3.0, 1.0], 10)
    [8, 2]
    """
    if sample is None:
        return [None] * len(weights)
    total = float(sum(weights))
    if total <= 0:
        shares = [sample / len(weights)] * len(weights) if weights else []
    else:
        shares = [sample * w / total for w in weights]
    base = [math.floor(s) for s in shares]
    order = sorted(range(len(shares)), key=lambda i: (-(shares[i] - base[i]), i))
    for i in order[:sample - sum(base)]:
        base[i] += 1
    return base  # type: ignore[return-value]


def _load_units(units: str | Path | None, info: Any,
                words: Any = None) -> tuple[Any, str | None, dict[str, Any] | None]:
    if units is None:
        return None, None, None
    from ..shards.write import file_sha256
    from ..units.files import read_units_for

    vocab = read_units_for(units, info, words)
    digest = file_sha256(units)
    lengths = {str(k): int(v) for k, v in zip(*np.unique(np.asarray(vocab.n), return_counts=True))}
    doc = {
        "path": str(units),
        "sha256": digest,
        "units": len(vocab),
        "measure": vocab.measure.value,
        "by_length": lengths,
    }
    if (
        "units_tokenizer_hash" in vocab.source
    ):  # built with another tokenizer that has the same words
        doc["built_with_tokenizer"] = vocab.source["units_tokenizer_hash"]
    return vocab.by_length(), digest, doc


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


@locked_output(LOCK_STATE)
def compare_strategies(corpus: Sequence[str], *, tokenizer: Any, output: str | Path,
                       config: CompareConfig = CompareConfig(), units: str | Path | None = None,
                       corpus_options: Any = None, executor: Any = None, words: Any = None,
                       memory: str | int = "2GiB") -> dict[str, Any]:
    """Mask the same sequences with each strategy; write compare.json and compare.html; return the JSON.

    `words` (a `WordsConfig`, default the tokenizer's words) defines the words of
    the word, span and pmi strategies and of the leakage figures.

    >>> doc = compare_strategies(["plays.txt"], tokenizer="tokenizer.json", output="cmp", units="units.parquet")  # doctest: +SKIP
    >>> doc["strategies"]["pmi"]["within_word_leakage"]  # doctest: +SKIP
    0.0
    """
    from ..corpus.reader import ReadStats
    from ..encoded.source import open_source, read_stats_of
    from ..execute import Executor, map_tasks
    from .._files import atomic_write_json
    from ..packing import check_packing_tokenizer
    from ..tokenizer.words import words_option

    executor = executor or Executor()
    source = open_source(list(corpus), corpus_options)
    words = source.check_words(words_option(words))
    from .._paths import check_apart

    check_apart(output, [*source.inputs, *source.files],
                others=[str(x) for x in (tokenizer, units) if isinstance(x, (str, Path))])
    from .._budget import check_budget
    from ..count.types import parse_memory

    check_budget(
        parse_memory(memory),
        option=f"--memory {memory}",
        executor=executor,
        tasks=len(source.tasks),
    )
    corpus_options = source.options
    info = source.tokenizer(tokenizer, stage="compare")
    info.require_mask()
    check_packing_tokenizer(info)
    config.packing().check(info)
    by_length, units_digest, units_doc = _load_units(units, info, words)
    strategies, skipped = resolve_strategies(config, by_length is not None)
    out = Path(output)
    if out.exists() and not out.is_dir():
        raise MaskprepError(f"-o {out}: exists and is not a directory")

    tasks = source.tasks
    quotas = sample_quotas([t.weight for t in tasks], config.sample)
    loop = LoopJob(
        tokenizer_json=info.json,
        tokenizer_name=info.name,
        tokenizer_hash=info.hash,
        packing=config.packing(),
        corpus_options=corpus_options,
        seed=config.seed,
        units=by_length,
        units_digest=units_digest,
        words=None if words.is_tokenizer else words,
    )
    job = _Job(loop=loop, config=config, strategies=strategies)
    todo = [(job, t, q) for t, q in zip(tasks, quotas) if q != 0]
    results = list(map_tasks(_compare_task, todo, executor=executor, label="compare",
                             describe=lambda i: todo[i][1].describe()))
    stats = {s: MaskStats() for s in strategies}
    targets = {s: TargetStats() for s in strategies}
    read = ReadStats()
    examples: list[dict[str, Any]] = []
    for res in results:
        for s in strategies:
            stats[s].merge(MaskStats.from_state(res["stats"][s.value]))
            targets[s].merge(TargetStats.from_state(res["targets"][s.value]))
        read.merge(read_stats_of(res["read"]))
        examples.extend(res["examples"])
    sequences = sum(res["sequences"] for res in results)
    if sequences == 0:
        raise MaskprepError(
            f"{name_files(corpus)}: corpus is empty (no non-empty documents)"
        )
    from ..tokenizer.encoding import warn_literal_specials

    warn_literal_specials(info, read.literal_specials, ", ".join(map(str, corpus)))
    examples = sorted(examples, key=lambda e: not e["rich"])[
        : config.examples
    ]  # stable: task order kept

    figures = {}
    for s in strategies:
        options = {
            "strategy": s.value,
            "rate": config.rate,
            "mix": list(config.mix),
            "mix_per": config.mix_per.value,
            "span_p": config.span_p,
            "span_max": config.span_max,
            "seq_len": config.seq_len,
            "pack": config.pack,
        }
        doc = stats[s].to_dict(
            seed=config.seed,
            layout="static",
            options=options,
            note="rate is over maskable (non-special) tokens; each sequence's budget is "
            "round(rate x its maskable tokens), so per-sequence rates vary",
        )
        doc.update(targets[s].to_dict(top_words=config.top_words))
        doc["targets_per_sequence"] = targets_per_sequence(stats[s])
        figures[s.value] = doc
    doc = {
        "format": "maskprep-compare",
        "strategies": figures,
        "skipped": skipped,
        "order": [s.value for s in strategies],
        "options": {**config.to_json(), "strategies": [s.value for s in strategies], "copy": 0},
        "sample": {
            "sequences": sequences,
            "asked": config.sample,
            "tasks": len(todo),
            "how": "all sequences"
            if config.sample is None
            else "the first sequences of each corpus task, tasks weighted by their bytes on disk",
        },
        "corpus": {
            "files": list(source.files),
            "fingerprint": source.fingerprint,
            **read.to_dict(),
        },
        "tokenizer": info.describe(),
        "units": units_doc,
        "words": words.describe(),
        "notes": _notes(config, units_doc is not None),
    }
    from .page import render_compare_html
    from ..report.html import write_page

    out.mkdir(parents=True, exist_ok=True)
    atomic_write_json(out / "compare.json", doc)
    write_page(out / "compare.html", render_compare_html(doc, examples=examples, tokenizer=info))
    return doc


def _notes(config: CompareConfig, has_units: bool) -> list[str]:
    notes = [
        "Every figure is counted from the masked rows of this comparison with the code that writes stats.json "
        "for maskprep mask (copy 0, the same seed), not taken from the options.",
        "Rates are over maskable (non-special) tokens. The budget is a number of tokens; strategies with "
        "longer units take fewer, longer units to meet it, and near the end of a budget long units may not "
        "fit, so rates can fall slightly short.",
        f"Easy targets: punctuation, or one of the {config.top_words} most frequent words of the sequences "
        "compared (frequencies counted in this sample, not from a reference list).",
        "Within-word leakage: share of targets whose word keeps a visible (unmasked, maskable) token. "
        "Within-unit leakage: the same with the vocabulary unit of the pmi segmentation of the same words.",
        "A word or unit cut by a sequence boundary counts once in each sequence.",
    ]
    if not has_units:
        notes.append(
            "No unit vocabulary was given, so pmi is not compared and within-unit leakage is not "
            "measured."
        )
    return notes


def format_compare_table(doc: dict[str, Any]) -> str:
    """The terminal summary of a comparison: one row per strategy.

    >>> print(format_compare_table(doc))  # doctest: +SKIP
    """
    def pct(x: float | None) -> str:
        return "-" if x is None else f"{100 * x:.1f}%"

    def num(x: float | None, spec: str = ".2f") -> str:
        return "-" if x is None else format(x, spec)

    head = (
        "strategy",
        "rate",
        "tok/unit",
        "words/unit",
        "multiword",
        "word leak",
        "unit leak",
        "easy",
        "targets/seq",
    )
    rows = [head]
    for name in doc["order"]:
        f = doc["strategies"][name]
        rows.append(
            (
                name,
                pct(f["masking_rate"]["corpus"]),
                num(f["unit_lengths"]["mean_tokens"]),
                num(f["unit_lengths"]["mean_words"]),
                pct(f["multiword_share"]),
                pct(f["within_word_leakage"]),
                pct(f["within_unit_leakage"]),
                pct(f["easy_target_share"]),
                num(f["targets_per_sequence"]["mean"], ".1f"),
            )
        )
    lines = [format_table(rows)]
    s = doc["sample"]
    lines.append(
        f"\n{plural(s['sequences'], 'sequence')} of {doc['options']['seq_len']} tokens, seed {doc['options']['seed']}"
        f", asked rate {doc['options']['rate']:g} of maskable tokens"
    )
    for name, why in doc["skipped"].items():
        lines.append(f"{name}: {why}")
    return "\n".join(lines)
