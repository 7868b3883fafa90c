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


class PartError(MaskprepError):
    """A `MaskprepError` of one part of a task made of several (one of a group of small files),
    whose message names that part first: it is reported as it is, not after the whole task's
    name (`task_error`)."""


class PartMessage(str):
    """The text of a `PartError`, as a task's failure travels back from a worker."""


def task_error(name: str, message: str) -> MaskprepError:
    """The error for task `name` failing with `message` (its part's own, for a `PartMessage`).

    >>> str(task_error("a.txt .. c.txt (3 files)", "b.txt:2: invalid UTF-8"))
    'a.txt .. c.txt (3 files): b.txt:2: invalid UTF-8'
    >>> str(task_error("a.txt .. c.txt (3 files)", PartMessage("b.txt (bytes 0-90): b.txt:2: x")))
    'b.txt (bytes 0-90): b.txt:2: x'
    """
    if isinstance(message, PartMessage):
        return MaskprepError(str(message))
    return MaskprepError(f"{name}: {message}")


_ADVICE = {
    "EACCES": "check the permissions, or choose another path",
    "EPERM": "check the permissions, or choose another path",
    "EROFS": "the filesystem is read-only; choose another path",
    "ENOSPC": "free space or write to a larger disk; finished tasks are kept for --resume where "
              "offered",
    "EDQUOT": "free space or write elsewhere",
    "EFBIG": "the file is larger than this system allows (file size limit)",
    "ENOTDIR": "a part of this path is a file, not a directory",
    "EISDIR": "this is a directory; give a file",
    "EEXIST": "a file is in the way",
    "ENOENT": "",
    "ELOOP": "a link that leads back to itself",
    "EMFILE": "too many open files; raise the limit (ulimit -n) or lower --workers",
    "ENAMETOOLONG": "the file name is too long",
}


def os_error_text(exc: OSError, *, doing: str = "") -> str:
    """One line for an OS error: the path, what went wrong, what to do.

    >>> import errno, os
    >>> os_error_text(PermissionError(errno.EACCES, os.strerror(errno.EACCES), "out/a.json"))
    'out/a.json: permission denied (check the permissions, or choose another path)'
    """
    import errno as _errno
    import os

    name = _errno.errorcode.get(exc.errno or 0, "")
    known = exc.errno is not None and name in _ADVICE
    reason = (
        os.strerror(exc.errno or 0) if known else (exc.strerror or str(exc) or type(exc).__name__)
    )
    reason = reason.rstrip(".")
    reason = reason[:1].lower() + reason[1:]
    advice = _ADVICE.get(name)
    where = exc.filename if exc.filename is not None else ""
    if exc.filename2 is not None:
        where = f"{where} -> {exc.filename2}"
    text = f"{where}: " if where else ""
    text += f"{reason}{' while ' + doing if doing else ''}"
    if advice and advice != reason:
        text += f" ({advice})"
    return text
