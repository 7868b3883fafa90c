"""Imported first by the package: in the command line, a Ctrl-C exits quietly at once.

The command line imports the whole package before `cli.main` runs; a Ctrl-C in that moment has
nothing to clean up, so it prints the interrupt message and exits 130 instead of a traceback.
`cli.main` then installs the full handling (`maskprep._interrupt.install`). A library import
(any other ``sys.argv[0]``) changes nothing. Only built-in modules are used here, so the handler
is in place within the first milliseconds of the package import.
"""

import os
import signal
import sys

MESSAGE = "interrupted; partial outputs were not renamed into place (use --resume where offered)"


def _quit_now(signum: int, frame: object) -> None:
    os.write(2, (MESSAGE + "\n").encode())
    os._exit(130)


if sys.argv[:1] == ["-m"] or os.path.basename(sys.argv[0] if sys.argv else "") == "maskprep":
    signal.signal(signal.SIGINT, _quit_now)
