"""The `maskprep` command line: a thin shell over the library.

Each command parses its options, checks conflicts between them, builds the
library's config objects, calls one library function and prints its summary.
Library errors (`MaskprepError`) become one line on stderr and exit status 1.
No computation lives here.
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Any

import click

from .errors import MaskprepError
from .wording import plural

from ._cli_options import CONTEXT, budget_option, corpus_options, executor_from, is_quiet, \
    make_corpus_options, make_words, masking_options, user_errors, words_option


@click.group(context_settings=CONTEXT)
@click.version_option(package_name="maskprep")
@click.option("--workers", type=int, default=None, metavar="N",
              help="Local worker processes (default: all cores).")
@click.option("--dask", "dask_address", default=None, metavar="ADDRESS",
              help="Run tasks on a running Dask scheduler, e.g. tcp://10.0.0.5:8786.")
@click.option("--quiet", "-q", is_flag=True, help="No progress on stderr.")
@click.pass_context
def cli(ctx: click.Context, workers: int | None, dask_address: str | None, quiet: bool) -> None:
    """Prepare text corpora for masked-language-model pretraining.

    Audit vocabulary fragmentation, count word n-grams exactly, score
    multi-word units by PMI-style cohesion, mask with token / word / span / PMI
    strategies under one budgeted sampler, and write training-ready shards.
    """
    ctx.ensure_object(dict)
    ctx.obj["workers"] = workers
    ctx.obj["dask"] = dask_address
    ctx.obj["quiet"] = quiet


# ---------------------------------------------------------------- train-tokenizer / audit (lead)

@cli.command("train-tokenizer", context_settings=CONTEXT)
@click.argument("corpus", nargs=-1, required=True)
@click.option("-o", "--output", required=True, type=click.Path(dir_okay=False), help="Where to write tokenizer.json.")
@click.option("--model", type=click.Choice(["wordpiece", "bpe", "unigram"]), default="wordpiece", show_default=True,
              help="Tokenizer family (bpe is byte-level).")
@click.option("--vocab-size", type=int, default=30000, show_default=True, help="Vocabulary size to train.")
@click.option("--lowercase/--no-lowercase", default=True, show_default=True, help="Lowercase the text first.")
@click.option("--overwrite", is_flag=True, help="Replace the output file if it exists.")
@corpus_options
@click.pass_context
@user_errors
def train_tokenizer_cmd(ctx: click.Context, corpus: tuple[str, ...], output: str, model: str, vocab_size: int,
                        lowercase: bool, overwrite: bool, **copts: Any) -> None:
    """Train a tokenizer on CORPUS (files, directories or globs).

    The tokenizer gets five special tokens, recorded in the file: padding,
    unknown, sequence start, separator and mask.
    """
    from ._paths import check_apart, refuse_existing_file
    from .audit.measure import train_on_corpus

    check_apart(output, corpus)
    refuse_existing_file(output, overwrite=overwrite)
    info = train_on_corpus(list(corpus), model=model, vocab_size=vocab_size, lowercase=lowercase,
                           corpus_options=make_corpus_options(**copts), output=Path(output),
                           quiet=is_quiet(ctx))
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
            raise MaskprepError(f"--vocab-sizes: {text!r} is not a comma-separated list of positive integers "
                                "(e.g. 2000,8000,30000)")
        sizes.append(int(part))
    return sizes


@cli.command("audit", context_settings=CONTEXT)
@click.argument("corpus", nargs=-1, required=True)
@click.option("-t", "--tokenizer", "tokenizers", multiple=True, type=click.Path(),
              help="A tokenizer.json to audit (repeat for several).")
@click.option("--vocab-sizes", default=None, metavar="N,N,...",
              help="Also train tokenizers of these sizes on the corpus and audit them, e.g. 2000,8000,30000.")
@click.option("--model", type=click.Choice(["wordpiece", "bpe", "unigram"]), default="wordpiece", show_default=True,
              help="Family of the tokenizers trained for --vocab-sizes.")
@click.option("--lowercase/--no-lowercase", default=True, show_default=True,
              help="Lowercasing of the tokenizers trained for --vocab-sizes.")
@click.option("-o", "--output", required=True, type=click.Path(file_okay=False), help="Output directory.")
@click.option("--top-words", type=int, default=25, show_default=True,
              help="How many badly fragmented frequent words to list.")
@words_option
@corpus_options
@click.pass_context
@user_errors
def audit_cmd(ctx: click.Context, corpus: tuple[str, ...], tokenizers: tuple[str, ...], vocab_sizes: str | None,
              model: str, lowercase: bool, output: str, top_words: int, **copts: Any) -> None:
    """Measure how a vocabulary fragments the words of CORPUS.

    Writes DIR/audit.json, DIR/audit.html (chart of tokens per word by
    frequency band) and prints a table.
    """
    from .audit.measure import AuditConfig, run_audit
    from .audit.page import format_audit_table

    from .encoded.format import is_encoded_dir

    sizes = parse_vocab_sizes(vocab_sizes)
    if not tokenizers and not sizes and not any(is_encoded_dir(c) for c in corpus):
        raise MaskprepError("audit: give at least one -t TOKENIZER.json or --vocab-sizes N,N,... (or an encoded "
                            "directory as CORPUS: its tokenizer is audited)")
    if top_words < 1 or top_words > 10000:
        raise MaskprepError(f"--top-words: expected 1 to 10000, got {top_words}")
    co, words_cfg = make_words(copts, corpus, ctx)
    result = run_audit(list(corpus), AuditConfig(tokenizers=tuple(tokenizers), vocab_sizes=tuple(sizes),
                                                model=model, lowercase=lowercase, top_words=top_words),
                       output=Path(output), corpus_options=co, quiet=is_quiet(ctx),
                       executor=executor_from(ctx), words=words_cfg)
    click.echo(format_audit_table(result))
    click.echo(f"\nwrote {Path(output) / 'audit.json'} and {Path(output) / 'audit.html'}")


# ---------------------------------------------------------------- encode

@cli.command("encode", context_settings=CONTEXT)
@click.argument("corpus", nargs=-1, required=True)
@click.option("-t", "--tokenizer", required=True, type=click.Path(), help="The tokenizer.json to encode with.")
@click.option("-o", "--output", required=True, type=click.Path(file_okay=False), help="ENCODED_DIR to write.")
@click.option("--overwrite", is_flag=True, help="Replace an existing encoded directory.")
@click.option("--resume", is_flag=True, help="Finish an interrupted encode with the same options and inputs.")
@words_option
@corpus_options
@click.pass_context
@user_errors
def encode_cmd(ctx: click.Context, corpus: tuple[str, ...], tokenizer: str, output: str, overwrite: bool,
               resume: bool, **copts: Any) -> None:
    """Tokenize CORPUS once into ENCODED_DIR, for audit, count, mask and compare to read.

    Writes docs-*.arrow and words-*.arrow (token ids, words, documents),
    encoded.json and a copy of the tokenizer. Later stages given ENCODED_DIR as
    CORPUS write byte-identical outputs to those from the raw corpus.
    """
    from .encoded.write import encode_corpus, format_encode_summary

    co, words_cfg = make_words(copts, corpus, ctx)
    manifest = encode_corpus(list(corpus), tokenizer=tokenizer, output=output,
                             corpus_options=co, executor=executor_from(ctx),
                             overwrite=overwrite, resume=resume, words=words_cfg)
    click.echo(format_encode_summary(manifest))


# ---------------------------------------------------------------- count (ngrams engineer)

@cli.command("count", context_settings=CONTEXT)
@click.argument("corpus", nargs=-1, required=True)
@click.option("-t", "--tokenizer", default=None, type=click.Path(),
              help="The tokenizer.json whose pre-tokenization defines the words (optional when CORPUS is an "
                   "encoded directory: it must then be the one it was encoded with).")
@click.option("-o", "--output", required=True, type=click.Path(), help="COUNTS_DIR to write.")
@click.option("--max-n", type=int, default=5, show_default=True, help="Longest n-gram to count (1 to 8).")
@click.option("--min-count", type=int, default=10, show_default=True,
              help="Keep n-grams seen at least this often (applied exactly, after all counts are summed).")
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
    help="Finish an interrupted count with the same options and inputs; finished tasks are not redone.",
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
    from .count.driver import CountConfig, count_ngrams, format_summary

    co, words_cfg = make_words(copts, corpus, ctx)
    config = CountConfig(max_n=max_n, min_count=min_count, memory=memory, words=words_cfg)
    summary = count_ngrams(list(corpus), tokenizer=tokenizer, output=Path(output), config=config,
                           corpus_options=co, executor=executor_from(ctx),
                           overwrite=overwrite, quiet=is_quiet(ctx), resume=resume)
    click.echo(format_summary(summary))


# ---------------------------------------------------------------- units (units engineer)

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
    help="Keep only n-grams counted at least this often (default and minimum: count's --min-count).",
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
    help="Drop an n-gram when one n-gram a word longer holds at least this share of its occurrences "
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
    from ._paths import check_apart, refuse_existing_file
    from .units.files import format_top_units, write_units
    from .units.select import build_units

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


# ---------------------------------------------------------------- mask / show / verify (shards engineer)


def _units_note(built_with: str | None) -> None:
    if built_with:
        click.echo(
            f"units: built with another tokenizer ({built_with[:12]}) that splits text into the same "
            "words; token ids re-derived for this one"
        )


PADDING_WARN = 0.25  # mask warns above this padding share


def _pct(x: float | None) -> str:
    return "n/a" if x is None else f"{100 * x:.2f}%"


@cli.command("mask", context_settings=CONTEXT)
@click.argument("corpus", nargs=-1, required=True)
@click.option(
    "-t",
    "--tokenizer",
    default=None,
    type=click.Path(),
    help="The tokenizer.json to encode with (optional when CORPUS is an encoded directory).",
)
@click.option(
    "-o",
    "--output",
    required=True,
    type=click.Path(file_okay=False),
    help="Shards directory to write.",
)
@click.option(
    "--strategy",
    type=click.Choice(["token", "word", "span", "pmi"]),
    default="token",
    show_default=True,
    help="How tokens are grouped into the units the sampler masks.",
)
@click.option("--units", "units_path", type=click.Path(), default=None,
              help="Unit vocabulary (units.parquet from maskprep units); needed by --strategy pmi.")
@masking_options
@click.option("--copies", type=int, default=1, show_default=True,
              help="Differently masked copies of every sequence (one set of shard files each).")
@click.option("--seed", type=int, default=0, show_default=True, help="Seed of all random draws.")
@click.option(
    "--format",
    "fmt",
    type=click.Choice(["arrow", "parquet"]),
    default="arrow",
    show_default=True,
    help="Arrow IPC files or Parquet (zstd).",
)
@click.option(
    "--shard-rows", type=int, default=16384, show_default=True, help="Rows per shard file, at most."
)
@click.option(
    "--dynamic",
    is_flag=True,
    help="Write unmasked input_ids and unit_ids, to mask on the fly with maskprep.mask_batch.",
)
@click.option(
    "--overwrite", is_flag=True, help="Replace the shards in an existing output directory."
)
@click.option("--resume", is_flag=True, help="Finish an interrupted run with the same options.")
@budget_option
@words_option
@corpus_options
@click.pass_context
@user_errors
def mask_cmd(
    ctx: click.Context,
    corpus: tuple[str, ...],
    tokenizer: str | None,
    output: str,
    strategy: str,
    units_path: str | None,
    rate: float,
    mix: str,
    mix_per: str,
    span_p: float,
    span_max: int,
    seq_len: int,
    no_pack: bool,
    copies: int,
    seed: int,
    fmt: str,
    shard_rows: int,
    dynamic: bool,
    overwrite: bool,
    resume: bool,
    memory: str,
    **copts: Any,
) -> None:
    """Pack CORPUS into sequences, mask them and write training-ready shards.

    Writes DIR/shard-*.arrow (or .parquet) and, in DIR/_maskprep/, manifest.json,
    stats.json and a copy of the tokenizer. Same inputs, options and seed give
    byte-identical shards whatever the number of workers.
    """
    from .masking.sampler import MaskingConfig, MixPer, Strategy, parse_mix
    from .packing import PackingConfig
    from .shards.layout import META_DIR
    from .shards.write import ShardConfig, write_shards

    if overwrite and resume:
        raise MaskprepError("--overwrite and --resume exclude each other: pick one")
    masking = MaskingConfig(strategy=Strategy(strategy), rate=rate, mix=parse_mix(mix),
                            mix_per=MixPer(mix_per), span_p=span_p, span_max=span_max)
    packing = PackingConfig(seq_len=seq_len, pack=not no_pack)
    shards = ShardConfig(
        format=fmt, shard_rows=shard_rows, copies=copies, seed=seed, dynamic=dynamic
    )
    co, words_cfg = make_words(copts, corpus, ctx)
    manifest, stats = write_shards(
        list(corpus),
        tokenizer=tokenizer,
        output=output,
        masking=masking,
        packing=packing,
        shards=shards,
        units=units_path,
        corpus_options=co,
        executor=executor_from(ctx),
        overwrite=overwrite,
        resume=resume,
        words=words_cfg,
        memory=memory,
    )
    _units_note(manifest.options.get("units_tokenizer_hash"))
    rate_ = stats["masking_rate"]
    mix_ = stats["mix"]
    units_ = stats["unit_lengths"]
    kind = "dynamic (unmasked, with unit_ids)" if dynamic else "masked"
    click.echo(
        f"wrote {plural(stats['rows'], kind + ' row')} ({plural(stats['sequences'], 'sequence')} x "
        f"{plural(copies, 'copy', 'copies')}) in {plural(manifest.totals['shards'], fmt + ' shard')} "
        f"to {output}"
    )
    click.echo(
        f"tokens {stats['tokens']:,} (maskable {stats['maskable_tokens']:,}); targets {stats['targets']:,} = "
        f"{_pct(rate_['corpus'])} of maskable tokens (asked {rate:g}; per sequence "
        f"{_pct(rate_['per_sequence_min'])} to {_pct(rate_['per_sequence_max'])}, median "
        f"{_pct(rate_['per_sequence_median'])})"
    )
    click.echo(
        f"shown as: mask {_pct(mix_['mask'])}, random {_pct(mix_['random'])}, keep {_pct(mix_['keep'])} "
        f"(asked {'/'.join(f'{x:g}' for x in masking.mix)})"
    )
    mean_t, mean_w = units_["mean_tokens"], units_["mean_words"]
    click.echo(
        f"masked units: {'n/a' if mean_t is None else f'{mean_t:.2f}'} tokens, "
        f"{'n/a' if mean_w is None else f'{mean_w:.2f}'} words on average; multi-word share "
        f"{_pct(stats['multiword_share'])}; within-word leakage {_pct(stats['within_word_leakage'])}"
    )
    pad = stats["padding"]
    click.echo(
        f"padding: {_pct(pad['share'])} of the {pad['positions']:,} token positions "
        f"({pad['padded']:,} pad tokens; --seq-len {seq_len}, "
        f"{'documents packed across rows' if not no_pack else 'one document per row (--no-pack)'})"
    )
    if pad["share"] is not None and pad["share"] > PADDING_WARN:
        hint = (
            "drop --no-pack to pack documents across rows, or use a shorter --seq-len"
            if no_pack
            else "use a shorter --seq-len"
        )
        click.echo(
            f"warning: {_pct(pad['share'])} of every row is padding on average (over "
            f"{PADDING_WARN:.0%}): that share of the compute goes to pad tokens; {hint}",
            err=True,
        )
    if dynamic:
        click.echo(
            "(dynamic shards: figures are those of maskprep.mask_batch with each shard's copy)"
        )
    click.echo(
        "note: the rate is over maskable tokens (special tokens are never masked), and each sequence's "
        "budget is round(rate x its maskable tokens), so short sequences deviate from the rate"
    )
    meta = Path(output) / META_DIR
    click.echo(f"see {meta / 'stats.json'} and {meta / 'manifest.json'}")


@cli.command("show", context_settings=CONTEXT)
@click.argument("directory", type=click.Path())
@click.option("-n", "count", type=int, default=3, show_default=True, help="How many rows to show.")
@user_errors
def show_cmd(directory: str, count: int) -> None:
    """Show masked rows of a shards DIRECTORY, masked runs marked, with their original text.

    On a terminal masked runs are coloured; when piped they are put in {braces}.
    """
    from .shards.check import format_examples

    if count < 1:
        raise MaskprepError(f"-n must be at least 1, got {count}")
    color = sys.stdout.isatty()
    click.echo(format_examples(directory, n=count, color=color), color=color)


@cli.command("verify", context_settings=CONTEXT)
@click.argument("directory", type=click.Path())
@user_errors
def verify_cmd(directory: str) -> None:
    """Check shards against manifest.json (sha256, counts) and the row invariants; exit 1 on any fault.

    An encoded directory (from maskprep encode) is checked against its encoded.json instead.
    """
    from .encoded.check import verify_encoded
    from .encoded.format import is_encoded_dir
    from .shards.check import verify_shards

    if is_encoded_dir(directory):
        enc = verify_encoded(directory)
        faults, notes = enc.faults, []
        ok = f"{plural(enc.tasks, 'task')}, {plural(enc.documents, 'document')}, {plural(enc.tokens, 'token')}"
    else:
        report = verify_shards(directory)
        faults, notes = report.faults, report.notes
        ok = f"{plural(report.shards, 'shard')}, {plural(report.rows, 'row')}"
    for note in notes:
        click.echo(f"note: {note}", err=True)
    for fault in faults:
        click.echo(fault, err=True)
    if faults:
        raise MaskprepError(f"{directory}: {plural(len(faults), 'fault')}; first: {faults[0]}")
    click.echo(
        f"ok: {ok} in {directory} match {'encoded' if is_encoded_dir(directory) else 'manifest'}.json"
    )


# ---------------------------------------------------------------- compare / run / demo (lead)

def _parse_sample(text: str) -> int | None:
    if text.strip().lower() == "all":
        return None
    t = text.strip().replace("_", "").replace(",", "")
    if not t.isdigit() or int(t) < 1:
        raise MaskprepError(
            f"--sample: expected a whole number of sequences >= 1 or 'all', got {text!r}"
        )
    return int(t)


@cli.command("compare", context_settings=CONTEXT)
@click.argument("corpus", nargs=-1, required=True)
@click.option(
    "-t",
    "--tokenizer",
    default=None,
    type=click.Path(),
    help="The tokenizer.json to encode with (optional when CORPUS is an encoded directory).",
)
@click.option(
    "--units",
    "units_path",
    type=click.Path(),
    default=None,
    help="Unit vocabulary (units.parquet from maskprep units): enables pmi and within-unit leakage.",
)
@click.option(
    "--strategies",
    default=None,
    metavar="S,S,...",
    help="Strategies to compare, from token,word,span,pmi (default: all; pmi only with --units).",
)
@masking_options
@click.option(
    "--sample",
    default="10000",
    show_default=True,
    metavar="N|all",
    help="Most sequences compared, spread over the corpus by size; 'all' for every sequence.",
)
@click.option(
    "--seed",
    type=int,
    default=0,
    show_default=True,
    help="Seed of all random draws (as for maskprep mask).",
)
@click.option(
    "--examples",
    type=int,
    default=3,
    show_default=True,
    help="Example sequences shown in compare.html.",
)
@click.option("-o", "--output", required=True, type=click.Path(file_okay=False),
              help="Directory for compare.json and compare.html.")
@budget_option
@words_option
@corpus_options
@click.pass_context
@user_errors
def compare_cmd(
    ctx: click.Context,
    corpus: tuple[str, ...],
    tokenizer: str | None,
    units_path: str | None,
    strategies: str | None,
    rate: float,
    mix: str,
    mix_per: str,
    span_p: float,
    span_max: int,
    seq_len: int,
    no_pack: bool,
    sample: str,
    seed: int,
    examples: int,
    output: str,
    memory: str,
    **copts: Any,
) -> None:
    """Mask the same sequences of CORPUS with each strategy and compare what they hide.

    Per strategy: actual masking rate, unit lengths, multi-word share, within-word and
    within-unit leakage, easy-target share, targets by word-frequency band and per
    sequence. Writes DIR/compare.json and DIR/compare.html and prints a table.
    """
    from .compare.run import (
        CompareConfig,
        compare_strategies,
        format_compare_table,
        parse_strategies,
    )
    from .masking.sampler import MixPer, parse_mix

    config = CompareConfig(strategies=parse_strategies(strategies), rate=rate, mix=parse_mix(mix),
                           mix_per=MixPer(mix_per), span_p=span_p,
                           span_max=span_max, seq_len=seq_len, pack=not no_pack, seed=seed,
                           sample=_parse_sample(sample), examples=examples)
    co, words_cfg = make_words(copts, corpus, ctx)
    doc = compare_strategies(
        list(corpus),
        tokenizer=tokenizer,
        output=output,
        config=config,
        units=units_path,
        corpus_options=co,
        executor=executor_from(ctx),
        words=words_cfg,
        memory=memory,
    )
    click.echo(format_compare_table(doc))
    _units_note((doc.get("units") or {}).get("built_with_tokenizer"))
    click.echo(f"\nwrote {Path(output) / 'compare.json'} and {Path(output) / 'compare.html'}")


def _print_run(result: Any) -> None:
    from .compare.run import format_compare_table
    from .pipeline.runner import format_run_summary

    click.echo(format_run_summary(result))
    if result.compare is not None:
        click.echo("")
        click.echo(format_compare_table(result.compare))
    ran = sum(s.status == "ran" for s in result.stages)
    click.echo(
        f"\n{plural(ran, 'stage')} ran, {len(result.stages) - ran} up to date; outputs in {result.output}"
        f" (summary: {result.output / 'pipeline.json'})"
    )


@cli.command("run", context_settings=CONTEXT)
@click.argument("config", type=click.Path(dir_okay=False))
@click.option("-o", "--output", type=click.Path(file_okay=False), default=None,
              help="Output directory (overrides the file's output key).")
@click.option("--force", is_flag=True, help="Rerun every stage, even those that are up to date.")
@click.pass_context
@user_errors
def run_cmd(ctx: click.Context, config: str, output: str | None, force: bool) -> None:
    """Run the whole pipeline described by CONFIG (a TOML file).

    Stages (tables): corpus, tokenizer, audit, count, units, mask, compare. A stage
    whose inputs, options and code are unchanged is skipped; a changed option reruns
    that stage and the stages downstream of it. Paths in the file are relative to the file.

    Worked examples (demo.toml, minimal.toml, pmi-study.toml) come with the bundled sample
    corpus, whose folder `maskprep demo --where` prints (sample_corpus/ in the repository):

    \b
        maskprep run "$(maskprep demo --where)/minimal.toml" -o prep-minimal
    """
    from .pipeline.runner import run_pipeline

    result = run_pipeline(
        config, output=output, force=force, executor=executor_from(ctx), quiet=is_quiet(ctx)
    )
    _print_run(result)


@cli.command("demo", context_settings=CONTEXT)
@click.option(
    "-o",
    "--output",
    type=click.Path(file_okay=False),
    default="maskprep-demo",
    show_default=True,
    help="Output directory.",
)
@click.option("--force", is_flag=True, help="Rerun every stage, even those that are up to date.")
@click.option("--where", is_flag=True,
              help="Print the folder of the bundled sample corpus and its TOML files, and exit.")
@click.pass_context
@user_errors
def demo_cmd(ctx: click.Context, output: str, force: bool, where: bool) -> None:
    """Run the whole pipeline on the bundled, invented sample corpus (its demo.toml).

    Trains a tokenizer, audits it, counts n-grams, picks PMI units, masks with every
    strategy and compares them. The sample text is synthetic: its figures show how
    the tool works, not how real text behaves. The corpus is installed with maskprep
    (sample_corpus/ in the repository); --where prints its folder.
    """
    from .pipeline.runner import run_demo, sample_corpus_dir

    if where:
        click.echo(str(sample_corpus_dir()))
        return
    result = run_demo(output=output, force=force, executor=executor_from(ctx), quiet=is_quiet(ctx))
    _print_run(result)
    click.echo(
        "note: the sample corpus is synthetic (templated text with planted terms); do not read its "
        "figures as properties of real text"
    )


def main() -> None:
    """Console-script entry point: Ctrl-C exits 130 within 2 s (see `maskprep._interrupt`)."""
    from . import _interrupt

    _interrupt.install()
    code: Any = 0
    try:
        cli(obj={})
    except SystemExit as exc:
        code = exc.code
    except KeyboardInterrupt:  # outside a command (option parsing, start-up): nothing to clean
        code = 130
    if code is None:
        code = 0
    elif not isinstance(code, int):
        sys.stderr.write(f"{code}\n")
        code = 1
    _interrupt.finish(code)


if __name__ == "__main__":
    main()
