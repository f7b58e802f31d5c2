"""Compilation of the physics functions with numba: one definition, compiled where it runs hot.

The physics is written once, as plain functions in the subset of Python that numba compiles (scalars,
numpy's elementwise functions, loops over a column's levels). Called from Python they run as they are (on
numpy arrays where the function is pure arithmetic, or on one column). Marked with :func:`jitable`, the same
function is compiled into any kernel made with :func:`jit` that calls it. numba caches compiled kernels on
disk beside their source, so a machine compiles each kernel once.

numba checks only the kernel's own source file when it reuses its cache: after changing a marked function in
another module, delete the ``__pycache__/*.nbi`` files of the package (or set ``NUMBA_CACHE_DIR`` to an
empty folder) before measuring.
"""

from __future__ import annotations

__all__ = ["jitable", "jit"]

_PENDING = []  # functions marked jitable and not yet registered with numba (numba is imported only to compile)


def jitable(func):
    """Mark a plain function as compilable into the kernels; it is returned unchanged."""
    _PENDING.append(func)
    return func


def jit(func=None, signature=None, **options):
    """``func`` compiled with numba (no Python objects, GIL released, cached on disk, numpy's error model:
    a division by zero gives inf or NaN as in numpy, never an exception). Usable as a decorator. The
    functions marked with :func:`jitable` that it calls are compiled into it. With a ``signature`` it is
    compiled now for exactly that one (so that inputs of other layouts or write flags do not each compile
    another copy)."""
    import numba
    from numba.extending import register_jitable

    while _PENDING:
        register_jitable(_PENDING.pop())
    opts = {"nogil": True, "cache": True, "error_model": "numpy", **options}
    decorate = numba.njit(signature, **opts) if signature is not None else numba.njit(**opts)
    return decorate if func is None else decorate(func)
