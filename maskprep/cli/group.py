"""The `maskprep` command group and its global options (--workers, --dask, --quiet).

The global options go before the command name or after it (after wins).

The commands register themselves on `cli` from the other modules of this package.
"""

from __future__ import annotations

import click

from .._cli_options import CONTEXT

__all__ = ["cli"]


def _set_global(ctx: click.Context, param: click.Parameter, value: object) -> None:
    """A global option given after the command name: it wins over the one before it."""
    if value is not None and value is not False:
        root = ctx.find_root()
        root.ensure_object(dict)
        root.obj[str(param.name)] = value


def _global_options() -> list[click.Option]:
    return [
        click.Option(["--workers"], type=int, default=None, metavar="N", expose_value=False,
                     callback=_set_global, help="Local worker processes (default: all cores)."),
        click.Option(["--dask", "dask"], default=None, metavar="ADDRESS", expose_value=False,
                     callback=_set_global, help="Run tasks on a running Dask scheduler."),
        click.Option(["--quiet", "-q", "quiet"], is_flag=True, default=None, expose_value=False,
                     callback=_set_global, help="No progress on stderr."),
    ]


class _Group(click.Group):
    """The command group; every command also takes the global options after its name
    (``maskprep count ... --workers 4`` as well as ``maskprep --workers 4 count ...``)."""

    def add_command(self, cmd: click.Command, name: str | None = None) -> None:
        taken = {o for p in cmd.params for o in getattr(p, "opts", [])}
        cmd.params.extend(o for o in _global_options() if not taken & set(o.opts))
        super().add_command(cmd, name)


@click.group(cls=_Group, context_settings=CONTEXT)
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
