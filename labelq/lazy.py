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
