"""Read and check a pipeline file (TOML) for `maskprep run`.

`load_run_config` parses the file with `tomllib` and checks every key and
value before anything runs. A bad key or value raises `MaskprepError` naming
the file, the line (found by scanning the file text for the key in its
table) and the key, with the reason given by the stage's own config class
(`MaskingConfig`, `TrainConfig`, `CountConfig`, ...), so the rules live in one
place. Relative paths are relative to the file's directory.

The file (every table but ``[corpus]`` is optional; a stage runs when its
table is present)::

    output = "prep"                     # or -o DIR on the command line
    [corpus]    paths = ["data/"], doc_sep, text_field, text_column, strict,
                words = "tokenizer" | "zh" | "ja" | "th" | "auto" | "cohesion" (one word
                definition for every stage, so counts, units and masks agree)
    [tokenizer] path = "tokenizer.json" | model, vocab_size, lowercase (train one), sample, seed
    [audit]     vocab_sizes, tokenizers, model, lowercase, top_words, include_tokenizer, sample,
                seed (sample = "10%" or "200MB": a seeded sample, as --sample of the commands)
    [count]     max_n, min_count, memory
    [units]     measure, top, min_count, per_length, max_n, edge_words, fragment_share
    [mask]      strategies, rate, mix, mix_per, span_p, span_max, seq_len, pack, copies, seed,
                format, shard_rows, dynamic
    [compare]   strategies, sample, examples, top_words, and rate ... seed (default: [mask]'s)

The tables, the types of their keys and the errors naming a key's line are in
`maskprep.pipeline.keys`. This module runs nothing (see `maskprep.pipeline.runner`).
"""

from __future__ import annotations

import functools
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

from ..errors import MaskprepError
from ..masking.sampler import needs_units
from .keys import SECTIONS, KeyChecker, check_each, find_key_line, key_error, shown

__all__ = ["RunConfig", "load_run_config", "find_key_line", "key_error", "SECTIONS"]

_MASKING = ("rate", "mix", "mix_per", "span_p", "span_max")
_PACKING = ("seq_len", "pack")
_SHARDS = ("copies", "seed", "format", "shard_rows", "dynamic")


@dataclass(frozen=True)
class RunConfig:
    """A checked pipeline file: every stage's options, paths made absolute.

    >>> cfg = load_run_config("sample_corpus/demo.toml")  # doctest: +SKIP
    >>> cfg.mask["strategies"]  # doctest: +SKIP
    ('token', 'word', 'span', 'pmi')
    """

    path: Path
    output: Path | None
    corpus: tuple[str, ...]
    corpus_options: Any
    tokenizer_path: Path | None
    train: Any  # TrainConfig or None
    audit: Mapping[str, Any] | None = None
    count: Any = None  # CountConfig or None
    units: Mapping[str, Any] | None = None
    mask: Mapping[str, Any] | None = None
    compare: Any = None  # CompareConfig or None
    text: str = field(default="", repr=False)
    words: str = "tokenizer"  # [corpus] words: the word definition of every stage
    train_sample: Any = None  # [tokenizer] sample: a corpus.sample.SampleSpec or None


def _train_size(size: Any, _sizes: Any) -> Any:
    from ..tokenizer.train import TrainConfig

    return TrainConfig(vocab_size=size)


def load_run_config(path: str | Path, *, output: str | Path | None = None) -> RunConfig:
    """Parse and check a pipeline file; `output` (from -o) overrides its ``output`` key.

    >>> load_run_config("sample_corpus/demo.toml", output="out").output  # doctest: +SKIP
    PosixPath('out')
    """
    import tomllib

    from ..corpus.reader import CorpusOptions, resolve_inputs
    from ..tokenizer.train import TrainConfig

    path = Path(path)
    if not path.is_file():
        raise MaskprepError(f"{path}: pipeline file not found")
    try:
        text = path.read_text(encoding="utf-8")
        doc = tomllib.loads(text)
    except UnicodeDecodeError as exc:
        raise MaskprepError(f"{path}: not UTF-8 text ({exc})") from None
    except tomllib.TOMLDecodeError as exc:
        raise MaskprepError(f"{path}: not valid TOML: {exc}") from None
    c = KeyChecker(path, text, doc)
    for key in doc:
        if key not in SECTIONS and key not in SECTIONS[""]:
            raise c.fail(
                "",
                key,
                "unknown key or table; the tables are "
                + ", ".join(f"[{s}]" for s in SECTIONS if s),
            )
    top = {k: v for k, v in doc.items() if k in SECTIONS[""]}
    for key, value in top.items():
        if not isinstance(value, SECTIONS[""][key]):
            raise c.fail("", key, f"must be a string, got {shown(value)}")
    out = (
        Path(output)
        if output is not None
        else (c.path_of("", "output", top["output"], must_exist=False) if "output" in top else None)
    )

    corpus = c.table("corpus")
    if corpus is None or "paths" not in corpus:
        raise c.fail("corpus", None if corpus is not None else None,
                     "missing: add a [corpus] table with paths = [\"file or directory\", ...]")
    paths = corpus["paths"] if isinstance(corpus["paths"], list) else [corpus["paths"]]
    if not paths or not all(isinstance(p, str) for p in paths):
        raise c.fail(
            "corpus", "paths", "must be a non-empty list of file, directory or glob strings"
        )
    files = tuple(str(p if Path(p).is_absolute() else c.base / p) for p in paths)
    c.check("corpus", "paths", corpus["paths"], lambda v: resolve_inputs(list(files)))
    check_each(c, "corpus", "doc_sep,text_field,text_column,strict", corpus, CorpusOptions)
    corpus_options = CorpusOptions(
        **{k: v for k, v in corpus.items() if k not in ("paths", "words")}
    )
    words = corpus.get("words", "tokenizer")
    if words != "cohesion":
        from ..tokenizer.words import words_option

        c.check("corpus", "words", words, words_option)

    tok = c.table("tokenizer") or {}
    tokenizer_path, train = None, None
    if "path" in tok:
        extra = [k for k in tok if k != "path"]
        if extra:
            raise c.fail(
                "tokenizer",
                extra[0],
                "give either path (load a tokenizer) or model / vocab_size / "
                "lowercase (train one), not both",
            )
        tokenizer_path = c.path_of("tokenizer", "path", tok["path"])
    else:
        check_each(c, "tokenizer", "model,vocab_size,lowercase", tok, TrainConfig)
        train = TrainConfig(**{k: v for k, v in tok.items() if k not in ("sample", "seed")})
    train_sample = _sample(c, "tokenizer", tok)

    audit = _audit(c)
    count = _count(c)
    units = _units(c, count)
    mask = _mask(c, units is not None)
    compare = _compare(c, mask, units is not None)
    return RunConfig(
        path=path,
        output=out,
        corpus=files,
        corpus_options=corpus_options,
        tokenizer_path=tokenizer_path,
        train=train,
        audit=audit,
        count=count,
        units=units,
        mask=mask,
        compare=compare,
        text=text,
        words=words,
        train_sample=train_sample,
    )


def _sample(c: KeyChecker, section: str, table: Mapping[str, Any]) -> Any:
    """The `SampleSpec` of a table's sample / seed keys, or None."""
    from ..corpus.sample import SampleSpec

    if "seed" in table and "sample" not in table:
        raise c.fail(section, "seed", "seed chooses a sample: give sample too")
    if "sample" not in table:
        return None
    seed = table.get("seed", 0)
    c.check(section, "seed", seed, lambda s: SampleSpec(share=1.0, seed=s))
    return c.check(section, "sample", table["sample"],
                   lambda v: SampleSpec.parse(v, seed, option="sample"))


def _audit(c: KeyChecker) -> dict[str, Any] | None:
    from ..audit.measure import AuditConfig
    from ..tokenizer.train import TrainConfig

    a = c.table("audit")
    if a is None:
        return None
    sizes = a.get("vocab_sizes", [])
    for v in sizes:
        c.check("audit", "vocab_sizes", sizes, functools.partial(_train_size, v))
    tokenizers = a.get("tokenizers", [])
    if not all(isinstance(t, str) for t in tokenizers):
        raise c.fail("audit", "tokenizers", "must be a list of tokenizer.json paths")
    paths = [str(c.path_of("audit", "tokenizers", t)) for t in tokenizers]
    check_each(c, "audit", "model,lowercase", a, TrainConfig)
    top = a.get("top_words", 25)
    if not 1 <= top <= 10000:
        raise c.fail("audit", "top_words", f"{top}: expected 1 to 10000")
    include = a.get("include_tokenizer", True)
    if not sizes and not paths and not include:
        raise c.fail(
            "audit",
            None,
            "nothing to audit: give vocab_sizes or tokenizers, or include_tokenizer = true",
        )
    AuditConfig(vocab_sizes=tuple(sizes))
    return {
        "vocab_sizes": tuple(sizes),
        "tokenizers": tuple(paths),
        "model": a.get("model", "wordpiece"),
        "lowercase": a.get("lowercase", True),
        "top_words": top,
        "include_tokenizer": include,
        "sample": _sample(c, "audit", a),
    }


def _count(c: KeyChecker) -> Any:
    t = c.table("count")
    if t is None:
        return None
    from ..count.driver import CountConfig

    check_each(c, "count", "max_n,min_count,memory", t, CountConfig)
    return CountConfig(**t)


def _units(c: KeyChecker, count: Any) -> dict[str, Any] | None:
    t = c.table("units")
    if t is None:
        return None
    if count is None:
        raise c.fail(
            "units", None, "needs a [count] table: units are chosen from the n-gram counts"
        )
    from ..units.cohesion import Measure
    from ..units.filters import DEFAULT_EDGE_WORDS, DEFAULT_FRAGMENT_SHARE
    from ..units.options import DEFAULT_MEASURE, DEFAULT_TOP, parse_per_length

    out: dict[str, Any] = {
        "measure": c.check(
            "units",
            "measure",
            t.get("measure", DEFAULT_MEASURE.value),
            lambda v: Measure.parse(v, option="measure").value,
        ),
        "top": t.get("top", DEFAULT_TOP),
        "min_count": t.get("min_count"),
        "max_n": t.get("max_n"),
        "edge_words": t.get("edge_words", DEFAULT_EDGE_WORDS),
        "fragment_share": float(t.get("fragment_share", DEFAULT_FRAGMENT_SHARE)),
    }
    if out["edge_words"] < 0:
        raise c.fail("units", "edge_words", f"{out['edge_words']}: must be 0 (no filter) or more")
    if not 0.0 <= out["fragment_share"] <= 1.0:
        raise c.fail(
            "units",
            "fragment_share",
            f"{out['fragment_share']:g}: must be in [0, 1] (0: keep fragments)",
        )
    for key, low in (("top", 1), ("min_count", count.min_count)):
        if out[key] is not None and out[key] < low:
            raise c.fail(
                "units",
                key,
                f"{out[key]}: must be at least {low}"
                + (
                    " (the [count] min_count: rarer n-grams were not kept)"
                    if key == "min_count"
                    else ""
                ),
            )
    if out["max_n"] is not None and not 2 <= out["max_n"] <= count.max_n:
        raise c.fail(
            "units", "max_n", f"{out['max_n']}: must be in 2..{count.max_n} (the [count] max_n)"
        )
    per = t.get("per_length")
    longest = out["max_n"] or count.max_n

    def shares(v: Any) -> str:
        parsed = parse_per_length(v, max_n=longest, option="per_length") or ()
        return ",".join(f"{n}:{s!r}" for n, s in parsed)

    out["per_length"] = None if per is None else c.check("units", "per_length", per, shares)
    return out


def _mask(c: KeyChecker, has_units: bool) -> dict[str, Any] | None:
    from ..compare.run import parse_strategies
    from ..masking.sampler import MaskingConfig
    from ..packing import PackingConfig
    from ..shards.write import ShardConfig

    t = c.table("mask")
    if t is None:
        return None
    strategies = c.check("mask", "strategies", t.get("strategies", "token"),
                         lambda v: parse_strategies(v, option="strategies"))
    if any(s.value == "pmi" for s in strategies) and not has_units:
        raise c.fail("mask", "strategies", needs_units("pmi", "add [count] and [units] tables"))
    check_each(c, "mask", ",".join(_MASKING), t, MaskingConfig)
    check_each(c, "mask", ",".join(_PACKING), t, PackingConfig)
    check_each(c, "mask", ",".join(_SHARDS), t, ShardConfig)
    masking = MaskingConfig(**{k: t[k] for k in _MASKING if k in t})
    packing = PackingConfig(**{k: t[k] for k in _PACKING if k in t})
    shards = ShardConfig(**{k: t[k] for k in _SHARDS if k in t})
    return {
        "strategies": tuple(s.value for s in strategies),
        "masking": masking,
        "packing": packing,
        "shards": shards,
    }


def _compare(c: KeyChecker, mask: Mapping[str, Any] | None, has_units: bool) -> Any:
    from ..compare.run import CompareConfig

    t = c.table("compare")
    if t is None:
        return None
    if t.get("sample") == "all":
        t["sample"] = None
    elif isinstance(t.get("sample"), str):
        raise c.fail(
            "compare", "sample", f'{t["sample"]!r}: give a whole number of sequences or "all"'
        )
    check_each(
        c,
        "compare",
        "strategies,sample,examples,top_words," + ",".join(_MASKING + _PACKING) + ",seed",
        t,
        CompareConfig,
    )
    base: dict[str, Any] = {}
    if mask is not None:  # defaults from [mask], so the comparison describes the shards written
        m, p = mask["masking"], mask["packing"]
        base = {
            "rate": m.rate,
            "mix": m.mix,
            "mix_per": m.mix_per,
            "span_p": m.span_p,
            "span_max": m.span_max,
            "seq_len": p.seq_len,
            "pack": p.pack,
            "seed": mask["shards"].seed,
        }
    config = CompareConfig(**{**base, **t})
    if config.strategies and any(s.value == "pmi" for s in config.strategies) and not has_units:
        raise c.fail("compare", "strategies", needs_units("pmi", "add [count] and [units] tables"))
    return config
