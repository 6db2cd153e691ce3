"""Heavy modules imported on first use, so the command line starts quickly.

``signal = LazyModule("scipy.signal")`` at the top of a module reads like an import; the
real import happens when an attribute is first asked for (``signal.butter``), and
``"scipy.signal" in sys.modules`` stays false until then. Imports of scipy.stats,
scipy.signal, scipy.optimize and sympy each take from a few tenths of a second to over a
second; most runs of the program need none or one of them.
"""
from __future__ import annotations

import importlib
from types import ModuleType
from typing import Any, Callable

__all__ = [
    "LazyModule",
    "public_names",
]


class LazyModule:
    """A stand-in for the module ``name`` that imports it when an attribute is read."""

    def __init__(self, name: str) -> None:
        self._name = name
        self._module: ModuleType | None = None

    def __getattr__(self, attr: str) -> Any:
        if attr.startswith("__"):  # no import for copy, pickle or introspection probes
            raise AttributeError(attr)
        if self._module is None:
            self._module = importlib.import_module(self._name)
        return getattr(self._module, attr)

    def __repr__(self) -> str:
        return f"<module {self._name!r}, imported on first use>"


def public_names(package: str, namespace: dict[str, Any], public: dict[str, tuple[str, str]]
                 ) -> tuple[Callable[[str], Any], Callable[[], list[str]]]:
    """A package's ``__getattr__`` and ``__dir__`` (PEP 562) that import each public name's
    module on first use: ``public`` maps name -> (submodule, attribute); the value found is
    kept in ``namespace`` (the package's ``globals()``), so the import happens once.

    Parameters
    ----------
    package : str
        The package's ``__name__``.
    namespace : dict
        The package's ``globals()``.
    public : dict of str to (str, str)
        Public name -> (submodule, attribute).

    Returns
    -------
    tuple[callable, callable]
        The package's ``__getattr__`` and ``__dir__``.
    """

    def getattr_(name: str) -> Any:
        try:
            module, attribute = public[name]
        except KeyError:
            raise AttributeError(f"module {package!r} has no attribute {name!r}") from None
        value = getattr(importlib.import_module(f".{module}", package), attribute)
        namespace[name] = value
        return value

    def dir_() -> list[str]:
        return sorted(set(namespace) | set(public))

    return getattr_, dir_
