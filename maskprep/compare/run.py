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
from pathlib import Path
from typing import Any, Sequence

import numpy as np

from .._resume import LOCK_STATE, locked_output
from .._tables import format_table
from ..errors import MaskprepError
from ..wording import name_files, plural
from ..shards.taskloop import LoopJob
from ..stats.masks import MaskStats
from ..stats.targets import TargetStats, targets_per_sequence
from .config import ALL_STRATEGIES, DEFAULT_SAMPLE, CompareConfig, parse_strategies, \
    resolve_strategies
from .task import CompareJob, compare_task

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


@locked_output(LOCK_STATE)
def compare_strategies(corpus: Sequence[str], *, tokenizer: Any, output: str | Path,
                       config: CompareConfig = CompareConfig(), units: str | Path | None = None,
                       corpus_options: Any = None, executor: Any = None, words: Any = None,
                       memory: str | int = "2GiB") -> dict[str, Any]:
    """Mask the same sequences with each strategy; write compare.json and compare.html; return the
    JSON.

    `words` (a `WordsConfig`, default the tokenizer's words) defines the words of
    the word, span and pmi strategies and of the leakage figures.

    >>> doc = compare_strategies(["plays.txt"], tokenizer="tokenizer.json", output="cmp",
    ...     units="units.parquet")  # doctest: +SKIP
    >>> doc["strategies"]["pmi"]["within_word_leakage"]  # doctest: +SKIP
    0.0
    """
    from ..corpus.reader import ReadStats
    from ..encoded.source import open_source, read_stats_of
    from ..execute import Executor, map_tasks, start_workers
    from .._files import atomic_write_json
    from ..packing import check_packing_tokenizer
    from ..tokenizer.words import words_option

    executor = executor or Executor()
    source = open_source(list(corpus), corpus_options)
    words = source.check_words(words_option(words))
    from .._paths import check_apart

    check_apart(output, [*source.inputs, *source.files],
                others=[str(x) for x in (tokenizer, units) if isinstance(x, (str, Path))])
    start_workers(executor, len(source.tasks), ("maskprep.compare.task", "pyarrow"))
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
    job = CompareJob(loop=loop, config=config, strategies=strategies)
    todo = [(job, t, q) for t, q in zip(tasks, quotas) if q != 0]
    results = list(map_tasks(compare_task, todo, executor=executor, label="compare",
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

    warn_literal_specials(info, read.literal_specials, name_files(corpus))
    # stable: task order kept
    examples = sorted(examples, key=lambda e: not e["rich"])[: config.examples]

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
        "Every figure is counted from the masked rows of this comparison with the code that "
        "writes stats.json for maskprep mask (copy 0, the same seed), not taken from the options.",
        "Rates are over maskable (non-special) tokens. The budget is a number of tokens; "
        "strategies with longer units take fewer, longer units to meet it, and near the end of a "
        "budget long units may not fit, so rates can fall slightly short.",
        f"Easy targets: punctuation, or one of the {config.top_words} most frequent words of the "
        "sequences compared (frequencies counted in this sample, not from a reference list).",
        "Within-word leakage: share of targets whose word keeps a visible (unmasked, maskable) "
        "token. Within-unit leakage: the same with the vocabulary unit of the pmi segmentation of "
        "the same words.",
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
        f"\n{plural(s['sequences'], 'sequence')} of {doc['options']['seq_len']} tokens, "
        f"seed {doc['options']['seed']}"
        f", asked rate {doc['options']['rate']:g} of maskable tokens"
    )
    for name, why in doc["skipped"].items():
        lines.append(f"{name}: {why}")
    return "\n".join(lines)
