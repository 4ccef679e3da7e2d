"""Names of a package that are imported from its modules on first use (PEP 562 module ``__getattr__``)."""

from __future__ import annotations

import importlib
import sys
import types
from collections.abc import Callable, Mapping
from typing import Any


class _Package(types.ModuleType):
    """A package some of whose functions share their module's name (``studies.rank`` the function, in
    ``studies/rank.py``): importing the module sets the package's attribute to the module, and this keeps
    the function there instead, as an eager ``from .rank import rank`` in ``__init__`` would."""

    def __setattr__(self, name: str, value: Any) -> None:
        kept = self.__dict__.get("_FUNCTIONS_NAMED_LIKE_MODULES", ())
        if isinstance(value, types.ModuleType) and name in kept:
            value = getattr(value, name)
        super().__setattr__(name, value)


def keep_functions(package: str, names: tuple[str, ...]) -> None:
    """Keep the functions ``names`` of ``package`` as its attributes when their modules are imported."""
    module = sys.modules[package]
    module.__dict__["_FUNCTIONS_NAMED_LIKE_MODULES"] = names
    module.__class__ = _Package


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
