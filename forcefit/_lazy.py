"""Lazy exports for the package and its subpackages (PEP 562).

A subpackage names what it exports and where from; a name's module is imported on first use,
so ``import forcefit`` and the command line's start-up stay cheap while ``forcefit.fit_orbit``
and ``from forcefit.estimators import fit_orbit`` work as before. Type checkers read the
same names from each ``__init__``'s ``if TYPE_CHECKING:`` block.
"""

from __future__ import annotations

import importlib
import sys
from collections.abc import Callable, Mapping
from typing import Any


def lazy_exports(package: str, exports: Mapping[str, str]) -> tuple[Callable[[str], Any],
                                                                   Callable[[], list[str]]]:
    """The ``__getattr__`` and ``__dir__`` of a package that exports ``exports`` lazily.

    Parameters
    ----------
    package : str
        The package's ``__name__``.
    exports : mapping of str to str
        Each exported name and the module (relative to ``package``, e.g. ``".orbit"``) that
        defines it.

    Examples
    --------
    >>> getattr_, dir_ = lazy_exports("json", {"dumps": ".encoder"})
    >>> "dumps" in dir_()
    True
    """

    def __getattr__(name: str) -> Any:
        module_name = exports.get(name)
        if module_name is None:
            try:                                    # a submodule not imported yet
                return importlib.import_module(f"{package}.{name}")
            except ModuleNotFoundError as error:
                if error.name != f"{package}.{name}":
                    raise
                raise AttributeError(f"module {package!r} has no attribute {name!r}") from None
        value = getattr(importlib.import_module(module_name, package), name)
        setattr(sys.modules[package], name, value)   # later look-ups skip this function
        return value

    def __dir__() -> list[str]:
        return sorted(set(exports) | set(vars(sys.modules[package])))

    return __getattr__, __dir__
