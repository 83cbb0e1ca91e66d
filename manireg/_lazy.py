"""Lazy package namespaces: a name is imported from its submodule the first time it is used.

``import manireg`` (and every campaign worker process, which imports :mod:`manireg.curves.execution`) then
costs only what it uses: the worker needs torch but not scikit-learn, scipy, pandas, matplotlib or the
geometry code. Module-level ``__getattr__``/``__dir__`` are the standard hooks for this (PEP 562).
"""

from __future__ import annotations

import importlib
import sys

__all__ = ["lazy_namespace"]


def lazy_namespace(package: str, exports: dict, subpackages=()):
    """``(__getattr__, __dir__, __all__)`` for ``package``.

    Parameters
    ----------
    package : str
        The package's ``__name__``.
    exports : dict
        Relative submodule name (``".campaign"``) -> names it exports.
    subpackages : sequence of str
        Subpackage names reachable as attributes (``manireg.plots``) without an explicit import.
    """
    where = {name: module for module, names in exports.items() for name in names}
    subs = tuple(subpackages)

    def __getattr__(name):
        if name in where:
            value = getattr(importlib.import_module(where[name], package), name)
        elif name in subs:
            value = importlib.import_module(f".{name}", package)
        else:
            raise AttributeError(f"module {package!r} has no attribute {name!r}")
        setattr(sys.modules[package], name, value)  # later lookups skip this hook
        return value

    def __dir__():
        return sorted(set(vars(sys.modules[package])) | set(where) | set(subs))

    return __getattr__, __dir__, list(where)
