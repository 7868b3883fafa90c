"""Commands about the vocabulary: `train-tokenizer` and `audit`."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import click

from ..errors import MaskprepError
from .._cli_options import (
    CONTEXT,
    corpus_options,
    executor_from,
    is_quiet,
    make_corpus_options,
    make_sample,
    make_words,
    model_option,
    sample_options,
    user_errors,
    words_option,
)
from .group import cli

__all__ = ["train_tokenizer_cmd", "parse_vocab_sizes", "audit_cmd"]


@cli.command("train-tokenizer", context_settings=CONTEXT)
@click.argument("corpus", nargs=-1, required=True)
@click.option(
    "-o",
    "--output",
    required=True,
    type=click.Path(dir_okay=False),
    help="Where to write tokenizer.json.",
)
@model_option("Tokenizer family (bpe is byte-level).")
@click.option(
    "--vocab-size", type=int, default=30000, show_default=True, help="Vocabulary size to train."
)
@click.option(
    "--lowercase/--no-lowercase", default=True, show_default=True, help="Lowercase the text first."
)
@click.option("--overwrite", is_flag=True, help="Replace the output file if it exists.")
@sample_options
@corpus_options
@click.pass_context
@user_errors
def train_tokenizer_cmd(
    ctx: click.Context,
    corpus: tuple[str, ...],
    output: str,
    model: str,
    vocab_size: int,
    lowercase: bool,
    overwrite: bool,
    sample: str | None,
    sample_seed: int,
    **copts: Any,
) -> None:
    """Train a tokenizer on CORPUS (files, directories or globs), or on a --sample of it.

    The tokenizer gets five special tokens, recorded in the file: padding,
    unknown, sequence start, separator and mask.
    """
    from .._paths import check_apart, refuse_existing_file
    from ..audit.training import train_on_sample
    from ..corpus.sample import describe_sample

    spec = make_sample(sample, sample_seed)
    check_apart(output, corpus)
    refuse_existing_file(output, overwrite=overwrite)
    trained = train_on_sample(list(corpus), model=model, vocab_size=vocab_size,
                              lowercase=lowercase, corpus_options=make_corpus_options(**copts),
                              output=Path(output), quiet=is_quiet(ctx), sample=spec)
    info = trained.info
    if trained.sample is not None:
        click.echo(describe_sample(trained.sample))
    click.echo(f"wrote {output}: {info.vocab_size} tokens ({model}), special tokens "
               + ", ".join(f"{r}={t}" for r, t in info.describe()["special_tokens"].items()))


def parse_vocab_sizes(text: str | None) -> list[int]:
    if not text:
        return []
    sizes = []
    for part in text.split(","):
        part = part.strip().replace("_", "")
        if part.lower().endswith("k") and part[:-1].isdigit():
            part = str(int(part[:-1]) * 1000)
        if not part.isdigit() or int(part) <= 0:
            raise MaskprepError(
                f"--vocab-sizes: {text!r} is not a comma-separated list of positive integers "
                "(e.g. 2000,8000,30000)"
            )
        sizes.append(int(part))
    return sizes


@cli.command("audit", context_settings=CONTEXT)
@click.argument("corpus", nargs=-1, required=True)
@click.option("-t", "--tokenizer", "tokenizers", multiple=True, type=click.Path(),
              help="A tokenizer.json to audit (repeat for several).")
@click.option(
    "--vocab-sizes",
    default=None,
    metavar="N,N,...",
    help="Also train tokenizers of these sizes on the corpus and audit them, e.g. 2000,8000,30000.",
)
@model_option("Family of the tokenizers trained for --vocab-sizes.")
@click.option("--lowercase/--no-lowercase", default=True, show_default=True,
              help="Lowercasing of the tokenizers trained for --vocab-sizes.")
@click.option(
    "-o", "--output", required=True, type=click.Path(file_okay=False), help="Output directory."
)
@click.option("--top-words", type=int, default=25, show_default=True,
              help="How many badly fragmented frequent words to list.")
@sample_options
@words_option
@corpus_options
@click.pass_context
@user_errors
def audit_cmd(
    ctx: click.Context,
    corpus: tuple[str, ...],
    tokenizers: tuple[str, ...],
    vocab_sizes: str | None,
    model: str,
    lowercase: bool,
    output: str,
    top_words: int,
    sample: str | None,
    sample_seed: int,
    **copts: Any,
) -> None:
    """Measure how a vocabulary fragments the words of CORPUS (or of a --sample of it).

    Writes DIR/audit.json, DIR/audit.html (chart of tokens per word by
    frequency band) and prints a table. With --sample, the tokenizers of
    --vocab-sizes are trained on the same sample, and every output says so.
    """
    from ..audit.measure import AuditConfig, run_audit
    from ..audit.page import format_audit_table

    from ..encoded.format import is_encoded_dir

    spec = make_sample(sample, sample_seed)
    sizes = parse_vocab_sizes(vocab_sizes)
    if not tokenizers and not sizes and not any(is_encoded_dir(c) for c in corpus):
        raise MaskprepError(
            "audit: give at least one -t TOKENIZER.json or --vocab-sizes N,N,... (or an encoded "
            "directory as CORPUS: its tokenizer is audited)"
        )
    if top_words < 1 or top_words > 10000:
        raise MaskprepError(f"--top-words: expected 1 to 10000, got {top_words}")
    co, words_cfg = make_words(copts, corpus, ctx)
    result = run_audit(
        list(corpus),
        AuditConfig(
            tokenizers=tuple(tokenizers),
            vocab_sizes=tuple(sizes),
            model=model,
            lowercase=lowercase,
            top_words=top_words,
        ),
        output=Path(output),
        corpus_options=co,
        quiet=is_quiet(ctx),
        executor=executor_from(ctx),
        sample=spec,
        words=words_cfg,
    )
    click.echo(format_audit_table(result))
    click.echo(f"\nwrote {Path(output) / 'audit.json'} and {Path(output) / 'audit.html'}")
