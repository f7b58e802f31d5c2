"""Sounding readers: one module per format, and :func:`read_sounding` that sniffs which one a file is.

Each reader module exposes ``FORMAT`` (its name), ``sniff(head: bytes, path) -> bool`` (does the start of a
file look like this format) and ``read(path, **options) -> list[xarray.Dataset]`` (every profile in the file,
each built by :func:`icing.profile.build_profile`). Adding a format is adding a module and one line in
``_READERS``.
"""

from __future__ import annotations

import importlib
from pathlib import Path

from ..errors import SoundingFormatError

__all__ = ["read_sounding", "read_profiles", "reader_for", "FORMATS"]

# Order matters: the most specific sniffers first; the delimited-table reader last.
_READERS = ["netcdf", "bufr", "igra", "temp", "table"]
FORMATS = tuple(_READERS)


def _module(name):
    return importlib.import_module(f"{__name__}.{name}")


def reader_for(path, format: str | None = None):
    """The reader module for a file: the one named by ``format``, else the first whose sniffer accepts it."""
    path = Path(path)
    if format is not None:
        if format not in _READERS:
            raise SoundingFormatError(f"unknown format {format!r}; known: {', '.join(_READERS)}", file=path)
        return _module(format)
    if not path.exists():
        raise SoundingFormatError("no such file", file=path)
    if path.is_dir():
        raise SoundingFormatError("is a directory, not a sounding file", file=path)
    with open(path, "rb") as fh:
        head = fh.read(8192)
    if not head.strip():
        raise SoundingFormatError("file is empty", file=path, line=1)
    for name in _READERS:
        try:
            mod = _module(name)
        except ImportError:  # a reader whose optional dependency is absent cannot claim files
            continue
        if mod.sniff(head, path):
            return mod
    if b"\x00" in head:
        raise SoundingFormatError("binary file of no known sounding format (netCDF, BUFR)", file=path)
    raise SoundingFormatError("not a known sounding format (table with units header, netCDF, TEMP, IGRA v2, "
                              "BUFR)", file=path, line=1)


def read_profiles(path, format: str | None = None, **options):
    """Every profile in a file, as a list of canonical profile Datasets."""
    mod = reader_for(path, format)
    profiles = mod.read(path, **options)
    if not profiles:
        raise SoundingFormatError("no profile found in the file", file=path)
    return profiles


def read_sounding(path, format: str | None = None, **options):
    """Read one sounding file into the canonical profile Dataset, sniffing the format.

    A file holding one profile gives that profile; a file holding several gives them stacked along a
    ``profile`` dimension (see :func:`icing.profile.stack_profiles`).
    """
    from ..profile import stack_profiles

    profiles = read_profiles(path, format, **options)
    return profiles[0] if len(profiles) == 1 else stack_profiles(profiles)
