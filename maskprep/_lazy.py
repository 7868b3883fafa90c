"""Package exports imported on first use (PEP 562), so importing a package costs nothing.

A package lists where each public name lives; `lazy_exports` gives it the module
``__getattr__`` and ``__dir__`` that import the name's module the first time the name is
used and keep the value as a plain attribute. A submodule (``maskprep.shards.write``) is
imported on first use too, as an eager package import would have done. The package
still imports every name under ``typing.TYPE_CHECKING``, so type checkers and readers see
the same explicit API. This module imports no stage.
"""

from __future__ import annotations

from importlib import import_module
from importlib.util import find_spec
from typing import Any, Callable, Mapping, MutableMapping, Sequence

__all__ = ["lazy_exports"]


def lazy_exports(
    namespace: MutableMapping[str, Any], homes: Mapping[str, Sequence[str]]
) -> tuple[Callable[[str], Any], Callable[[], list[str]]]:
    """(``__getattr__``, ``__dir__``) for the package whose ``globals()`` is `namespace`;
    `homes` maps a module (relative to the package: ``"write"``) to the names it exports.

    >>> ns = {"__name__": "maskprep", "__all__": ["MaskingConfig"]}
    >>> getattr_, dir_ = lazy_exports(ns, {"masking": ("MaskingConfig",)})
    >>> getattr_("MaskingConfig").__name__, "MaskingConfig" in ns, "MaskingConfig" in dir_()
    ('MaskingConfig', True, True)
    """
    package = str(namespace["__name__"])
    home = {name: module for module, names in homes.items() for name in names}

    def __getattr__(name: str) -> Any:
        module = home.get(name)
        if module is not None:
            value = getattr(import_module(f"{package}.{module}"), name)
        elif not name.startswith("__") and find_spec(f"{package}.{name}") is not None:
            value = import_module(f"{package}.{name}")
        else:
            raise AttributeError(f"module {package!r} has no attribute {name!r}")
        namespace[name] = value
        return value

    def __dir__() -> list[str]:
        return sorted(set(namespace) | set(namespace.get("__all__", ())))

    return __getattr__, __dir__
