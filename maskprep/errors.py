"""The one exception type for user errors.

A `MaskprepError` carries a message that names the file, line or option at
fault and says what to do instead. The CLI prints it as a single line and exits
with status 1; library users catch it like any other exception. Programming
errors are not wrapped: they stay ordinary tracebacks.
"""

from __future__ import annotations


class MaskprepError(Exception):
    """A problem with the user's input or options (exit status 1).

    >>> raise MaskprepError("corpus.txt: file not found")
    Traceback (most recent call last):
    maskprep.errors.MaskprepError: corpus.txt: file not found
    """
