"""Fragmentation audit: how a vocabulary splits a corpus's words.

For each tokenizer (given, or trained on the corpus at several sizes) one
streaming pass over the corpus measures, over word occurrences: tokens per
word (words that are not punctuation-only, and all words), the share of words
split into 2+ tokens, tokens per character, the unknown-token rate, the share
of continuation tokens (tokens that are not the first of their word), and the
same by frequency band of word types (top 1k, 1k-10k, 10k-100k, rarer). It
lists the most frequent words split into the most pieces.

Statistics are accumulated per distinct word (numpy reductions per batch,
merged by key), so memory grows with the number of distinct words, not with
the corpus. Whitespace-only pieces of the pre-tokenization are not words and
are left out of every figure.

It does not change tokenizers; `train_on_corpus` only trains and saves one.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Sequence

import numpy as np

from ..corpus.reader import CorpusOptions, ReadStats, iter_batches, iter_corpus, plan_tasks, resolve_inputs
from ..errors import MaskprepError
from .._files import atomic_write_json
from ..progress import Progress
from ..tokenizer.encoding import PUNCT, SPACE, SPECIAL, WORD, TokenizerInfo, encode_stream, load_tokenizer, save_tokenizer, \
    unique_rows
from ..tokenizer.train import TrainConfig, check_trained_size, train_tokenizer

BANDS = ((1, 1000, "top 1k"), (1001, 10000, "1k-10k"), (10001, 100000, "10k-100k"), (100001, None, "rarer"))


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
class _TypeTable:
    """Per distinct word: occurrences, tokens, split occurrences, characters, kind."""

    keys: np.ndarray = field(default_factory=lambda: np.zeros(0, np.uint64))
    occ: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    tokens: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    split: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    chars: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    kind: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int8))

    def add(self, keys: np.ndarray, occ: np.ndarray, tokens: np.ndarray, split: np.ndarray,
            chars: np.ndarray, kind: np.ndarray) -> None:
        all_keys = np.concatenate([self.keys, keys])
        uniq, inv = np.unique(all_keys, return_inverse=True)
        n = len(uniq)

        def merged(a: np.ndarray, b: np.ndarray) -> np.ndarray:
            return np.bincount(inv, weights=np.concatenate([a, b]).astype(np.float64), minlength=n).astype(np.int64)

        self.occ = merged(self.occ, occ)
        self.tokens = merged(self.tokens, tokens)
        self.split = merged(self.split, split)
        self.chars = merged(self.chars, chars)
        k = np.zeros(n, np.int8)
        k[inv] = np.concatenate([self.kind, kind])
        self.kind = k
        self.keys = uniq


def train_on_corpus(corpus: list[str], *, model: str, vocab_size: int, lowercase: bool,
                    corpus_options: CorpusOptions = CorpusOptions(), output: Path | None = None,
                    quiet: bool = False, name: str | None = None) -> TokenizerInfo:
    """Train a tokenizer on a corpus and optionally save it.

    >>> train_on_corpus(["sample_corpus"], model="wordpiece", vocab_size=8000, lowercase=True)  # doctest: +SKIP
    """
    config = TrainConfig(model=model, vocab_size=vocab_size, lowercase=lowercase)
    files = resolve_inputs(corpus)
    stats = ReadStats()
    with Progress(f"train {model}-{vocab_size}", unit="documents", quiet=quiet) as progress:
        def docs() -> Any:
            for text in iter_corpus([str(f) for f in files], corpus_options, stats):
                progress.advance(1)
                yield text

        info = train_tokenizer(docs(), config, name=name, check_size=False)
    if stats.documents == 0:
        raise MaskprepError(f"{', '.join(corpus)}: corpus is empty (no non-empty documents)")
    check_trained_size(info, config)
    if output is not None:
        save_tokenizer(info, output)
    return info


def audit_tokenizer(info: TokenizerInfo, corpus: list[str], *, corpus_options: CorpusOptions = CorpusOptions(),
                    top_words: int = 25, frequent_types: int = 1000, quiet: bool = False) -> dict[str, Any]:
    """Fragmentation figures of one tokenizer on a corpus (one streaming pass).

    >>> audit_tokenizer(load_tokenizer("tok.json"), ["sample_corpus"])["tokens_per_word"]  # doctest: +SKIP
    1.21
    """
    files = resolve_inputs(corpus)
    tasks = plan_tasks(files, corpus_options)
    stats = ReadStats()
    table = _TypeTable()
    pending: list[tuple[np.ndarray, ...]] = []
    pending_words = 0
    tokens_total = unk_total = cont_total = 0
    unk = info.unk_id
    total_bytes = sum(f.stat().st_size for f in files)
    with Progress(f"audit {info.name}", total=float(total_bytes), unit="bytes (on disk)", quiet=quiet) as progress:
        for task in tasks:
            before = stats.bytes_read
            batches = iter_batches(task, corpus_options, stats)
            for batch in encode_stream(info, batches):
                lengths = batch.word_lengths
                keep = batch.word_kinds != SPACE
                if not keep.all():
                    tok_keep = np.repeat(keep, lengths)
                else:
                    tok_keep = None
                ids = batch.ids if tok_keep is None else batch.ids[tok_keep]
                tokens_total += len(ids)
                if unk is not None:
                    unk_total += int(np.count_nonzero(ids == unk))
                lk = lengths[keep]
                cont_total += int((lk - 1).clip(min=0).sum())
                # Reduce this batch to distinct words before merging (numpy, no per-word Python).
                keys = batch.word_keys[keep]
                rows, first, inv = unique_rows(keys.reshape(-1, 1))
                uniq = rows[:, 0]
                n = len(uniq)
                pending.append((uniq,
                                np.bincount(inv, minlength=n).astype(np.int64),
                                np.bincount(inv, weights=lk, minlength=n).astype(np.int64),
                                np.bincount(inv, weights=(lk >= 2), minlength=n).astype(np.int64),
                                np.bincount(inv, weights=batch.word_chars[keep], minlength=n).astype(np.int64),
                                batch.word_kinds[keep][first]))
                pending_words += n
                if pending_words > 2_000_000:
                    _flush(table, pending)
                    pending_words = 0
                progress.advance(_disk_share(task, files, stats.bytes_read - before))
                before = stats.bytes_read
    _flush(table, pending)
    if stats.documents == 0:
        raise MaskprepError(f"{', '.join(corpus)}: corpus is empty (no non-empty documents)")
    return _summarise(info, table, tokens_total, unk_total, cont_total, stats, top_words, frequent_types)


def _disk_share(task: Any, files: list[Path], decoded: int) -> float:
    # Progress is in bytes on disk; compressed files advance in proportion (approximate, display only).
    return float(decoded) if task.compression is None else float(decoded) / 4.0


def _flush(table: _TypeTable, pending: list[tuple[np.ndarray, ...]]) -> None:
    if pending:
        cols = [np.concatenate([p[i] for p in pending]) for i in range(6)]
        table.add(*cols)
        pending.clear()


def _summarise(info: TokenizerInfo, t: _TypeTable, tokens_total: int, unk_total: int, cont_total: int,
               stats: ReadStats, top_words: int, frequent_types: int) -> dict[str, Any]:
    is_word = t.kind == WORD
    is_any = (t.kind == WORD) | (t.kind == PUNCT) | (t.kind == SPECIAL)
    occ_w, tok_w = int(t.occ[is_word].sum()), int(t.tokens[is_word].sum())
    occ_a, tok_a = int(t.occ[is_any].sum()), int(t.tokens[is_any].sum())
    chars_a = int(t.chars[is_any].sum())
    if occ_w == 0:
        raise MaskprepError("corpus has no words (only punctuation or whitespace)")
    # Rank word types by frequency (ties by key, so ranks are deterministic).
    widx = np.flatnonzero(is_word)
    order = widx[np.lexsort((t.keys[widx], -t.occ[widx]))]
    bands = []
    for lo, hi, label in BANDS:
        sel = order[lo - 1:hi] if hi is not None else order[lo - 1:]
        occ = int(t.occ[sel].sum())
        bands.append({
            "band": label, "rank_from": lo, "rank_to": hi, "types": int(len(sel)), "occurrences": occ,
            "occurrence_share": occ / occ_w,
            "tokens_per_word": (float(t.tokens[sel].sum()) / occ) if occ else None,
            "split_share": (float(t.split[sel].sum()) / occ) if occ else None,
        })
    # The most frequent words split into the most pieces.
    frequent = order[:frequent_types]
    pieces = t.tokens[frequent] / t.occ[frequent]
    worst = frequent[np.lexsort((np.arange(len(frequent)), -pieces))][:top_words]
    by_key = {wt.key: wt for wt in info._types.values()}
    worst_rows = []
    for i in worst:
        wt = by_key.get(int(t.keys[i]))
        rank = int(np.flatnonzero(order == i)[0]) + 1
        worst_rows.append({
            "word": wt.text if wt else None, "rank": rank, "count": int(t.occ[i]),
            "tokens": float(t.tokens[i] / t.occ[i]),
            "pieces": [info.tokenizer.id_to_token(x) for x in wt.ids] if wt else None,
        })
    return {
        "name": info.name, "vocab_size": info.vocab_size, "tokenizer_hash": info.hash,
        "documents": stats.documents, "empty_documents_skipped": stats.empty_skipped,
        "invalid_utf8_replaced": stats.invalid_utf8,
        "words": occ_w, "words_all": occ_a, "word_types": int(is_word.sum()), "tokens": tokens_total,
        "tokens_per_word": tok_w / occ_w, "tokens_per_word_all": tok_a / occ_a if occ_a else None,
        "split_share": float(t.split[is_word].sum()) / occ_w,
        "tokens_per_char": tok_a / chars_a if chars_a else None,
        "unk_rate": unk_total / tokens_total if tokens_total else 0.0,
        "continuation_share": cont_total / tokens_total if tokens_total else 0.0,
        "bands": bands, "worst_words": worst_rows,
    }


def run_audit(corpus: list[str], config: AuditConfig, *, output: Path,
              corpus_options: CorpusOptions = CorpusOptions(), quiet: bool = False) -> dict[str, Any]:
    """Audit given and freshly trained tokenizers; write audit.json and audit.html.

    >>> run_audit(["sample_corpus"], AuditConfig(vocab_sizes=(2000, 8000)), output=Path("out"))  # doctest: +SKIP
    """
    infos: list[TokenizerInfo] = [load_tokenizer(p) for p in config.tokenizers]
    resolve_inputs(corpus)  # fail early on bad paths, before any training
    for size in config.vocab_sizes:
        name = f"{config.model}-{size}"
        tok_path = output / "tokenizers" / f"{name}.json"
        infos.append(train_on_corpus(corpus, model=config.model, vocab_size=size, lowercase=config.lowercase,
                                     corpus_options=corpus_options, output=tok_path, quiet=quiet, name=name))
    names = [i.name for i in infos]
    for i, info in enumerate(infos):  # make names unique for tables and charts
        if names.count(info.name) > 1:
            info.name = f"{info.name}#{i + 1}"
    results = [audit_tokenizer(info, corpus, corpus_options=corpus_options, top_words=config.top_words,
                               frequent_types=config.frequent_types, quiet=quiet) for info in infos]
    doc = {"corpus": [str(f) for f in resolve_inputs(corpus)], "bands": [b[2] for b in BANDS],
           "notes": ["Words are the tokenizer's own pre-tokenization pieces; punctuation-only words are left out "
                     "of tokens_per_word and split_share but kept in tokens_per_word_all.",
                     "Frequency bands rank word types by their count in this corpus."],
           "tokenizers": results}
    output.mkdir(parents=True, exist_ok=True)
    atomic_write_json(output / "audit.json", doc)
    from ..report.html import write_page

    write_page(output / "audit.html", render_audit_html(doc))
    return doc


def format_audit_table(doc: dict[str, Any]) -> str:
    """The terminal summary: one row per tokenizer, then tokens per word by band."""
    rows = [("tokenizer", "vocab", "tok/word", "tok/word all", "split", "tok/char", "unk", "cont.")]
    for r in doc["tokenizers"]:
        rows.append((r["name"], f"{r['vocab_size']:,}", f"{r['tokens_per_word']:.3f}",
                     f"{r['tokens_per_word_all']:.3f}", f"{r['split_share']:.1%}", f"{r['tokens_per_char']:.3f}",
                     f"{r['unk_rate']:.2%}", f"{r['continuation_share']:.1%}"))
    out = [_format_rows(rows), "", "tokens per word by frequency band of word types"]
    brow = [("tokenizer",) + tuple(doc["bands"])]
    for r in doc["tokenizers"]:
        brow.append((r["name"],) + tuple("-" if b["tokens_per_word"] is None else f"{b['tokens_per_word']:.3f}"
                                         for b in r["bands"]))
    out.append(_format_rows(brow))
    for r in doc["tokenizers"][:3]:
        worst = [w for w in r["worst_words"] if w["word"] is not None and w["tokens"] > 1][:8]
        if worst:
            out.append(f"\nmost fragmented frequent words ({r['name']}): "
                       + ", ".join(f"{w['word']} ({' '.join(w['pieces'])})" for w in worst))
    return "\n".join(out)


def _format_rows(rows: Sequence[tuple[str, ...]]) -> str:
    widths = [max(len(r[i]) for r in rows) for i in range(len(rows[0]))]
    lines = []
    for j, r in enumerate(rows):
        cells = [c.ljust(w) if i == 0 else c.rjust(w) for i, (c, w) in enumerate(zip(r, widths))]
        lines.append("  ".join(cells))
        if j == 0:
            lines.append("  ".join("-" * w for w in widths))
    return "\n".join(lines)


def render_audit_html(doc: dict[str, Any]) -> str:
    """The audit page: chart of tokens per word by band, one line per tokenizer, and tables."""
    from ..report import charts
    from ..report import html as report
    toks = doc["tokenizers"]
    chart = charts.line_chart(
        title="Tokens per word by frequency band of word types", x_labels=list(doc["bands"]),
        series={r["name"]: [b["tokens_per_word"] for b in r["bands"]] for r in toks},
        y_label="tokens per word", y_min=1.0)
    split_chart = charts.bar_chart(
        title="Share of word occurrences split into 2+ tokens, by band", categories=list(doc["bands"]),
        series={r["name"]: [b["split_share"] for b in r["bands"]] for r in toks},
        y_label="split share", percent=True)
    summary = report.table(
        headers=["tokenizer", "vocab size", "tokens/word", "tokens/word (all)", "split share", "tokens/char",
                 "unknown rate", "continuation share", "words", "word types"],
        rows=[[r["name"], r["vocab_size"], round(r["tokens_per_word"], 3), round(r["tokens_per_word_all"], 3),
               f"{r['split_share']:.1%}", round(r["tokens_per_char"], 3), f"{r['unk_rate']:.2%}",
               f"{r['continuation_share']:.1%}", r["words"], r["word_types"]] for r in toks])
    band_rows = []
    for r in toks:
        for b in r["bands"]:
            band_rows.append([r["name"], b["band"], b["types"], b["occurrences"], f"{b['occurrence_share']:.1%}",
                              "-" if b["tokens_per_word"] is None else round(b["tokens_per_word"], 3),
                              "-" if b["split_share"] is None else f"{b['split_share']:.1%}"])
    bands_table = report.table(headers=["tokenizer", "band", "types", "occurrences", "share of words",
                                        "tokens/word", "split share"], rows=band_rows)
    sections = [("Tokens per word by frequency band", chart + split_chart), ("Summary", summary),
                ("By frequency band", bands_table)]
    for r in toks:
        sections.append((f"Most fragmented frequent words: {r['name']}", report.table(
            headers=["word", "frequency rank", "count", "tokens", "pieces"],
            rows=[[w["word"], w["rank"], w["count"], round(w["tokens"], 2), " ".join(w["pieces"] or [])]
                  for w in r["worst_words"]])))
    return report.page(title="Vocabulary fragmentation audit",
                       subtitle="Corpus: " + ", ".join(doc["corpus"]), sections=sections, notes=doc["notes"])
