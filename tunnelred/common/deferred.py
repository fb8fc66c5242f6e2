"""Deferred public names of a package: each imported from its module on first use."""

from __future__ import annotations

import importlib
from collections.abc import Callable


def deferred_names(
    package: str, public: dict[str, str], listed: list[str]
) -> tuple[Callable[[str], object], Callable[[], list[str]]]:
    """The ``__getattr__`` and ``__dir__`` of ``package``: ``public`` maps a name to the module
    (below ``package``) that defines it; ``listed`` is what ``dir()`` shows.

    Deferred so that ``tunnelred --help`` and the command line's parsers answer without importing
    pandas and xarray.
    """

    def __getattr__(name: str) -> object:
        module = public.get(name)
        if module is None:
            raise AttributeError(f"module {package!r} has no attribute {name!r}")
        return getattr(importlib.import_module(f"{package}.{module}"), name)

    def __dir__() -> list[str]:
        return sorted(listed)

    return __getattr__, __dir__
