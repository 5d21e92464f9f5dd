"""Lazy package exports (PEP 562): a package names where each public name lives, and a name's
module is imported on first use, so importing one light name does not load SciPy at start-up."""

from importlib import import_module


def lazy_exports(package: str, where: dict):
    """(__getattr__, __dir__) for ``package`` whose public names live in the modules ``where``
    maps them to; an imported name is cached in the package's namespace."""
    namespace = import_module(package).__dict__

    def __getattr__(name):
        if name not in where:
            raise AttributeError(f"module {package!r} has no attribute {name!r}")
        value = getattr(import_module(where[name]), name)
        namespace[name] = value
        return value

    def __dir__():
        return sorted(set(namespace) | set(where))

    return __getattr__, __dir__


class LazyModule:
    """A stand-in for a module that imports it on first attribute access, so a command-line
    module can name the engine's modules at the top and still start without loading them."""

    def __init__(self, name: str) -> None:
        self._name = name
        self._module = None

    def __getattr__(self, attr: str):
        if self._module is None:
            self._module = import_module(self._name)
        return getattr(self._module, attr)

    def __repr__(self) -> str:
        return f"<lazy module {self._name!r}>"
