"""Numba compilation on first use: importing radledger does not import Numba.

Numba's import alone costs ~65 MB and ~0.2 s; most runs never call a compiled loop
(a season of FAO-56 days, for instance).  ``@jit(...)`` marks a function for
``numba.njit(...)``; the first call compiles every function so marked in the same module
(and points the module's names at the compiled dispatchers, so compiled functions can call
each other), then runs the compiled code.
"""

from __future__ import annotations

import functools

__all__ = ["jit"]


class _Lazy:
    def __init__(self, fn, options: dict):
        self.fn, self.options, self.compiled = fn, options, None
        functools.update_wrapper(self, fn)

    def __call__(self, *args, **kwargs):
        if self.compiled is None:
            _materialise(self.fn.__globals__)
        return self.compiled(*args, **kwargs)


def _materialise(namespace: dict) -> None:
    import numba

    for name, obj in list(namespace.items()):
        if isinstance(obj, _Lazy) and obj.compiled is None:
            obj.compiled = numba.njit(**obj.options)(obj.fn)
            namespace[name] = obj.compiled


def jit(**options):
    """``numba.njit(**options)``, applied when the function is first called."""
    def decorate(fn):
        return _Lazy(fn, options)
    return decorate
