"""Check and display shards written by `maskprep.shards.write.write_shards`.

`verify_shards` re-reads every shard listed in ``_maskprep/manifest.json``
(or, in directories of format version 1, ``manifest.json`` at the top) and
reports faults, each naming the shard file and, for row faults, the row:
sha256 and size against the manifest, schema and schema metadata against the
run's options, and row invariants: the ``copy`` column equal to the file's
copy, every list ``seq_len`` long, the first token the
start token, attention mask ones then zeros, padding where the mask is 0,
targets never special tokens (labels = original ids, shown as the mask token,
a non-special token, or unchanged), at most round(rate x maskable) targets
per row; for dynamic shards ``unit_ids`` -1 exactly on special tokens and
numbered 0, 1, ... in order; per-shard rows, tokens, maskable tokens and
targets equal to the manifest (dynamic shards are masked again with the same
sampler to count their targets), and the totals equal to manifest and stats.

`format_examples` renders rows for a terminal: the sequence as the model sees
it and the original, with masked runs marked (colour, or ``{...}`` brackets
when not on a terminal; adjacent units show as one run), and the original
text of every masked run. A random replacement is shown as its vocabulary
piece in angle brackets with a space before it (``{the <##ric>}``, on a
terminal also in another colour), never decoded in context: a continuation
piece glued to the word before would read as a different word.

This module does not write or repair shards.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterator

import numpy as np

from ..errors import MaskprepError
from ..wording import plural
from .._files import read_json
from ..masking.sampler import IGNORE_LABEL
from .layout import META_DIR, METADATA_KEY, ShardRecord
from .read import open_shards
from .write import file_sha256
from .read import ShardSet, to_numpy

__all__ = ["VerifyReport", "verify_shards", "format_examples"]

_STATIC = ("input_ids", "labels", "attention_mask", "sequence_id", "copy")
_DYNAMIC = ("input_ids", "unit_ids", "attention_mask", "sequence_id", "copy")
_META_KEYS = (
    "strategy",
    "rate",
    "mix",
    "mix_per",
    "span_p",
    "span_max",
    "seed",
    "copies",
    "seq_len",
    "pack",
    "tokenizer_hash",
    "units_sha256",
)


@dataclass
class VerifyReport:
    """Result of `verify_shards`: ``report.ok``, ``report.faults`` (one line each)."""

    directory: str
    shards: int = 0
    rows: int = 0
    faults: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not self.faults


def _first(bad: np.ndarray) -> int | None:
    idx = np.flatnonzero(bad)
    return int(idx[0]) if idx.size else None


def _check_rows(
    batch: dict[str, np.ndarray],
    *,
    ss: ShardSet,
    record: ShardRecord,
    meta: dict[str, Any],
    row0: int,
    faults: list[str],
) -> dict[str, int]:
    o, tok = ss.options, ss.manifest.tokenizer
    ids, att = batch["input_ids"], batch["attention_mask"]
    specials = np.asarray(tok["special_ids"], dtype=np.int32)
    mask_id, vocab = int(tok["mask_token_id"]), int(tok["vocab_size"])
    cls_id, pad_id = int(meta.get("cls_id", -1)), int(meta.get("pad_id", -1))

    def fault(rows_bad: Any, what: str) -> None:
        r = _first(rows_bad)
        if r is not None:
            faults.append(f"{record.file} row {row0 + r}: {what}")

    on = att == 1
    fault(~np.isin(att, (0, 1)).all(axis=1), "attention_mask holds values other than 0 and 1")
    fault((np.diff(att.astype(np.int8), axis=1) > 0).any(axis=1) | ~on[:, 0],
          "attention_mask is not ones followed by zeros")
    fault(ids[:, 0] != cls_id, f"first token is not the start token (id {cls_id})")
    fault(batch["copy"] != record.copy, f"copy is not {record.copy}, the copy of this file")
    fault(
        (~on & (ids != pad_id)).any(axis=1),
        f"a padded position (attention 0) is not the pad token {pad_id}",
    )
    is_special = np.isin(ids, specials)
    if ss.dynamic:
        units = batch["unit_ids"]
        fault(((units >= 0) == (is_special | ~on)).any(axis=1),
              "unit_ids is not -1 exactly on special tokens and padding")
        u = np.where(units >= 0, units, -1)
        last = np.maximum.accumulate(u, axis=1)
        prev = np.concatenate([np.full((len(u), 1), -1), last[:, :-1]], axis=1)
        fault(((units >= 0) & ((units < prev) | (units > prev + 1))).any(axis=1),
              "unit_ids are not numbered 0, 1, ... in order")
        masked, labels = ss.mask(batch)
        maskable = units >= 0
    else:
        labels = batch["labels"]
        masked = ids
        target = labels != IGNORE_LABEL
        fault((target & ~on).any(axis=1), "a padded position has a label")
        fault(
            (target & ((labels < 0) | (labels >= vocab))).any(axis=1), "a label is not a token id"
        )
        fault(
            (target & np.isin(labels, specials)).any(axis=1),
            "a special token is a target (label is special)",
        )
        fault((target & is_special & (ids != mask_id)).any(axis=1),
              "a target is shown as a special token other than the mask token")
        maskable = on & (target | ~is_special)
    target = labels != IGNORE_LABEL
    n_t = target.sum(axis=1)
    n_m = maskable.sum(axis=1)
    fault(
        n_t > np.floor(float(o["rate"]) * n_m + 0.5),
        "more targets than the row's budget round(rate x maskable)",
    )
    return {"tokens": int(on.sum()), "maskable": int(n_m.sum()), "targets": int(n_t.sum()),
            "masked_shown": int((target & (masked == mask_id)).sum())}


def _check_schema(
    path: Path, ss: ShardSet, record: ShardRecord, faults: list[str]
) -> dict[str, Any] | None:
    import pyarrow as pa

    try:
        if ss.options["format"] == "arrow":
            schema = pa.ipc.open_file(pa.memory_map(str(path))).schema
        else:
            import pyarrow.parquet as pq

            schema = pq.read_schema(str(path))
    except (pa.ArrowException, OSError) as exc:
        faults.append(f"{record.file}: unreadable ({exc})")
        return None
    expected: tuple[str, ...] = _DYNAMIC if ss.dynamic else _STATIC
    if not ss.manifest.has_copy_column:
        expected = expected[:-1]
    if tuple(schema.names) != expected:
        faults.append(
            f"{record.file}: columns {', '.join(schema.names)}; expected {', '.join(expected)}"
        )
        return None
    if "copy" in expected and schema.field("copy").type != pa.int16():
        faults.append(f"{record.file}: column copy is {schema.field('copy').type}; expected int16")
        return None
    try:
        meta = json.loads((schema.metadata or {})[METADATA_KEY])
    except (KeyError, ValueError):
        faults.append(f"{record.file}: no maskprep schema metadata")
        return None
    wrong = [k for k in _META_KEYS if meta.get(k) != ss.options.get(k)]
    wrong += [
        k
        for k, v in (
            ("copy", record.copy),
            ("task", record.task),
            ("mask_token_id", ss.manifest.tokenizer["mask_token_id"]),
            ("special_ids", ss.manifest.tokenizer["special_ids"]),
        )
        if meta.get(k) != v
    ]
    if meta.get("layout") != ("dynamic" if ss.dynamic else "static"):
        wrong.append("layout")
    tokenizer_words = {"definition": "tokenizer"}  # files of the tokenizer's words carry no key
    if meta.get("words", tokenizer_words) != ss.options.get("words", tokenizer_words):
        wrong.append("words (the word definition)")
    if wrong:
        faults.append(
            f"{record.file}: schema metadata differs from the manifest in {', '.join(wrong)}"
        )
    return meta


def verify_shards(directory: str | Path, *, max_faults: int = 50) -> VerifyReport:
    """Check every shard against the manifest and the row invariants.

    >>> verify_shards("shards/").ok  # doctest: +SKIP
    True
    """
    ss = open_shards(directory)
    report = VerifyReport(directory=str(directory))
    faults = report.faults
    L = int(ss.options["seq_len"])
    sums = {"rows": 0, "tokens": 0, "maskable": 0, "targets": 0}
    listed = {s.file for s in ss.manifest.shards}
    for extra in sorted(p.name for p in ss.directory.glob("shard-*") if p.name not in listed):
        faults.append(f"{extra}: shard file not listed in manifest.json")
    for record in ss.manifest.shards:
        path = ss.directory / record.file
        report.shards += 1
        if not path.is_file():
            faults.append(f"{record.file}: listed in manifest.json but missing")
            continue
        if path.stat().st_size != record.bytes or file_sha256(path) != record.sha256:
            faults.append(
                f"{record.file}: sha256 differs from manifest.json (file changed or damaged)"
            )
        meta = _check_schema(path, ss, record, faults)
        if meta is None:
            continue
        got = {"rows": 0, "tokens": 0, "maskable": 0, "targets": 0}
        try:
            for batch in _raw_batches(ss, record, L, faults):
                counts = _check_rows(
                    batch, ss=ss, record=record, meta=meta, row0=got["rows"], faults=faults
                )
                got["rows"] += len(batch["sequence_id"])
                for k in ("tokens", "maskable", "targets"):
                    got[k] += counts[k]
                if len(faults) >= max_faults:
                    break
        except Exception as exc:  # a damaged file must be reported, not crash the check
            faults.append(f"{record.file}: unreadable ({type(exc).__name__}: {exc})")
            continue
        for k, v in got.items():
            if v != getattr(record, k):
                faults.append(f"{record.file}: {k} {v}, manifest.json says {getattr(record, k)}")
            sums[k] += v
        report.rows += got["rows"]
        if len(faults) >= max_faults:
            faults.append(f"stopped after {max_faults} faults")
            return report
    totals = ss.manifest.totals
    for k, v in sums.items():
        if totals.get(k) != v:
            faults.append(f"manifest.json: totals.{k} is {totals.get(k)}, the shards hold {v}")
    stats_path = ss.metadata("stats.json")
    if ss.legacy_layout:
        report.notes.append(
            f"{ss.directory}: metadata at the top of the directory (format version "
            f"{ss.manifest.format_version}); maskprep reads it, but pyarrow.dataset and other "
            "directory readers cannot open the directory until manifest.json, stats.json and "
            f"tokenizer.json are moved into {META_DIR}/"
        )
    if not stats_path.is_file():
        faults.append(f"{stats_path.relative_to(ss.directory)}: missing")
    else:
        stats = read_json(stats_path, what="shard statistics")
        for k, sk in (("rows", "rows"), ("tokens", "tokens"), ("maskable", "maskable_tokens"),
                      ("targets", "targets")):
            if stats.get(sk) != sums[k]:
                faults.append(f"{stats_path.relative_to(ss.directory)}: {sk} is {stats.get(sk)}, "
                              f"the shards hold {sums[k]}")
    _check_tokenizer_copy(ss, faults)
    return report


def _check_tokenizer_copy(ss: ShardSet, faults: list[str]) -> None:
    """The tokenizer copy must load and be the one the manifest names (its hash)."""
    from ..errors import MaskprepError
    from ..tokenizer.encoding import load_tokenizer

    path = ss.metadata("tokenizer.json")
    name = path.relative_to(ss.directory)
    if not path.is_file():
        faults.append(f"{name}: missing (the ids cannot be read back as text without it)")
        return
    try:
        info = load_tokenizer(path)
    except MaskprepError as exc:
        faults.append(f"{name}: damaged ({exc})")
        return
    want = ss.manifest.tokenizer.get("hash")
    if info.hash != want:
        faults.append(
            f"{name}: not the tokenizer manifest.json names (hash {info.hash[:12]}, manifest "
            f"{str(want)[:12]})"
        )


def _raw_batches(
    ss: ShardSet, record: ShardRecord, L: int, faults: list[str]
) -> Iterator[dict[str, np.ndarray]]:
    """Batches with a check that every list has exactly L entries (before reshaping)."""
    import pyarrow as pa

    row0 = 0
    for part in ss.parts(record):
        for name in part.schema.names:
            col = part.column(name)
            if isinstance(col, pa.ChunkedArray):
                col = col.combine_chunks()
            if pa.types.is_list(col.type):
                lengths = np.diff(col.offsets.to_numpy())
                bad = _first(lengths != L)
                if bad is not None:
                    faults.append(f"{record.file} row {row0 + bad}: {name} has "
                                  f"{lengths[bad]} entries, not {L}")
                    return
        row0 += part.num_rows
        yield to_numpy(part, seq_len=L, copy=record.copy)


# ------------------------------------------------------------------ show

# Control characters from the corpus are shown, never sent to the terminal: C0 ones and DEL as their
# Unicode control pictures (ESC -> U+241B), C1 ones as \x escapes.
_CONTROLS = {**{c: chr(0x2400 + c) for c in range(0x20)}, 0x7F: "\u2421",
             **{c: f"\\x{c:02x}" for c in range(0x80, 0xA0)}}


def safe_text(text: str) -> str:
    """Text with control characters made visible: ``safe_text("a\x1b[31mb")`` -> 'a\u241b[31mb'."""
    return text.translate(_CONTROLS)


def _pieces(info: Any, ids: list[int]) -> list[str]:
    """Each token's text in running text (byte and space markers decoded: `tokenizer.pieces`)."""
    from ..tokenizer.pieces import running_text

    return [safe_text(p) for p in running_text(info, ids)]  # control characters made visible


def _runs(flags: list[bool]) -> list[tuple[int, int]]:
    runs, start = [], None
    for i, f in enumerate(flags + [False]):
        if f and start is None:
            start = i
        elif not f and start is not None:
            runs.append((start, i))
            start = None
    return runs


RANDOM_OPEN, RANDOM_CLOSE = "<", ">"
_RANDOM_COLOR = "\x1b[1;37;45m"
_RUN_COLOR = "\x1b[1;30;43m"


def mark_random(pieces: list[str], tokenizer: Any, ids: list[int], random: list[bool],
                color: bool = False) -> list[str]:
    """Pieces with every random replacement shown apart: `` <piece>`` (its vocabulary string).

    >>> mark_random([" the", "ric"], tok, [5, 9], [False, True])  # doctest: +SKIP
    [' the', ' <##ric>']
    """
    out = list(pieces)
    for i in [k for k, r in enumerate(random) if r]:
        text = f"{RANDOM_OPEN}{safe_text(_vocab_text(tokenizer, int(ids[i])))}{RANDOM_CLOSE}"
        if color:
            text = f"{_RANDOM_COLOR}{text}\x1b[0m{_RUN_COLOR}"
        out[i] = " " + text
    return out


def _vocab_text(tokenizer: Any, token_id: int) -> str:
    """A vocabulary entry as text: WordPiece strings as they are (``##ric``); byte-level and
    metaspace pieces decoded (a leading space shown as ``␣``, part of a character as ``…``)."""
    from ..tokenizer.pieces import PARTIAL, SPACE_MARK

    raw = tokenizer.id_to_token(token_id) or "?"
    piece = tokenizer.decode([token_id], skip_special_tokens=False)
    if piece == raw:
        return raw
    if "\ufffd" in piece:
        return PARTIAL
    return (
        (SPACE_MARK if piece[:1].isspace() else "") + piece.strip() if piece.strip() else SPACE_MARK
    )


def _render(pieces: list[str], runs: list[tuple[int, int]], color: bool) -> str:
    out, pos = [], 0
    for a, b in runs:
        out.append("".join(pieces[pos:a]))
        inner = "".join(pieces[a:b])
        lead = inner[: len(inner) - len(inner.lstrip())]
        inner = inner.lstrip()
        out.append(lead + (f"{_RUN_COLOR}{inner}\x1b[0m" if color else "{" + inner + "}"))
        pos = b
    out.append("".join(pieces[pos:]))
    return "".join(out).strip()


def format_examples(directory: str | Path, *, n: int = 3, color: bool = False) -> str:
    """The first `n` rows of a shards directory, readable, masked runs marked.

    >>> print(format_examples("shards/", n=1))  # doctest: +SKIP
    """
    from ..tokenizer.encoding import load_tokenizer

    ss = open_shards(directory)
    tok_path = ss.metadata("tokenizer.json")
    if not tok_path.is_file():
        raise MaskprepError(
            f"{tok_path}: missing; the shards directory keeps a copy of its tokenizer"
        )
    tokenizer = load_tokenizer(tok_path).tokenizer
    mask_id = int(ss.manifest.tokenizer["mask_token_id"])
    o = ss.options
    words = o.get("words", {"definition": "tokenizer"})
    lines = [
        f"{ss.directory}: {plural(len(ss), 'row')}, strategy {o['strategy']}, "
        f"words {words['definition']}, rate {o['rate']}, mix "
        f"{'/'.join(str(x) for x in o['mix'])}, seed {o['seed']}, "
        + ("dynamic (masked here on the fly with each row's copy)" if ss.dynamic else "static"),
        ("masked runs in colour" if color else "{...} a masked run")
        + f"; {RANDOM_OPEN}piece{RANDOM_CLOSE} a random replacement, shown as its vocabulary piece "
        "(not joined to the word before it)",
    ]
    shown = 0
    for record in ss.manifest.shards:
        row_in_file = 0
        for batch in ss.file_batches(record):
            masked, labels = ss.mask(batch) if ss.dynamic else (batch["input_ids"], batch["labels"])
            for r in range(len(masked)):
                if shown >= n:
                    return "\n".join(lines)
                length = int(batch["attention_mask"][r].sum())
                shown_ids = masked[r, :length].tolist()
                lab = labels[r, :length]
                target = (lab != IGNORE_LABEL).tolist()
                orig_ids = np.where(lab != IGNORE_LABEL, lab, masked[r, :length]).tolist()
                runs = _runs(target)
                seq = int(batch["sequence_id"][r])
                lines.append("")
                lines.append(
                    f"{record.file} row {row_in_file + r}: "
                    f"sequence {seq >> 32}:{seq & 0xFFFFFFFF}, copy {record.copy}, "
                    f"{plural(length, 'token')}, {plural(sum(target), 'target')} in "
                    f"{plural(len(runs), 'run')}"
                    + (f", {masked.shape[1] - length} padding" if length < masked.shape[1] else "")
                )
                random = [
                    t and s != mask_id and s != o for t, s, o in zip(target, shown_ids, orig_ids)
                ]
                in_context = _pieces(tokenizer, shown_ids)
                p_shown = mark_random(in_context, tokenizer, shown_ids, random)
                p_orig = _pieces(tokenizer, orig_ids)
                lines.append(
                    "  input:    "
                    + _render(
                        mark_random(in_context, tokenizer, shown_ids, random, color)
                        if color
                        else p_shown,
                        runs,
                        color,
                    )
                )
                lines.append("  original: " + _render(p_orig, runs, color))
                parts = []
                for a, b in runs:
                    how = [
                        "mask"
                        if shown_ids[i] == mask_id
                        else "keep"
                        if shown_ids[i] == orig_ids[i]
                        else "random"
                        for i in range(a, b)
                    ]
                    text = "".join(p_orig[a:b]).strip()
                    seen = "".join(p_shown[a:b]).strip()
                    kinds = ", ".join(
                        f"{how.count(k)} {k}" for k in ("mask", "random", "keep") if k in how
                    )
                    parts.append(
                        f"{text!r} -> {seen!r}" + ("" if set(how) == {"mask"} else f" ({kinds})")
                    )
                lines.append("  targets:  " + ("; ".join(parts) if parts else "(none)"))
                shown += 1
            row_in_file += len(masked)
    return "\n".join(lines)
