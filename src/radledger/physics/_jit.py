"""Numba compilation on first use: importing radledger does not import Numba.

Numba's import alone costs ~65 MB and ~0.2 s; most runs never call a compiled loop
(a season of FAO-56 days, for instance).  ``@jit(...)`` marks a function for
``numba.njit(...)``; the first call compiles every function so marked in the same module
(and points the module's names at the compiled dispatchers, so compiled functions can call
each other), then runs the compiled code.
"""

from __future__ import annotations

import functools
import sys

__all__ = ["jit", "numba_loaded"]


def numba_loaded() -> bool:
    """Whether Numba is already imported in this process (a compiled path then costs no import)."""
    return "numba" in sys.modules


class _Lazy:
    def __init__(self, fn, options: dict):
        self.fn, self.options, self.compiled = fn, options, None
        functools.update_wrapper(self, fn)

    def __call__(self, *args, **kwargs):
        if self.compiled is None:
            _materialise(self.fn.__globals__)
        return self.compiled(*args, **kwargs)


def _materialise(namespace: dict, seen: set | None = None) -> None:
    """Compile every marked function named in ``namespace`` (and in the modules that define them)."""
    import numba

    seen = set() if seen is None else seen
    if id(namespace) in seen:
        return
    seen.add(id(namespace))
    for name, obj in list(namespace.items()):
        if isinstance(obj, _Lazy):
            if obj.compiled is None:
                obj.compiled = numba.njit(**obj.options)(obj.fn)
            namespace[name] = obj.compiled
            if obj.fn.__globals__ is not namespace:    # imported from another module: compile that one too
                _materialise(obj.fn.__globals__, seen)


def jit(**options):
    """``numba.njit(**options)``, applied when the function is first called."""
    def decorate(fn):
        return _Lazy(fn, options)
    return decorate
