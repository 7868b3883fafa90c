"""Commands about shards: `mask` writes them, `show` and `verify` read them back."""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Any

import click

from ..errors import MaskprepError
from ..wording import plural
from .._cli_options import (
    CONTEXT,
    budget_option,
    corpus_options,
    executor_from,
    make_words,
    masking_options,
    tokenizer_option,
    user_errors,
    words_option,
)
from .group import cli

__all__ = ["mask_cmd", "show_cmd", "verify_cmd", "units_note"]




def units_note(built_with: str | None) -> None:
    if built_with:
        click.echo(
            f"units: built with another tokenizer ({built_with[:12]}) that splits text into the "
            "same "
            "words; token ids re-derived for this one"
        )


PADDING_WARN = 0.25  # mask warns above this padding share


def _pct(x: float | None) -> str:
    return "n/a" if x is None else f"{100 * x:.2f}%"


@cli.command("mask", context_settings=CONTEXT)
@click.argument("corpus", nargs=-1, required=True)
@tokenizer_option()
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
    from ..masking.sampler import MaskingConfig, MixPer, Strategy, parse_mix
    from ..packing import PackingConfig
    from ..shards.layout import META_DIR
    from ..shards.write import ShardConfig, write_shards

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
    units_note(manifest.options.get("units_tokenizer_hash"))
    rate_ = stats["masking_rate"]
    mix_ = stats["mix"]
    units_ = stats["unit_lengths"]
    kind = "dynamic (unmasked, with unit_ids)" if dynamic else "masked"
    click.echo(
        f"wrote {plural(stats['rows'], kind + ' row')} ({plural(stats['sequences'], 'sequence')} x "
        f"{plural(copies, 'copy', 'copies')}) in "
        f"{plural(manifest.totals['shards'], fmt + ' shard')} "
        f"to {output}"
    )
    click.echo(
        f"tokens {stats['tokens']:,} (maskable {stats['maskable_tokens']:,}); targets "
        f"{stats['targets']:,} = "
        f"{_pct(rate_['corpus'])} of maskable tokens (asked {rate:g}; per sequence "
        f"{_pct(rate_['per_sequence_min'])} to {_pct(rate_['per_sequence_max'])}, median "
        f"{_pct(rate_['per_sequence_median'])})"
    )
    click.echo(
        f"shown as: mask {_pct(mix_['mask'])}, random {_pct(mix_['random'])}, keep "
        f"{_pct(mix_['keep'])} "
        f"(asked {'/'.join(f'{x:g}' for x in masking.mix)})"
    )
    mean_t, mean_w = units_["mean_tokens"], units_["mean_words"]
    click.echo(
        f"masked units: {'n/a' if mean_t is None else f'{mean_t:.2f}'} tokens, "
        f"{'n/a' if mean_w is None else f'{mean_w:.2f}'} words on average; multi-word share "
        f"{_pct(stats['multiword_share'])}; within-word leakage "
        f"{_pct(stats['within_word_leakage'])}"
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
        "note: the rate is over maskable tokens (special tokens are never masked), and each "
        "sequence's "
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
    from ..shards.check import format_examples

    if count < 1:
        raise MaskprepError(f"-n must be at least 1, got {count}")
    color = sys.stdout.isatty()
    click.echo(format_examples(directory, n=count, color=color), color=color)


@cli.command("verify", context_settings=CONTEXT)
@click.argument("directory", type=click.Path())
@user_errors
def verify_cmd(directory: str) -> None:
    """Check shards against manifest.json (sha256, counts) and the row invariants; exit 1 on faults.

    An encoded directory (from maskprep encode) is checked against its encoded.json instead.
    """
    from ..encoded.check import verify_encoded
    from ..encoded.format import is_encoded_dir
    from ..shards.check import verify_shards

    if is_encoded_dir(directory):
        enc = verify_encoded(directory)
        faults, notes = enc.faults, []
        ok = (
            f"{plural(enc.tasks, 'task')}, {plural(enc.documents, 'document')}, "
            f"{plural(enc.tokens, 'token')}"
        )
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
        f"ok: {ok} in {directory} match "
        f"{'encoded' if is_encoded_dir(directory) else 'manifest'}.json"
    )
