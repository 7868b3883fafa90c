"""`maskprep verify ENCODED_DIR`: check an encoded directory against its manifest.

Checks that every listed file exists with its recorded size and sha256, that
no stray task file is present, that the tokenizer copy has the recorded
hash, and, reading every task, that the documents, words, tokens and word
types add up to the manifest's figures, that every word refers to a word
type of its task and that the totals are the sums of the tasks. It never
changes the directory.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .._files import file_sha256
from ..errors import MaskprepError
from .format import MANIFEST, EncodedManifest, EncodedTask, open_ipc, read_word_table

__all__ = ["EncodedReport", "verify_encoded"]


@dataclass
class EncodedReport:
    """What `verify_encoded` found: ``report.ok``, ``report.faults``."""

    tasks: int = 0
    documents: int = 0
    tokens: int = 0
    faults: list[str] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not self.faults


def _check_task(t: EncodedTask, report: EncodedReport) -> None:
    name = Path(t.docs).name
    try:
        table = read_word_table(t.words)
        reader = open_ipc(t.docs, "documents")
    except MaskprepError as exc:
        report.faults.append(str(exc))
        return
    docs = words = tokens = 0
    lengths = table.lengths
    for i in range(reader.num_record_batches):
        col = reader.get_batch(i).column("words")
        types = np.asarray(col.values.to_numpy(zero_copy_only=False), dtype=np.int64)
        docs += len(col)
        words += len(types)
        if len(types) and types.max() >= len(table):
            report.faults.append(
                f"{name}: batch {i} refers to word type {int(types.max())}, but the task has "
                f"{len(table)} types"
            )
            return
        tokens += int(lengths[types].sum())
    expect = {"documents": (docs, t.documents), "words": (words, t.num_words),
              "tokens": (tokens, t.tokens), "word types": (len(table), t.types),
              "batches": (reader.num_record_batches, len(t.batches))}
    for what, (have, want) in expect.items():
        if have != want:
            report.faults.append(f"{name}: {have:,} {what}, manifest says {want:,}")
    if sum(b[0] for b in t.batches) != docs:
        report.faults.append(
            f"{name}: read statistics of its batches count other documents than it holds"
        )
    report.documents += docs
    report.tokens += tokens


def verify_encoded(directory: str | Path) -> EncodedReport:
    """Check an encoded directory: ``verify_encoded("enc/").ok``."""
    from ..tokenizer.encoding import load_tokenizer

    d = Path(directory)
    m = EncodedManifest.read(d)
    report = EncodedReport(tasks=len(m.tasks))
    listed = set()
    for t in m.tasks:
        for path, size, digest in (
            (t.docs, t.docs_bytes, t.docs_sha256),
            (t.words, t.words_bytes, t.words_sha256),
        ):
            p = Path(path)
            listed.add(p.name)
            if not p.is_file():
                report.faults.append(f"{p.name}: listed in {MANIFEST} but missing")
            elif p.stat().st_size != size:
                report.faults.append(
                    f"{p.name}: {p.stat().st_size:,} bytes, {MANIFEST} says {size:,} (truncated "
                    "or changed)"
                )
            elif file_sha256(p) != digest:
                report.faults.append(
                    f"{p.name}: sha256 differs from {MANIFEST} (changed or damaged)"
                )
    for p in sorted(d.glob("*.arrow")):
        if p.name not in listed:
            report.faults.append(f"{p.name}: not listed in {MANIFEST}")
    tok = d / "tokenizer.json"
    if not tok.is_file():
        report.faults.append("tokenizer.json: missing")
    else:
        try:
            if load_tokenizer(tok).hash != m.tokenizer["hash"]:
                report.faults.append(f"tokenizer.json: its hash differs from the one in {MANIFEST}")
        except MaskprepError as exc:
            report.faults.append(str(exc))
    if report.faults:
        return report
    for t in m.tasks:
        _check_task(t, report)
    totals = m.doc["totals"]
    sums = {"tasks": len(m.tasks), "documents": sum(t.documents for t in m.tasks),
            "words": sum(t.num_words for t in m.tasks), "tokens": sum(t.tokens for t in m.tasks),
            "bytes": sum(t.docs_bytes + t.words_bytes for t in m.tasks)}
    for key, value in sums.items():
        if totals.get(key) != value:
            report.faults.append(
                f"{MANIFEST}: totals.{key} is {totals.get(key)!r}, the tasks add up to {value:,}"
            )
    return report
