"""Names of a package that are imported from its modules on first use (PEP 562 module ``__getattr__``)."""

from __future__ import annotations

import importlib
from collections.abc import Callable, Mapping
from typing import Any


def lazy_names(package: str, where: Mapping[str, tuple[str, ...]], namespace: dict[str, Any]
               ) -> tuple[Callable[[str], Any], Callable[[], list[str]]]:
    """``__getattr__`` and ``__dir__`` for ``package``, whose names live in the modules of ``where``
    (module -> names); a name is imported on first use and then kept in the package's ``namespace``."""
    module_of = {name: module for module, names in where.items() for name in names}

    def getattr_(name: str) -> Any:
        module = module_of.get(name)
        if module is None:
            raise AttributeError(f"module {package!r} has no attribute {name!r}")
        value = getattr(importlib.import_module(module), name)
        namespace[name] = value
        return value

    def dir_() -> list[str]:
        return sorted(module_of)

    return getattr_, dir_
