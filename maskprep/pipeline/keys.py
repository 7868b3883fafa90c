"""The keys of a pipeline file: the tables, the types each key takes, errors that name its line.

`SECTIONS` lists every table of a pipeline file with the TOML types each of
its keys accepts; `KeyChecker` checks a parsed file against it and re-raises a
stage config class's `MaskprepError` as ``FILE, line N: [table] key: reason``
(`key_error`, with the line found by `find_key_line`). What each table means
is `maskprep.pipeline.config`.
"""

from __future__ import annotations

import functools
import re
from pathlib import Path
from typing import Any, Callable, Mapping

from ..errors import MaskprepError

__all__ = ["SECTIONS", "KeyChecker", "check_each", "find_key_line", "key_error", "shown"]

# Allowed keys per table, with the TOML types accepted for each.
_MASKING_AND_PACKING: dict[str, tuple[type, ...]] = {  # the keys [mask] and [compare] share
    "rate": (float, int),
    "mix": (list, str),
    "mix_per": (str,),
    "span_p": (float, int),
    "span_max": (int,),
    "seq_len": (int,),
    "pack": (bool,),
}
SECTIONS: dict[str, dict[str, tuple[type, ...]]] = {
    "": {"output": (str,)},
    "corpus": {
        "paths": (list, str),
        "doc_sep": (str,),
        "text_field": (str,),
        "text_column": (str,),
        "strict": (bool,),
        "words": (str,),
    },
    "tokenizer": {
        "path": (str,),
        "model": (str,),
        "vocab_size": (int,),
        "lowercase": (bool,),
        "sample": (str, float, int),
        "seed": (int,),
    },
    "audit": {
        "vocab_sizes": (list,),
        "tokenizers": (list,),
        "model": (str,),
        "lowercase": (bool,),
        "top_words": (int,),
        "include_tokenizer": (bool,),
        "sample": (str, float, int),
        "seed": (int,),
    },
    "count": {"max_n": (int,), "min_count": (int,), "memory": (str, int)},
    "units": {
        "measure": (str,),
        "top": (int,),
        "min_count": (int,),
        "per_length": (str, dict),
        "max_n": (int,),
        "edge_words": (int,),
        "fragment_share": (float, int),
    },
    "mask": {
        "strategies": (list, str),
        **_MASKING_AND_PACKING,
        "copies": (int,),
        "seed": (int,),
        "format": (str,),
        "shard_rows": (int,),
        "dynamic": (bool,),
    },
    "compare": {
        "strategies": (list, str),
        "sample": (int, str),
        "examples": (int,),
        "top_words": (int,),
        **_MASKING_AND_PACKING,
        "seed": (int,),
    },
}
_TYPE_NAMES = {
    list: "a list",
    str: "a string",
    int: "a whole number",
    float: "a number",
    bool: "true or false",
    dict: "a table",
}


def _type_names(types: tuple[type, ...]) -> str:
    """What a key takes, in words: (float, int) is "a number", not "a number or a whole number"."""
    if float in types:
        types = tuple(t for t in types if t is not int)
    return " or ".join(_TYPE_NAMES[t] for t in types)


def find_key_line(text: str, section: str, key: str | None) -> int | None:
    """The 1-based line where `key` of table `section` is set (the table header when key is None).

    Dotted keys (``mask.rate = 0.2``) and inline tables (``mask = {rate = 0.2}``)
    are found too; None when nothing matches.

    >>> find_key_line("[mask]\\nrate = 2\\n", "mask", "rate")
    2
    """
    table, fallback = "", None
    header = re.compile(r"^\s*\[\s*([^\[\]]+?)\s*\]\s*(#.*)?$")
    for i, line in enumerate(text.splitlines(), 1):
        m = header.match(line)
        if m:
            table = m.group(1).replace('"', "").replace("'", "").strip()
            if (key is None and table == section) or (not section and table == key):
                return i
            continue
        name = r"\s*[\"']?%s[\"']?\s*"
        if (
            key is not None
            and table == section
            and re.match(rf"^{name % re.escape(key)}[=.]", line)
        ):
            return i
        if table == "" and section:
            if key is not None and re.match(
                rf"^\s*{re.escape(section)}\s*\.{name % re.escape(key)}=", line
            ):
                return i
            if re.match(rf"^{name % re.escape(section)}[=.]", line) and fallback is None:
                fallback = i
    return fallback


def key_error(path: Path, text: str, section: str, key: str | None, problem: str) -> MaskprepError:
    """The error for a key, naming the file and the line where the key is set.

    ``key_error(Path("p.toml"), "[mask]\\nrate = 2\\n", "mask", "rate", "too big")``
    -> ``MaskprepError("p.toml, line 2: [mask] rate: too big")``.
    """
    line = find_key_line(text, section, key)
    where = f"{path}, line {line}" if line else str(path)
    what = (f"[{section}] {key}" if section else key) if key else f"[{section}]"
    return MaskprepError(f"{where}: {what}: {problem}")


class KeyChecker:
    """Checks the tables and keys of one parsed pipeline file; its errors name the key's line."""

    def __init__(self, path: Path, text: str, doc: Mapping[str, Any]) -> None:
        self.path, self.text, self.doc, self.base = path, text, doc, path.parent

    def fail(self, section: str, key: str | None, problem: str) -> MaskprepError:
        return key_error(self.path, self.text, section, key, problem)

    def table(self, section: str) -> dict[str, Any] | None:
        value = self.doc.get(section)
        if value is None:
            return None
        if not isinstance(value, dict):
            raise self.fail("", section, f"must be a table ([{section}]), got {shown(value)}")
        allowed = SECTIONS[section]
        for key, v in value.items():
            if key not in allowed:
                raise self.fail(
                    section, key, f"unknown key; [{section}] takes {', '.join(allowed)}"
                )
            types = allowed[key]
            if isinstance(v, bool) and bool not in types or not isinstance(v, types):
                names = _type_names(types)
                raise self.fail(section, key, f"must be {names}, got {shown(v)}")
        return dict(value)

    def check(self, section: str, key: str, value: Any, fn: Callable[[Any], Any]) -> Any:
        """fn(value), with its MaskprepError re-raised naming the key and line."""
        try:
            return fn(value)
        except MaskprepError as exc:
            # The config classes name command-line options (--max-n); here the key is the name.
            names = "|".join(re.escape(n) for n in (key, key.replace("_", "-")))
            problem = re.sub(rf"^(?:--)?(?:{names})\b:?\s*", "", str(exc), count=1)
            raise self.fail(section, key, f"{shown(value)}: {problem}") from None

    def path_of(self, section: str, key: str, value: str, *, must_exist: bool = True) -> Path:
        p = Path(value).expanduser()
        p = p if p.is_absolute() else (self.base / p)
        if must_exist and not p.exists():
            raise self.fail(
                section, key, f"{value!r}: {p} not found (paths are relative to {self.base})"
            )
        return p


def shown(value: Any) -> str:
    text = repr(value) if not isinstance(value, bool) else str(value).lower()
    return text if len(text) <= 80 else text[:77] + "..."


def _make_one(make: Callable[..., Any], key: str, value: Any) -> Any:
    return make(**{key: value})


def check_each(
    c: KeyChecker, section: str, key: str, values: dict[str, Any], make: Callable[..., Any]
) -> None:
    """Check each given key alone through `make(**{key: value})` (the config class's own rules)."""
    for k in key.split(","):
        if k in values:
            c.check(section, k, values[k], functools.partial(_make_one, make, k))
