"""Commands over several stages: `compare` strategies, `run` a pipeline file, the `demo`."""

from __future__ import annotations

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
    is_quiet,
    make_words,
    masking_options,
    tokenizer_option,
    user_errors,
    words_option,
)
from .group import cli
from .shards import units_note

__all__ = ["compare_cmd", "run_cmd", "demo_cmd"]


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
@tokenizer_option()
@click.option(
    "--units",
    "units_path",
    type=click.Path(),
    default=None,
    help="Unit vocabulary (units.parquet from maskprep units): enables pmi and within-unit "
         "leakage.",
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
    from ..compare.run import (
        CompareConfig,
        compare_strategies,
        format_compare_table,
        parse_strategies,
    )
    from ..masking.sampler import MixPer, parse_mix

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
    units_note((doc.get("units") or {}).get("built_with_tokenizer"))
    click.echo(f"\nwrote {Path(output) / 'compare.json'} and {Path(output) / 'compare.html'}")


def _print_run(result: Any) -> None:
    from ..compare.run import format_compare_table
    from ..pipeline.runner import format_run_summary

    click.echo(format_run_summary(result))
    if result.compare is not None:
        click.echo("")
        click.echo(format_compare_table(result.compare))
    ran = sum(s.status == "ran" for s in result.stages)
    click.echo(
        f"\n{plural(ran, 'stage')} ran, {len(result.stages) - ran} up to date; outputs in "
        f"{result.output}"
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
    from ..pipeline.runner import run_pipeline

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
    from ..pipeline.runner import run_demo, sample_corpus_dir

    if where:
        click.echo(str(sample_corpus_dir()))
        return
    result = run_demo(output=output, force=force, executor=executor_from(ctx), quiet=is_quiet(ctx))
    _print_run(result)
    click.echo(
        "note: the sample corpus is synthetic (templated text with planted terms); do not read its "
        "figures as properties of real text"
    )
