"""Compilation of the physics functions with numba: one definition, compiled where it runs hot.

The physics is written once, as plain functions in the subset of Python that numba compiles (scalars,
numpy's elementwise functions, loops over a column's levels). Called from Python they run as they are (on
numpy arrays where the function is pure arithmetic, or on one column). Marked with :func:`jitable`, the same
function is compiled into any kernel made with :func:`jit` that calls it. numba caches compiled kernels on
disk beside their source, so a machine compiles each kernel once.

numba checks only the kernel's own source file when it reuses its cache, not the modules whose functions are
compiled into it. So before the first kernel of a process is made, :func:`jit` compares a digest of the
package's source with the one stored beside numba's cache and, where they differ (a physics function was
edited, or a new version installed), deletes the package's cached kernels: they are compiled afresh once.
"""

from __future__ import annotations

__all__ = ["jitable", "jit"]

_PENDING = []  # functions marked jitable and not yet registered with numba (numba is imported only to compile)
_CHECKED = []  # whether this process has checked the cache against the source


def _drop_stale_cache():
    """Delete numba's cached kernels of the package when its source has changed since they were compiled."""
    import hashlib
    from pathlib import Path

    root = Path(__file__).resolve().parents[1]  # the icing package
    digest = hashlib.sha256()
    for f in sorted(root.rglob("*.py")):
        digest.update(f.relative_to(root).as_posix().encode() + b"\0" + f.read_bytes())
    stamp = root / "physics" / "__pycache__" / "kernels.sha256"
    try:
        if stamp.read_text() == digest.hexdigest():
            return
    except OSError:
        pass
    try:
        for cached in (*root.rglob("__pycache__/*.nbi"), *root.rglob("__pycache__/*.nbc")):
            cached.unlink(missing_ok=True)
        stamp.parent.mkdir(exist_ok=True)
        stamp.write_text(digest.hexdigest())
    except OSError:  # a read-only installation: numba then compiles in memory (or uses NUMBA_CACHE_DIR)
        pass


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

    if not _CHECKED:
        _drop_stale_cache()
        _CHECKED.append(True)
    while _PENDING:
        register_jitable(_PENDING.pop())
    opts = {"nogil": True, "cache": True, "error_model": "numpy", **options}
    decorate = numba.njit(signature, **opts) if signature is not None else numba.njit(**opts)
    return decorate if func is None else decorate(func)
