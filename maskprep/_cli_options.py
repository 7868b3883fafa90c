"""Shared pieces of the command line: option groups, the executor, error handling.

`maskprep.cli` defines the commands with these; nothing here runs a stage.
"""

from __future__ import annotations

import functools
import sys
from typing import Any, Callable

import click

from .errors import MaskprepError

__all__ = [
    "CONTEXT",
    "executor_from",
    "is_quiet",
    "user_errors",
    "corpus_options",
    "masking_options",
    "make_corpus_options",
    "words_option",
    "make_words",
    "budget_option",
    "sample_options",
    "make_sample",
    "SAMPLE_HELP",
    "tokenizer_option",
    "model_option",
]

CONTEXT = {"help_option_names": ["-h", "--help"], "max_content_width": 100}


def executor_from(ctx: click.Context) -> Any:
    """The `Executor` for the global --workers / --dask / --quiet options."""
    from .execute import Executor, default_workers

    obj = ctx.find_root().obj or {}
    workers = obj.get("workers")
    if workers is not None and workers < 1:
        raise MaskprepError(f"--workers: expected a positive whole number, got {workers}")
    return Executor(
        workers=workers or default_workers(), dask=obj.get("dask"), quiet=bool(obj.get("quiet"))
    )


def is_quiet(ctx: click.Context) -> bool:
    return bool((ctx.find_root().obj or {}).get("quiet"))


def user_errors(fn: Callable[..., Any]) -> Callable[..., Any]:
    """Turn `MaskprepError` and OS errors into one clean click error (exit 1); Ctrl-C: exit 130."""

    @functools.wraps(fn)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        from ._interrupt import say_interrupted
        from .errors import os_error_text

        try:
            return fn(*args, **kwargs)
        except MaskprepError as exc:
            raise click.ClickException(str(exc)) from None
        except OSError as exc:
            raise click.ClickException(os_error_text(exc)) from None
        except MemoryError:
            raise click.ClickException("out of memory; lower --memory or --workers, or free "
                                       "memory") from None
        except KeyboardInterrupt:
            say_interrupted()
            sys.exit(130)

    return wrapper


def budget_option(fn: Callable[..., Any]) -> Callable[..., Any]:
    """--memory of mask and compare (see `maskprep._budget`)."""
    return click.option(
        "--memory",
        default="2GiB",
        show_default=True,
        metavar="SIZE",
        help="Memory for all workers together (as for count); checked against what each "
        "worker holds: one encoded batch and, for mask, the rows of one shard file "
        "per copy.",
    )(fn)


def tokenizer_option(
    help: str = "The tokenizer.json to encode with (optional when CORPUS is an encoded directory).",
) -> Callable[[Callable[..., Any]], Callable[..., Any]]:
    """-t / --tokenizer of the stages that also read an encoded directory (then optional)."""
    return click.option("-t", "--tokenizer", default=None, type=click.Path(), help=help)


def model_option(help: str) -> Callable[[Callable[..., Any]], Callable[..., Any]]:
    """--model: the family of the tokenizers a command trains."""
    return click.option(
        "--model",
        type=click.Choice(["wordpiece", "bpe", "unigram"]),
        default="wordpiece",
        show_default=True,
        help=help,
    )


# the help of --sample (what `maskprep.corpus.sample` does with it)
SAMPLE_HELP = (
    "Use a seeded sample of the corpus: a share (10% or 0.1) or a size on disk (200MB, 1GiB), "
    "the same share of every file, whole documents only (--seed chooses it). Uncompressed "
    "text files with one document per line are sampled by seeded byte ranges aligned to "
    "document starts, so only the sample is read; other files (compressed, --doc-sep blank, "
    "Parquet, Arrow) are read in full and each document kept by a seeded coin. "
    "Default: the whole corpus."
)


def sample_options(fn: Callable[..., Any]) -> Callable[..., Any]:
    """--sample and --seed of audit and train-tokenizer (read with `make_sample`)."""
    fn = click.option(
        "--seed",
        "sample_seed",
        type=int,
        default=0,
        show_default=True,
        help="Seed of the --sample: the same seed picks the same documents.",
    )(fn)
    return click.option(
        "--sample", default=None, metavar="SHARE|SIZE", help=SAMPLE_HELP
    )(fn)


def make_sample(sample: str | None, seed: int) -> Any:
    """The `SampleSpec` of --sample / --seed, or None for the whole corpus."""
    from .corpus.sample import SampleSpec

    if seed < 0:
        raise MaskprepError(f"--seed: expected a whole number >= 0, got {seed}")
    return None if sample is None else SampleSpec.parse(sample, seed)


def corpus_options(fn: Callable[..., Any]) -> Callable[..., Any]:
    """The options every command that reads a corpus shares."""
    fn = click.option(
        "--doc-sep",
        type=click.Choice(["line", "blank"]),
        default="line",
        show_default=True,
        help="Text files: one document per line, or documents separated by blank lines.",
    )(fn)
    fn = click.option("--text-field", default="text", show_default=True,
                      help="JSONL: the field holding the text.")(fn)
    fn = click.option("--text-column", default="text", show_default=True,
                      help="Parquet/Arrow: the column holding the text.")(fn)
    fn = click.option(
        "--strict",
        is_flag=True,
        help="Invalid UTF-8 is an error (naming file, line and byte) instead of being replaced.",
    )(fn)
    return fn


def masking_options(fn: Callable[..., Any]) -> Callable[..., Any]:
    """The masking and packing options shared by mask and compare."""
    for opt in reversed(
        [
            click.option(
                "--rate",
                type=float,
                default=0.15,
                show_default=True,
                help="Share of maskable (non-special) tokens made targets, per sequence.",
            ),
            click.option(
                "--mix",
                default="0.8,0.1,0.1",
                show_default=True,
                metavar="MASK,RANDOM,KEEP",
                help="How targets are shown: mask token, random token, unchanged.",
            ),
            click.option(
                "--mix-per",
                type=click.Choice(["token", "unit"]),
                default="token",
                show_default=True,
                help="Draw the mix per target token or once per masked unit.",
            ),
            click.option(
                "--span-p",
                type=float,
                default=0.2,
                show_default=True,
                help="span: geometric parameter of span lengths.",
            ),
            click.option(
                "--span-max",
                type=int,
                default=10,
                show_default=True,
                help="span: longest span, in words.",
            ),
            click.option(
                "--seq-len",
                type=int,
                default=128,
                show_default=True,
                help="Tokens per sequence, special tokens included.",
            ),
            click.option(
                "--no-pack",
                is_flag=True,
                help="One document per sequence (split when too long) instead of packing.",
            ),
        ]
    ):
        fn = opt(fn)
    return fn


def make_corpus_options(doc_sep: str, text_field: str, text_column: str, strict: bool) -> Any:
    from .corpus.reader import CorpusOptions

    return CorpusOptions(
        doc_sep=doc_sep, text_field=text_field, text_column=text_column, strict=strict
    )


_WORDS_HELP = (
    "What a word is: tokenizer = the tokenizer's own pre-tokenization (scripts with spaces); "
    "zh, ja, th = runs of Chinese, Japanese or Thai cut by a segmentation library (pip install "
    "'maskprep[zh]' etc.), other text keeps the tokenizer's words; auto = the segmenter of each "
    "run's script; cohesion = words learnt from this corpus's character n-gram cohesion."
)


def words_option(fn: Callable[..., Any]) -> Callable[..., Any]:
    """The --words option of the commands that group tokens into words (read by `make_words`)."""
    return click.option(
        "--words",
        "words",
        type=click.Choice(["tokenizer", "zh", "ja", "th", "auto", "cohesion"]),
        default="tokenizer",
        show_default=True,
        help=_WORDS_HELP,
    )(fn)


def make_words(copts: dict[str, Any], corpus: Any, ctx: click.Context) -> tuple[Any, Any]:
    """(CorpusOptions, WordsConfig) from a command's corpus options and --words.

    With ``--words cohesion`` the words are learnt from the corpus first.
    """
    words = copts.pop("words", "tokenizer")
    options = make_corpus_options(**copts)
    if str(words).strip().lower() != "cohesion":  # a fixed definition: no stage to import
        from .tokenizer.words import words_option as fixed_words

        return options, fixed_words(words)
    from .units.words import resolve_words

    return options, resolve_words(words, list(corpus), corpus_options=options, quiet=is_quiet(ctx))
