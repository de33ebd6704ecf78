"""Measurement methods, registered by the name used in setup files.

Each module in this package defines one :class:`~wavefit.methods.base.Method`
subclass and decorates it with :func:`register`; importing the package imports
every module in it, so adding a method means adding one module (and its tests).
"""
from __future__ import annotations

import importlib
import pkgutil

from ..errors import SetupError
from .base import Method

_REGISTRY: dict[str, type[Method]] = {}


def register(cls: type[Method]) -> type[Method]:
    """Class decorator: make ``cls`` available under ``cls.name``."""
    if cls.name in _REGISTRY and _REGISTRY[cls.name] is not cls:
        raise RuntimeError(f"method name {cls.name!r} registered twice")
    _REGISTRY[cls.name] = cls
    return cls


def available() -> list[str]:
    """Names of all registered methods."""
    _load_all()
    return sorted(_REGISTRY)


def get_method(name: str) -> Method:
    """An instance of the method registered as ``name``."""
    _load_all()
    try:
        return _REGISTRY[name]()
    except KeyError:
        raise SetupError(f"unknown method {name!r}; available: {', '.join(sorted(_REGISTRY))}") from None


def _load_all() -> None:
    for info in pkgutil.iter_modules(__path__):
        if not info.name.startswith("_") and info.name != "base":
            importlib.import_module(f"{__name__}.{info.name}")
