"""Fragmentation audit: how a vocabulary splits a corpus's words.

For each tokenizer (given, or trained on the corpus at several sizes) one
streaming pass over the corpus measures, over word occurrences: tokens per
word (words that are not punctuation-only, and all words), the share of words
split into 2+ tokens, tokens per character, the unknown-token rate, the share
of continuation tokens (tokens that are not the first of their word), and the
same by frequency band of word types (top 1k, 1k-10k, 10k-100k, rarer). It
lists the most frequent words split into the most pieces (see `words`).

Each corpus task (or task of an encoded directory) is measured in its own
worker task; the driver adds up the tasks' tables. Statistics are
accumulated per distinct word form (word key and a hash of its
token ids; numpy reductions per batch, merged by key), so memory grows with the
number of distinct words, not with the corpus. Whitespace-only pieces of the
pre-tokenization are not words and are left out of every figure.

It does not change tokenizers; `train_on_corpus` only trains and saves one.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from .._resume import LOCK_STATE, locked_output
from ..corpus.reader import CorpusOptions, ReadStats
from ..corpus.sample import SampleSpec, describe_sample, draw_sample
from ..encoded.source import SourceTask, TaskReader, open_source, read_stats_of
from ..errors import MaskprepError
from ..wording import name_files
from .._files import atomic_write_json
from ..report.html import write_page
from ..tokenizer.encoding import (PUNCT, SPACE, SPECIAL, WORD, TokenizerInfo, WordType,
                                  tokenizer_from_json, unique_rows, warn_literal_specials)
from ..tokenizer.words import WordsConfig, code_points, script_classes
from .page import render_audit_html
from .training import sampled_tasks, train_on_corpus
from .words import cached_forms, form_hash, form_hashes, main_forms, select_fragmented, shown_forms

AUDIT_BANDS = (
    (1, 1000, "top 1k"),
    (1001, 10000, "1k-10k"),
    (10001, 100000, "10k-100k"),
    (100001, None, "rarer"),
)


@dataclass(frozen=True)
class AuditConfig:
    """What to audit: ``AuditConfig(tokenizers=("tok.json",), vocab_sizes=(2000, 8000))``."""

    tokenizers: tuple[str, ...] = ()
    vocab_sizes: tuple[int, ...] = ()
    model: str = "wordpiece"
    lowercase: bool = True
    top_words: int = 25
    frequent_types: int = 1000   # "frequent" words for the worst-fragmented list

    def __post_init__(self) -> None:
        for v in self.vocab_sizes:
            if not isinstance(v, int) or v <= 0:
                raise MaskprepError(f"--vocab-sizes: {v!r} is not a positive integer")


@dataclass
class _FormTable:
    """Per word form (word key, form hash): occurrences, tokens, split uses, characters, kind."""

    keys: np.ndarray = field(default_factory=lambda: np.zeros((0, 2), np.uint64))
    occ: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    tokens: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    split: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    chars: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    kind: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int8))

    def add(self, keys: np.ndarray, occ: np.ndarray, tokens: np.ndarray, split: np.ndarray,
            chars: np.ndarray, kind: np.ndarray) -> None:
        uniq, first, inv = unique_rows(np.concatenate([self.keys, keys]))
        n = len(uniq)

        def merged(a: np.ndarray, b: np.ndarray) -> np.ndarray:
            return np.bincount(
                inv, weights=np.concatenate([a, b]).astype(np.float64), minlength=n
            ).astype(np.int64)

        self.occ = merged(self.occ, occ)
        self.tokens = merged(self.tokens, tokens)
        self.split = merged(self.split, split)
        self.chars = merged(self.chars, chars)
        self.kind = np.concatenate([self.kind, kind])[first]
        self.keys = uniq


@dataclass(frozen=True)
class _AuditJob:
    tokenizer_json: str
    tokenizer_name: str
    options: CorpusOptions
    words: WordsConfig | None = None


def _task_words(info: TokenizerInfo, reader: TaskReader) -> list[WordType]:
    """The word forms (kind WORD) of one task: from its word table, or its fresh tokenizer cache."""
    table = reader.word_table()
    if table is None:  # raw text: this task's own tokenizer cache holds exactly its word types
        return [wt for wt in info.word_types() if wt.kind == WORD]
    sel = np.flatnonzero(table.fields["word_kinds"] == WORD)
    keys, offs = table.fields["word_keys"], table.offsets
    # one step per word type
    return [
        WordType(int(keys[i]), WORD, text, tuple(table.ids[offs[i] : offs[i + 1]].tolist()))
        for i, text in zip(sel.tolist(), table.texts.take(sel).to_pylist())
    ]


def _audit_task(job: _AuditJob, task: SourceTask) -> dict[str, Any]:
    """Task function: per-word-form figures of one task (raw text or an encoded directory's)."""
    # a fresh word-type cache
    info = tokenizer_from_json(job.tokenizer_json, name=job.tokenizer_name)
    reader = TaskReader(task, info, job.options, words=job.words)
    table = _FormTable()
    pending: list[tuple[np.ndarray, ...]] = []
    pending_words = 0
    tokens_total = unk_total = cont_total = crossing = 0
    unk = info.unk_id
    for batch in reader:
        crossing += batch.crossing_tokens  # raw text; an encoded task gives its total below
        lengths = batch.word_lengths
        keep = batch.word_kinds != SPACE
        ids = batch.ids if keep.all() else batch.ids[np.repeat(keep, lengths)]
        tokens_total += len(ids)
        if unk is not None:
            unk_total += int(np.count_nonzero(ids == unk))
        lk = lengths[keep]
        cont_total += int((lk - 1).clip(min=0).sum())
        # Reduce this batch to distinct word forms before merging (numpy, no Python loop).
        forms = form_hashes(batch.ids, batch.word_offsets)[keep]
        rows, first, inv = unique_rows(np.stack([batch.word_keys[keep], forms], axis=1))
        n = len(rows)
        pending.append(
            (
                rows,
                np.bincount(inv, minlength=n).astype(np.int64),
                np.bincount(inv, weights=lk, minlength=n).astype(np.int64),
                np.bincount(inv, weights=(lk >= 2), minlength=n).astype(np.int64),
                np.bincount(inv, weights=batch.word_chars[keep], minlength=n).astype(np.int64),
                batch.word_kinds[keep][first],
            )
        )
        pending_words += n
        if pending_words > 2_000_000:
            _flush(table, pending)
            pending_words = 0
    _flush(table, pending)
    if task.encoded is not None:
        crossing = task.encoded.crossing_tokens
    return {
        "table": (table.keys, table.occ, table.tokens, table.split, table.chars, table.kind),
        "totals": (tokens_total, unk_total, cont_total, crossing),
        "read": reader.consumed.to_dict(),
        "words": _task_words(info, reader),
    }


def audit_tokenizer(
    info: TokenizerInfo,
    corpus: list[str],
    *,
    corpus_options: CorpusOptions = CorpusOptions(),
    top_words: int = 25,
    frequent_types: int = 1000,
    quiet: bool = False,
    executor: Any = None,
    words: WordsConfig | None = None,
    sample: SampleSpec | None = None,
) -> dict[str, Any]:
    """Fragmentation figures of one tokenizer on a corpus or an encoded directory, in parallel.

    `words` chooses the word definition (default: the tokenizer's own words); `sample` audits a
    seeded sample of a raw corpus (`maskprep.corpus.sample`), described in the result's "sample".

    >>> audit_tokenizer(load_tokenizer("tok.json"),
    ...                 ["sample_corpus"])["tokens_per_word"]  # doctest: +SKIP
    1.21
    """
    from ..execute import Executor, map_tasks

    source = open_source(corpus, corpus_options)
    # an encoded directory must have been made with this tokenizer
    source.tokenizer(info, stage="audit")
    executor = executor or Executor(quiet=quiet)
    wcfg: WordsConfig = source.check_words(words or WordsConfig())
    job = _AuditJob(info.json, info.name, source.options, None if wcfg.is_tokenizer else wcfg)
    draw, tasks = None, source.tasks
    if sample is not None:
        draw = draw_sample(source.files, corpus_options, sample)
        tasks = sampled_tasks(source, draw, sample)
    table, stats = _FormTable(), ReadStats()
    pending: list[tuple[np.ndarray, ...]] = []
    totals = [0, 0, 0, 0]
    seen: dict[tuple[int, tuple[int, ...]], WordType] = {}
    for res in map_tasks(
        _audit_task,
        [(job, t) for t in tasks],
        executor=executor,
        label=f"audit {info.name}",
        describe=lambda i: tasks[i].describe(),
        weights=[t.weight / 1e6 for t in tasks],
        unit="MB",
    ):
        pending.append(res["table"])
        if sum(len(p[0]) for p in pending) > 2_000_000:
            _flush(table, pending)
        totals = [a + b for a, b in zip(totals, res["totals"])]
        stats.merge(read_stats_of(res["read"]))
        for wt in res["words"]:
            seen.setdefault((wt.key, wt.ids), wt)
    _flush(table, pending)
    if draw is not None:
        draw.check(stats)
    if stats.documents == 0:
        raise MaskprepError(f"{name_files(corpus)}: corpus is empty (no non-empty documents)")
    warn_literal_specials(info, stats.literal_specials, name_files(corpus))
    forms = [seen[k] for k in sorted(seen)]  # in an order that does not depend on the tasks
    tokens_total, unk_total, cont_total, crossing = totals
    result = _summarise(
        info, table, tokens_total, unk_total, cont_total, stats, top_words, frequent_types, forms
    )
    result["words_definition"] = wcfg.describe()
    result["boundary_crossing_tokens"] = crossing
    result["boundary_crossing_share"] = crossing / tokens_total if tokens_total else 0.0
    result["unspaced_script_share"] = _unspaced_share(table, forms)
    if draw is not None:
        result["sample"] = draw.summary(stats)
    return result


def _unspaced_share(table: _FormTable, forms: list[WordType]) -> float:
    """Share of the words' characters (by occurrence) in scripts written without spaces (CJK, Thai).

    Counted over word occurrences, so frequent words weigh more.
    """
    if not forms or len(table.keys) == 0:
        return 0.0
    text_of = {wt.key: wt.text for wt in forms}
    keys, inv = np.unique(table.keys[:, 0], return_inverse=True)
    occ = np.bincount(inv, weights=table.occ.astype(np.float64), minlength=len(keys))
    known = [i for i, k in enumerate(keys.tolist()) if k in text_of]  # one step per word type
    if not known:
        return 0.0
    texts = [text_of[int(keys[i])] for i in known]
    lens = np.fromiter(map(len, texts), np.int64, count=len(texts))
    cls = script_classes(code_points("".join(texts))) != 0
    starts = np.concatenate(([0], np.cumsum(lens)[:-1]))
    script = np.add.reduceat(cls.astype(np.int64), starts) if len(cls) else np.zeros(len(texts))
    script = np.where(lens > 0, script, 0)
    w = occ[known]
    total = float((w * lens).sum())
    return float((w * script).sum() / total) if total else 0.0


def _flush(table: _FormTable, pending: list[tuple[np.ndarray, ...]]) -> None:
    if pending:
        cols = [np.concatenate([p[i] for p in pending]) for i in range(6)]
        table.add(*cols)
        pending.clear()


def _summarise(info: TokenizerInfo, f: _FormTable, tokens_total: int, unk_total: int,
               cont_total: int, stats: ReadStats, top_words: int,
               frequent_types: int, forms: list[WordType]) -> dict[str, Any]:
    # Word types from their forms: keys are sorted by word key, so forms of one word are adjacent.
    word_keys, word_of_form = np.unique(f.keys[:, 0], return_inverse=True)
    nw = len(word_keys)

    def per_word(col: np.ndarray) -> np.ndarray:
        summed = np.bincount(word_of_form, weights=col.astype(np.float64), minlength=nw)
        return summed.astype(np.int64)

    occ_t, tok_t = per_word(f.occ), per_word(f.tokens)
    split_t, chars_t = per_word(f.split), per_word(f.chars)
    kind = np.zeros(nw, np.int8)
    kind[word_of_form] = f.kind
    is_word = kind == WORD
    is_any = (kind == WORD) | (kind == PUNCT) | (kind == SPECIAL)
    occ_w, tok_w = int(occ_t[is_word].sum()), int(tok_t[is_word].sum())
    occ_a, tok_a = int(occ_t[is_any].sum()), int(tok_t[is_any].sum())
    chars_a = int(chars_t[is_any].sum())
    if occ_w == 0:
        raise MaskprepError("corpus has no words (only punctuation or whitespace)")
    # Rank word types by frequency (ties by key, so ranks are deterministic).
    widx = np.flatnonzero(is_word)
    order = widx[np.lexsort((word_keys[widx], -occ_t[widx]))]
    bands = []
    for lo, hi, label in AUDIT_BANDS:
        sel = order[lo - 1:hi] if hi is not None else order[lo - 1:]
        occ = int(occ_t[sel].sum())
        bands.append(
            {
                "band": label,
                "rank_from": lo,
                "rank_to": hi,
                "types": int(len(sel)),
                "occurrences": occ,
                "occurrence_share": occ / occ_w,
                "tokens_per_word": (float(tok_t[sel].sum()) / occ) if occ else None,
                "split_share": (float(split_t[sel].sum()) / occ) if occ else None,
            }
        )
    main = main_forms(word_of_form, f.occ, f.keys[:, 1], nw)
    main_tokens = f.tokens[main] // np.maximum(f.occ[main], 1)
    mean_tokens = tok_t / np.maximum(occ_t, 1)
    listed = select_fragmented(order, main_tokens, mean_tokens, frequent_types=frequent_types,
                               top_words=top_words)
    return {
        "name": info.name,
        "vocab_size": info.vocab_size,
        "tokenizer_hash": info.hash,
        "documents": stats.documents,
        "empty_documents_skipped": stats.empty_skipped,
        "invalid_utf8_replaced": stats.invalid_utf8,
        "words": occ_w,
        "words_all": occ_a,
        "word_types": int(is_word.sum()),
        "tokens": tokens_total,
        "tokens_per_word": tok_w / occ_w,
        "tokens_per_word_all": tok_a / occ_a if occ_a else None,
        "split_share": float(split_t[is_word].sum()) / occ_w,
        "tokens_per_char": tok_a / chars_a if chars_a else None,
        "unk_rate": unk_total / tokens_total if tokens_total else 0.0,
        "continuation_share": cont_total / tokens_total if tokens_total else 0.0,
        "bands": bands,
        "worst_words": _word_rows(info, f, word_keys, word_of_form, order, listed, forms),
    }


def _word_rows(info: TokenizerInfo, f: _FormTable, word_keys: np.ndarray,
               word_of_form: np.ndarray, order: np.ndarray,
               listed: np.ndarray, all_forms: list[WordType]) -> list[dict[str, Any]]:
    """The listed words with every form: its pieces (decoded), tokens and share of uses."""
    words = order[listed]
    cached = cached_forms(all_forms, (int(word_keys[w]) for w in words))
    rows = []
    for rank0, w in zip(listed.tolist(), words.tolist()):
        key = int(word_keys[w])
        idx = np.flatnonzero(word_of_form == w)
        idx = idx[np.lexsort((f.keys[idx, 1], -f.occ[idx]))]
        by_hash: dict[int, WordType | None] = {}
        for wt in cached.get(key, []):
            h = form_hash(wt.ids)
            # two forms with one hash: their pieces are not known
            by_hash[h] = None if h in by_hash and by_hash[h] != wt else wt
        known = [by_hash.get(int(f.keys[i, 1])) for i in idx]
        count = int(f.occ[idx].sum())
        shown = shown_forms(info, [wt.ids for wt in known if wt is not None])
        texts = iter(shown)
        forms = [{"pieces": next(texts) if wt is not None else None,
                  "tokens": int(f.tokens[i] // f.occ[i]), "count": int(f.occ[i]),
                  "share": float(f.occ[i] / count),
                  "token_strings": None if wt is None else [info.tokenizer.id_to_token(x)
                                                            for x in wt.ids]}
                 for i, wt in zip(idx, known)]
        text = next((wt.text for wt in cached.get(key, [])), None)
        rows.append({"word": text, "rank": rank0 + 1, "count": count, "tokens": forms[0]["tokens"],
                     "pieces": forms[0]["pieces"], "share": forms[0]["share"],
                     "tokens_per_use": float(f.tokens[idx].sum() / count), "forms": forms})
    return rows


@locked_output(LOCK_STATE)
def run_audit(corpus: list[str], config: AuditConfig, *, output: Path,
              corpus_options: CorpusOptions = CorpusOptions(), quiet: bool = False,
              size_option: str = "--vocab-sizes", executor: Any = None,
              words: WordsConfig | None = None,
              sample: SampleSpec | None = None) -> dict[str, Any]:
    """Audit given and freshly trained tokenizers; write audit.json and audit.html.

    With `sample`, tokenizers are trained and audited on the same seeded sample of the corpus,
    and audit.json, the page and the table say so (its "sample": documents, bytes, share).

    A size the corpus cannot give stops the audit with an error naming `size_option` and the size.

    >>> run_audit(["sample_corpus"], AuditConfig(vocab_sizes=(2000, 8000)),
    ...           output=Path("out"))  # doctest: +SKIP
    """
    source = open_source(corpus, corpus_options)  # fail early on bad paths, before any training
    from .._paths import check_apart

    check_apart(output, [*source.inputs, *source.files], others=config.tokenizers)
    infos: list[TokenizerInfo] = [source.tokenizer(p, stage="audit") for p in config.tokenizers]
    if source.encoded and sample is not None:
        raise MaskprepError(
            f"{sample.option}: {source.describe()} is an encoded directory; sample the raw "
            "corpus files instead"
        )
    if source.encoded:
        if config.vocab_sizes:
            raise MaskprepError(
                f"{size_option}: {source.describe()} is an encoded directory; training needs "
                "the raw text: give the corpus files instead"
            )
        if not infos:
            infos.append(source.tokenizer(None, stage="audit"))
    for size in config.vocab_sizes:
        name = f"{config.model}-{size}"
        tok_path = output / "tokenizers" / f"{name}.json"
        infos.append(
            train_on_corpus(
                corpus,
                model=config.model,
                vocab_size=size,
                lowercase=config.lowercase,
                corpus_options=corpus_options,
                output=tok_path,
                quiet=quiet,
                name=name,
                option=size_option,
                sample=sample,
            )
        )
    names = [i.name for i in infos]
    for i, info in enumerate(infos):  # make names unique for tables and charts
        if names.count(info.name) > 1:
            info.name = f"{info.name}#{i + 1}"
    results = [
        audit_tokenizer(
            info,
            corpus,
            corpus_options=corpus_options,
            top_words=config.top_words,
            frequent_types=config.frequent_types,
            quiet=quiet,
            executor=executor,
            words=words,
            sample=sample,
        )
        for info in infos
    ]
    w = words or WordsConfig()
    doc: dict[str, Any] = {"corpus": list(source.files), "bands": [b[2] for b in AUDIT_BANDS],
           "words": w.describe(), "words_label": w.label(),
           "notes": [words_note(w, results), "Punctuation-only words are left out "
                     "of tokens_per_word and split_share but kept in tokens_per_word_all.",
                     "Frequency bands rank word types by their count in this corpus."],
           "fragmented_list": {"frequent_types": config.frequent_types,
                               "top_words": config.top_words},
           "tokenizers": results}
    if sample is not None:
        doc["sample"] = results[0]["sample"]
        doc["notes"].insert(1, describe_sample(doc["sample"]))
    output.mkdir(parents=True, exist_ok=True)
    atomic_write_json(output / "audit.json", doc)
    write_page(output / "audit.html", render_audit_html(doc))
    return doc


def words_note(words: WordsConfig, results: list[dict[str, Any]]) -> str:
    """The sentence that says which words the figures are about (and warns where that misleads)."""
    if words.is_tokenizer:
        note = "Words are the tokenizer's own pre-tokenization pieces (--words tokenizer)."
        share = max((r.get("unspaced_script_share", 0.0) for r in results), default=0.0)
        if share >= 0.2:
            note += (
                f" {share:.0%} of this corpus's word characters are of scripts written without "
                "spaces "
                "(CJK, Thai): there these pieces are single characters or whole clauses, not "
                "words, "
                "so the per-word figures say little; use --words zh, ja, th, auto or cohesion."
            )
        return note
    return (
        f"Words are those of --words {words.label()}: each token belongs to the word holding its "
        "first character; tokens running past the end of their word are counted as "
        "boundary-crossing and join the word they start in."
    )
