#!/usr/bin/env python3
"""Write maskprep's bundled sample corpus: invented English text, seeded.

What it does: generates the bulletins, notices and logbooks of the Reach
archipelago (an invented group of islands with a ferry service, a seaweed
growers' cooperative, a tide observation station and a harbour office) from a
small grammar of sentence templates over a vocabulary of a few thousand word
forms drawn with Zipf-like weights. Thirty multi-word terms are planted at
stated per-document rates; their words are reserved, so they rarely occur
outside the term (the README lists the deliberate exceptions). After writing
the text it recounts the planted terms in the written files and stores the
figures in ``planted_terms.tsv`` and ``README.md``.

Files written under ``--out`` (each to a temporary name, then renamed):
``bulletins.jsonl.gz`` (one JSON object per line: id, date, kind, text),
``logbooks.txt.gz`` (one document per line), ``planted_terms.tsv`` and
``README.md``. Gzip members carry no file name and mtime 0, so the same seed
gives byte-identical files on one machine.

What it does not do: it is not a model of real English. Word order comes from
templates, word choice from fixed pools; use it for demos and for
planted-unit tests, never as a reference for real-language behaviour.

Layout: this file makes documents, writes and recounts them and renders the
README; the data (planted terms, word lists, templates, the README page) is in
``scripts/sample_corpus_data/``; word forms and ranked pools are built in
``sample_corpus_vocab.py``; random draws and template expansion are in
``sample_corpus_grammar.py``. Run it as a script (it imports those modules from
its own directory).

Standard library and numpy only. Example:
``python scripts/make_sample_corpus.py --out /tmp/corpus --seed 0 --documents 500``
"""
from __future__ import annotations

import argparse
import collections
import datetime as dt
import gzip
import io
import json
import os
import re
import sys
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from sample_corpus_data.templates import CLAUSES, SENTENCES
from sample_corpus_data.terms import PLANTED_TERMS
from sample_corpus_data.words import MONTHS, MONTHS_SHORT, PLACES, SURNAMES, WEEKDAYS
from sample_corpus_grammar import Grammar, Uniform, capitalise, reserved_words, vocabulary_words
from sample_corpus_vocab import build_vocabulary, split_words

DEFAULT_DOCUMENTS = 20_000
BULLETIN_SHARE = 0.6  # the rest are logbook lines
FIRST_DAY = dt.date(2019, 1, 1)
DAYS_SPANNED = 6 * 365
README_TEMPLATE = (Path(__file__).resolve().parent / "sample_corpus_data"
                   / "README.template.md").read_text(encoding="utf-8")


# --------------------------------------------------------------------------
# Documents
# --------------------------------------------------------------------------

def _plan_mentions(u: Uniform, rates: np.ndarray, draws: np.ndarray) -> list[int]:
    """Indices of planted terms for one document, repeated per mention."""
    chosen = np.flatnonzero(draws < rates).tolist()
    mentions = []
    for index in chosen:
        mentions.append(index)
        while u() < 0.3 and len(mentions) < 12:
            mentions.append(index)
    return mentions


def _term_sentences(g: Grammar, mentions: list[int]) -> list[str]:
    seen: set[int] = set()
    out = []
    for index in mentions:
        term = PLANTED_TERMS[index]
        short = bool(term.short) and index in seen and g.u() < 0.5
        seen.add(index)
        out.append(g.term_sentence(term, short=short))
    return out


def _merge(g: Grammar, generic: list[str], planted: list[str]) -> list[str]:
    """Insert planted sentences among generic ones, keeping planted order."""
    slots = sorted(g.u.int(0, len(generic)) for _ in planted)
    out, last = [], 0
    for pos, sentence in zip(slots, planted):
        out.extend(generic[last:pos])
        out.append(sentence)
        last = pos
    out.extend(generic[last:])
    return out


def make_bulletin(g: Grammar, mentions: list[int]) -> tuple[str, str]:
    kind = g.kind_pick()
    opener = capitalise(g.expand(g.openers[kind]())) + "."
    n_generic = 1 + int(min(g.u(), 0.999) * 2) + (g.u.int(1, 6) if g.u() < 0.06 else 0)
    generic = [g.sentence() for _ in range(n_generic)]
    body = _merge(g, generic, _term_sentences(g, mentions))
    parts = [opener, *body]
    if g.u() < 0.3:
        parts.append(g.expand(g.closer_pick()))
    return kind, " ".join(parts)


def make_logbook(g: Grammar, mentions: list[int]) -> str:
    day = g.today
    r = g.u()
    source = g.log_source()
    if r < 0.5:
        header = f"{source}, {day.day} {MONTHS_SHORT[day.month - 1]} {day.year}."
    elif r < 0.8:
        header = f"{source} — {WEEKDAYS[day.weekday()]} {day.day} {MONTHS[day.month - 1]}."
    else:
        header = f"{day.isoformat()} {source.lower()}:"
    n_entries = 2 + int(min(g.u(), 0.999) * 2) + (g.u.int(1, 6) if g.u() < 0.06 else 0)
    entries = [capitalise(g.expand(g.log_pick())) + "." for _ in range(n_entries)]
    entries = _merge(g, entries, _term_sentences(g, mentions))
    minutes = g.u.int(5 * 60, 9 * 60)
    stamped = []
    for entry in entries:
        minutes = min(minutes + g.u.int(5, 95), 23 * 60 + 55)
        stamped.append(f"{minutes // 60:02d}:{minutes % 60:02d} {entry}")
    return " ".join([header, *stamped])


@dataclass(frozen=True)
class Corpus:
    """Generated documents, before writing."""

    bulletins: list[dict]
    logbooks: list[str]


def generate(*, seed: int = 0, documents: int = DEFAULT_DOCUMENTS) -> Corpus:
    """Generate the corpus in memory. Example: ``generate(seed=0, documents=100)``."""
    rng = np.random.default_rng(seed)
    g = Grammar(rng, FIRST_DAY)
    rates = np.array([t.rate for t in PLANTED_TERMS])
    n_bulletins = round(documents * BULLETIN_SHARE)
    n_logbooks = documents - n_bulletins
    bulletin_days = np.sort(rng.integers(0, DAYS_SPANNED, size=n_bulletins)).tolist()
    logbook_days = np.sort(rng.integers(0, DAYS_SPANNED, size=n_logbooks)).tolist()
    draws = rng.random((documents, len(PLANTED_TERMS)))
    bulletins = []
    for i, day in enumerate(bulletin_days):
        g.today = FIRST_DAY + dt.timedelta(days=day)
        kind, text = make_bulletin(g, _plan_mentions(g.u, rates, draws[i]))
        bulletins.append({"id": f"B{i + 1:06d}", "date": g.today.isoformat(),
                          "kind": kind, "text": text})
    logbooks = []
    for j, day in enumerate(logbook_days):
        g.today = FIRST_DAY + dt.timedelta(days=day)
        logbooks.append(make_logbook(g, _plan_mentions(g.u, rates, draws[n_bulletins + j])))
    return Corpus(bulletins, logbooks)


# --------------------------------------------------------------------------
# Counting planted terms in the written text
# --------------------------------------------------------------------------

def term_pattern(terms: Iterable[str]) -> re.Pattern:
    """One case-insensitive, whole-word regex matching any of ``terms``.

    Words of a term may be separated by any run of whitespace.
    Example: ``term_pattern(["Vell Haven"]).findall("at vell  haven.")``.
    """
    alternatives = sorted((r"\s+".join(map(re.escape, t.split())) for t in terms),
                          key=len, reverse=True)
    return re.compile(r"(?<!\w)(?:" + "|".join(alternatives) + r")(?!\w)", re.IGNORECASE)


def count_terms(texts: Iterable[str], terms: Sequence[str]) -> dict[str, tuple[int, int]]:
    """(documents with the term, occurrences) per term, over ``texts``.

    Example: ``count_terms(["Vell Haven, vell haven"], ["Vell Haven"]) == {"Vell Haven": (1, 2)}``.
    """
    key = {" ".join(t.lower().split()): t for t in terms}
    pattern = term_pattern(terms)
    docs = collections.Counter()
    occurrences = collections.Counter()
    for text in texts:
        found = [key[" ".join(m.group(0).lower().split())] for m in pattern.finditer(text)]
        occurrences.update(found)
        docs.update(set(found))
    return {t: (docs[t], occurrences[t]) for t in terms}


def word_counts(texts: Iterable[str]) -> collections.Counter:
    """Lower-cased counts of runs of word characters."""
    counts: collections.Counter = collections.Counter()
    word = re.compile(r"\w+")
    for text in texts:
        counts.update(word.findall(text.lower()))
    return counts


def _write_atomic(path: Path, data: bytes) -> None:
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_bytes(data)
    os.replace(tmp, path)


def _gzip_bytes(text: str) -> bytes:
    buffer = io.BytesIO()
    with gzip.GzipFile(filename="", mode="wb", fileobj=buffer, compresslevel=9, mtime=0) as gz:
        gz.write(text.encode("utf-8"))
    return buffer.getvalue()


def write_corpus(corpus: Corpus, out: Path, *, seed: int, documents: int) -> dict:
    """Write the files under ``out`` and return the figures put in the README."""
    out.mkdir(parents=True, exist_ok=True)
    jsonl = "".join(json.dumps(b, ensure_ascii=False) + "\n" for b in corpus.bulletins)
    txt = "".join(line + "\n" for line in corpus.logbooks)
    _write_atomic(out / "bulletins.jsonl.gz", _gzip_bytes(jsonl))
    _write_atomic(out / "logbooks.txt.gz", _gzip_bytes(txt))

    # Recount from what was written, not from the plan.
    with gzip.open(out / "bulletins.jsonl.gz", "rt", encoding="utf-8") as f:
        texts = [json.loads(line)["text"] for line in f]
    with gzip.open(out / "logbooks.txt.gz", "rt", encoding="utf-8") as f:
        texts += [line.rstrip("\n") for line in f]
    terms = [t.text for t in PLANTED_TERMS]
    counts = count_terms(texts, terms)
    words = word_counts(texts)
    inside: collections.Counter = collections.Counter()
    for t in PLANTED_TERMS:
        for w in t.text.lower().split():
            inside[w] += counts[t.text][1]
    rows = []
    for t in PLANTED_TERMS:
        docs, occ = counts[t.text]
        content = [w for w in t.text.lower().split() if w not in ("of", "on")]
        outside = sum(words[w] - inside[w] for w in dict.fromkeys(content))
        rows.append((t, docs, occ, outside))
    tsv = ["term\twords\tdocuments_with_term\toccurrences\ttarget_rate"]
    tsv += [f"{t.text}\t{len(t.text.split())}\t{d}\t{o}\t{t.rate:.3f}" for t, d, o, _ in rows]
    _write_atomic(out / "planted_terms.tsv", ("\n".join(tsv) + "\n").encode("utf-8"))

    figures = {
        "documents": len(texts), "bulletins": len(corpus.bulletins),
        "logbooks": len(corpus.logbooks),
        "text_bytes": sum(len(t.encode("utf-8")) for t in texts),
        "jsonl_bytes": len(jsonl.encode("utf-8")), "txt_bytes": len(txt.encode("utf-8")),
        "words": sum(words.values()), "word_types": len(words),
        "non_ascii_docs": sum(1 for t in texts if not t.isascii()),
        **rank_figures(words),
    }
    _write_atomic(out / "README.md", render_readme(rows, figures, seed=seed,
                                                  documents=documents).encode("utf-8"))
    return figures


def rank_figures(words: collections.Counter) -> dict:
    """Rank-frequency slope (ranks 10-1,000) and tail share of word forms without digits."""
    freq = np.array(sorted((c for w, c in words.items() if not any(ch.isdigit() for ch in w)),
                           reverse=True), dtype=np.float64)
    ranks = np.arange(1, len(freq) + 1)
    fit = slice(9, min(1000, len(freq)))
    if fit.stop - fit.start < 2:
        return {"zipf_slope": float("nan"), "tail_share": 0.0}
    slope = float(np.polyfit(np.log(ranks[fit]), np.log(freq[fit]), 1)[0])
    return {"zipf_slope": slope, "tail_share": float(freq[2000:].sum() / freq.sum()),
            "alpha_types": len(freq)}


def render_readme(rows: list, figures: dict, *, seed: int, documents: int) -> str:
    """The sample corpus README, with figures counted from the written files."""
    n = figures["documents"]
    command = "python scripts/make_sample_corpus.py"
    if seed != 0:
        command += f" --seed {seed}"
    if documents != DEFAULT_DOCUMENTS:
        command += f" --documents {documents}"
    table = ["| term | words | target share of documents | documents with term | "
             "observed share | occurrences | its words outside the term |",
             "|---|---:|---:|---:|---:|---:|---:|"]
    for t, docs, occ, outside in rows:
        table.append(f"| {t.text} | {len(t.text.split())} | {100 * t.rate:.1f}% | {docs:,} | "
                     f"{100 * docs / n:.2f}% | {occ:,} | {outside:,} |")
    v = build_vocabulary()
    generated = (len(v.surnames) + len(v.places)
                 - len(split_words(SURNAMES)) - len(split_words(PLACES)))
    return README_TEMPLATE.format(
        command=command, seed=seed, table="\n".join(table),
        nouns=f"{len(v.nouns):,}", mass=f"{len(v.mass):,}",
        generated=f"{generated:,}",
        verbs=f"{len(v.transitive) + len(v.intransitive):,}",
        adjectives=f"{len(v.adjectives):,}", adverbs=f"{len(v.adverbs):,}",
        clauses=len(CLAUSES), frames=len(SENTENCES),
        zipf=f"{figures['zipf_slope']:.2f}", tail=f"{100 * figures['tail_share']:.1f}",
        alpha_types=f"{figures.get('alpha_types', 0):,}",
        documents=f"{n:,}", bulletins=f"{figures['bulletins']:,}",
        logbooks=f"{figures['logbooks']:,}",
        text_mb=f"{figures['text_bytes'] / 1e6:.2f}",
        jsonl_mb=f"{figures['jsonl_bytes'] / 1e6:.2f}",
        txt_mb=f"{figures['txt_bytes'] / 1e6:.2f}",
        words=f"{figures['words']:,}", word_types=f"{figures['word_types']:,}",
        non_ascii=f"{figures['non_ascii_docs']:,}")


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        description="Write maskprep's synthetic sample corpus (invented text, seeded).")
    parser.add_argument("--out", type=Path,
                        default=Path(__file__).resolve().parent.parent / "sample_corpus",
                        help="output folder (default: sample_corpus/ in this repository)")
    parser.add_argument("--seed", type=int, default=0, help="random seed (default: 0)")
    parser.add_argument("--documents", type=int, default=DEFAULT_DOCUMENTS,
                        help="number of documents in both files together "
                             f"(default: {DEFAULT_DOCUMENTS})")
    args = parser.parse_args(argv)
    if args.documents < 2:
        parser.error(f"--documents must be at least 2, got {args.documents}")
    if args.seed < 0:
        parser.error(f"--seed must be zero or positive, got {args.seed}")
    if args.out.exists() and not args.out.is_dir():
        parser.error(f"--out {args.out} is a file; pass a folder (it is created if missing)")
    clash = reserved_words() & vocabulary_words()
    if clash:
        raise SystemExit(f"planted-term words used by the ordinary vocabulary: {sorted(clash)}")
    corpus = generate(seed=args.seed, documents=args.documents)
    figures = write_corpus(corpus, args.out, seed=args.seed, documents=args.documents)
    print(f"wrote {figures['documents']:,} documents "
          f"({figures['text_bytes'] / 1e6:.2f} MB of text) to {args.out}", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
