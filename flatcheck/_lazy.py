"""Lazy contents pages: a package names its public objects and the private module of each.

``flatcheck`` and its subpackages load nothing heavy on import: a name is looked up
in its module the first time it is used (PEP 562 module ``__getattr__``), so that
``import flatcheck`` and ``flatcheck --help`` pay for numpy and little else, and
scipy's sparse, optimize and linalg parts and matplotlib load where they are used.
"""

from __future__ import annotations

import importlib


def attach(package: str, contents: dict[str, tuple[str, ...]]):
    """Module ``__getattr__``, ``__dir__`` and ``__all__`` for a package.

    Parameters
    ----------
    package : str
        The package's ``__name__``.
    contents : dict of str to tuple of str
        For each submodule (relative name, e.g. ``"_planes"`` or ``"form"``), the
        public names it provides, in the order of the contents page.

    Returns
    -------
    (callable, callable, list of str)
        ``__getattr__``, ``__dir__`` and ``__all__`` to assign in the package.
    """
    where = {name: module for module, names in contents.items() for name in names}
    public = list(where)

    def __getattr__(name: str):
        try:
            module = where[name]
        except KeyError:
            raise AttributeError(f"module {package!r} has no attribute {name!r}") from None
        value = getattr(importlib.import_module(f"{package}.{module}"), name)
        setattr(importlib.import_module(package), name, value)  # later look-ups skip this hook
        return value

    def __dir__() -> list[str]:
        return sorted(public)

    return __getattr__, __dir__, public
