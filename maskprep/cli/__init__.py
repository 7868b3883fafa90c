"""The `maskprep` command line: a thin shell over the library.

Each command parses its options, checks conflicts between them, builds the
library's config objects, calls one library function and prints its summary.
Library errors (`MaskprepError`) become one line on stderr and exit status 1.
No computation lives here. The commands are grouped by concept: `vocab`
(train-tokenizer, audit), `counting` (encode, count, units), `shards` (mask,
show, verify) and `whole` (compare, run, demo); `group` holds the global options.
"""

from __future__ import annotations

import sys
from typing import Any

from . import counting, shards, vocab, whole  # noqa: F401  (each registers its commands)
from .group import cli

__all__ = ["cli", "main"]


def main() -> None:
    """Console-script entry point: Ctrl-C exits 130 within 2 s (see `maskprep._interrupt`)."""
    from .. import _interrupt
    from .._malloc import reuse_freed_memory

    code: Any = 0
    try:  # a Ctrl-C from the moment the handler is in place is caught here, set-up included
        _interrupt.install()
        reuse_freed_memory()
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

