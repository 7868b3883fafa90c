"""The `maskprep` command group and its global options (--workers, --dask, --quiet).

The commands register themselves on `cli` from the other modules of this package.
"""

from __future__ import annotations

import click

from .._cli_options import CONTEXT

__all__ = ["cli"]


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
