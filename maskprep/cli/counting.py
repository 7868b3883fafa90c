"""Commands that read the whole corpus into stage files: `encode`, `count` and `units`."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import click

from ..errors import MaskprepError
from ..wording import plural
from .._cli_options import (
    CONTEXT,
    corpus_options,
    executor_from,
    is_quiet,
    make_words,
    tokenizer_option,
    user_errors,
    words_option,
)
from .group import cli

__all__ = ["encode_cmd", "count_cmd", "units_cmd"]


@cli.command("encode", context_settings=CONTEXT)
@click.argument("corpus", nargs=-1, required=True)
@click.option(
    "-t", "--tokenizer", required=True, type=click.Path(), help="The tokenizer.json to encode with."
)
@click.option(
    "-o", "--output", required=True, type=click.Path(file_okay=False), help="ENCODED_DIR to write."
)
@click.option("--overwrite", is_flag=True, help="Replace an existing encoded directory.")
@click.option(
    "--resume", is_flag=True, help="Finish an interrupted encode with the same options and inputs."
)
@words_option
@corpus_options
@click.pass_context
@user_errors
def encode_cmd(
    ctx: click.Context,
    corpus: tuple[str, ...],
    tokenizer: str,
    output: str,
    overwrite: bool,
    resume: bool,
    **copts: Any,
) -> None:
    """Tokenize CORPUS once into ENCODED_DIR, for audit, count, mask and compare to read.

    Writes docs-*.arrow and words-*.arrow (token ids, words, documents),
    encoded.json and a copy of the tokenizer. Later stages given ENCODED_DIR as
    CORPUS write byte-identical outputs to those from the raw corpus.
    """
    from ..encoded.write import encode_corpus, format_encode_summary

    co, words_cfg = make_words(copts, corpus, ctx)
    manifest = encode_corpus(list(corpus), tokenizer=tokenizer, output=output,
                             corpus_options=co, executor=executor_from(ctx),
                             overwrite=overwrite, resume=resume, words=words_cfg)
    click.echo(format_encode_summary(manifest))


@cli.command("count", context_settings=CONTEXT)
@click.argument("corpus", nargs=-1, required=True)
@tokenizer_option(
    "The tokenizer.json whose pre-tokenization defines the words (optional when CORPUS is an "
    "encoded directory: it must then be the one it was encoded with)."
)
@click.option("-o", "--output", required=True, type=click.Path(), help="COUNTS_DIR to write.")
@click.option(
    "--max-n", type=int, default=5, show_default=True, help="Longest n-gram to count (1 to 8)."
)
@click.option(
    "--min-count",
    type=int,
    default=10,
    show_default=True,
    help="Keep n-grams seen at least this often (applied exactly, after all counts are summed).",
)
@click.option(
    "--memory",
    default="1GiB",
    show_default=True,
    metavar="SIZE",
    help="Memory for counting, shared by the workers; beyond it sorted runs spill to COUNTS_DIR. "
    "K/M/G/T and KiB..TiB are powers of 1024, KB/MB/GB/TB of 1000, a plain number is bytes.",
)
@click.option(
    "--overwrite", is_flag=True, help="Replace the counts in an existing, non-empty COUNTS_DIR."
)
@click.option(
    "--resume",
    is_flag=True,
    help="Finish an interrupted count with the same options and inputs; finished tasks are not "
         "redone.",
)
@words_option
@corpus_options
@click.pass_context
@user_errors
def count_cmd(
    ctx: click.Context,
    corpus: tuple[str, ...],
    tokenizer: str | None,
    output: str,
    max_n: int,
    min_count: int,
    memory: str,
    overwrite: bool,
    resume: bool,
    **copts: Any,
) -> None:
    """Count word n-grams of CORPUS exactly, in bounded memory.

    Words are the tokenizer's pre-tokenization pieces. N-grams never contain or
    span punctuation-only words and never cross documents. Writes
    COUNTS_DIR/ngrams-<n>.parquet (text, count, w0..), counts.json (N, totals,
    distinct and kept per n, corpus fingerprint, tokenizer hash) and a copy of
    the tokenizer.
    """
    from ..count.driver import CountConfig, count_ngrams, format_summary

    co, words_cfg = make_words(copts, corpus, ctx)
    config = CountConfig(max_n=max_n, min_count=min_count, memory=memory, words=words_cfg)
    summary = count_ngrams(list(corpus), tokenizer=tokenizer, output=Path(output), config=config,
                           corpus_options=co, executor=executor_from(ctx),
                           overwrite=overwrite, quiet=is_quiet(ctx), resume=resume)
    click.echo(format_summary(summary))


_MEASURE_HELP = (
    "Cohesion measure: pmi = min over segmentations of log p(g) - sum log p(parts), nats, "
    "(-inf, -log p(g)]; pmi-naive = log p(g) - sum log p(word), nats; npmi = pmi / -log p(g), "
    "[-1, 1]; llr = Dunning's log-likelihood ratio, >= 0 (weakest binary split for n > 2); "
    "t = t score (weakest binary split for n > 2). Default llr: with the edge-word and fragment "
    "filters it ranked the most WordNet terms first on real text (see the README)."
)


@cli.command("units", context_settings=CONTEXT)
@click.argument("counts_dir", type=click.Path())
@click.option("-o", "--output", required=True, type=click.Path(dir_okay=False),
              help="Where to write units.parquet (a readable units.tsv is written beside it).")
@click.option(
    "--measure",
    type=click.Choice(["llr", "pmi", "pmi-naive", "npmi", "t"]),
    default="llr",
    show_default=True,
    help=_MEASURE_HELP,
)
@click.option(
    "--top",
    type=int,
    default=50_000,
    show_default=True,
    help="Keep at most this many units, best first.",
)
@click.option(
    "--min-count",
    type=int,
    default=None,
    help="Keep only n-grams counted at least this often (default and minimum: count's "
         "--min-count).",
)
@click.option(
    "--per-length",
    default=None,
    metavar="N:SHARE,...",
    help="Shares of --top per unit length, e.g. 2:0.5,3:0.3,4:0.1,5:0.1 (must add up to 1).",
)
@click.option(
    "--max-n", type=int, default=None, help="Longest unit in words (default: every counted length)."
)
@click.option(
    "--edge-words",
    type=int,
    default=30,
    show_default=True,
    metavar="K",
    help="No unit begins or ends with one of the corpus's K most frequent words (they may stand "
    "inside a unit: 'point of view'); 0: no such filter.",
)
@click.option(
    "--fragment-share",
    type=float,
    default=0.75,
    show_default=True,
    metavar="SHARE",
    help="Drop an n-gram when one n-gram a word longer holds at least this share of its "
         "occurrences "
    "('guido van' inside 'guido van rossum'); 0: keep fragments.",
)
@click.option("--show", "show_n", type=int, default=10, show_default=True,
              help="Top units to print per length (0: none).")
@click.option("--overwrite", is_flag=True,
              help="Replace the output files if they exist and were not written by maskprep units.")
@click.pass_context
@user_errors
def units_cmd(
    ctx: click.Context,
    counts_dir: str,
    output: str,
    measure: str,
    top: int,
    min_count: int | None,
    per_length: str | None,
    max_n: int | None,
    edge_words: int,
    fragment_share: float,
    show_n: int,
    overwrite: bool,
) -> None:
    """Rank the multi-word units of COUNTS_DIR (from maskprep count) by cohesion.

    Units are n-grams of 2+ words whose score shows attraction (score > 0;
    for llr: more frequent than chance on every binary split), that neither
    begin nor end with one of the corpus's most frequent words and are not
    mostly a fragment of one longer n-gram, ranked best first. pmi and
    pmi-naive scores are in nats. --edge-words 0 --fragment-share 0 gives the
    plain ranking of a measure.
    """
    from .._paths import check_apart, refuse_existing_file
    from ..units.files import format_top_units, write_units
    from ..units.select import build_units

    check_apart(output, [], others=[counts_dir])
    refuse_existing_file(output, Path(output).with_suffix(".tsv"), overwrite=overwrite, own_ok=True)
    if top < 1:
        raise MaskprepError(f"--top: expected a positive whole number, got {top}")
    if show_n < 0:
        raise MaskprepError(f"--show: expected 0 or more, got {show_n}")
    vocab = build_units(
        counts_dir,
        measure=measure,
        top=top,
        min_count=min_count,
        per_length=per_length,
        max_n=max_n,
        edge_words=edge_words,
        fragment_share=fragment_share,
        quiet=is_quiet(ctx),
    )
    parquet, tsv = write_units(vocab, output)
    if show_n:
        click.echo(format_top_units(vocab, per_length=show_n))
    click.echo(f"wrote {parquet} ({plural(len(vocab), 'unit')}, measure {measure}) and {tsv}")
