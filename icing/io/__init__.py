"""Sounding readers: one module per format, and :func:`read_sounding` that sniffs which one a file is.

Each reader module exposes ``FORMAT`` (its name), ``sniff(head: bytes, path) -> bool`` (does the start of a
file look like this format) and ``read(path, **options) -> list[xarray.Dataset]`` (every profile in the file,
each built by :func:`icing.profile.build_profile`). Adding a format is adding a module and one line in
``_READERS``.
"""

from __future__ import annotations

import importlib
from pathlib import Path

from icing.errors import IcingError, SoundingFormatError

__all__ = ["read_sounding", "read_profiles", "read_soundings", "read_paths", "reader_for", "FORMATS"]

_READER_OPTIONS = {"stations", "reference_time", "start", "end", "units"}
# File endings a directory read looks at (anything else in the folder is not taken for a sounding).
SOUNDING_SUFFIXES = (".csv", ".tsv", ".txt", ".nc", ".nc4", ".bufr", ".bin", ".temp", ".dat")

# Order matters: the most specific sniffers first; the delimited-table reader last.
_READERS = ["netcdf", "bufr", "igra", "temp", "table"]
FORMATS = tuple(_READERS)


def file_bytes(path, reader: str, options=None) -> bytes:
    """The bytes of a sounding file for a reader, after refusing options it does not know.

    Raises
    ------
    SoundingFormatError
        Unknown reader options, or a file that cannot be read (naming the file and the reason).
    """
    if options:
        raise SoundingFormatError(f"unknown {reader} reader option(s): {', '.join(options)}", file=path)
    try:
        return Path(path).read_bytes()
    except OSError as exc:
        raise SoundingFormatError(f"cannot read: {exc.strerror}", file=path) from exc


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
        try:
            claimed = mod.sniff(head, path)
        except Exception:  # a sniffer that cannot make sense of the bytes does not claim the file
            claimed = False
        if claimed:
            return mod
    if b"\x00" in head:
        raise SoundingFormatError("binary file of no known sounding format (netCDF, BUFR)", file=path)
    raise SoundingFormatError("not a known sounding format (table with units header, netCDF, TEMP, IGRA v2, "
                              "BUFR)", file=path, line=1)


def read_profiles(path, format: str | None = None, **options):
    """Every profile in a file, as a list of canonical profile Datasets.

    Options are passed to the reader that takes them (``stations`` and ``reference_time`` for TEMP, ``start``
    and ``end`` for IGRA, ``units`` for tables and netCDF: a mapping variable -> unit for columns or variables
    that give none); options a reader does not take are not given to it.
    """
    import inspect

    mod = reader_for(path, format)
    params = inspect.signature(mod.read).parameters
    # Options meant for other readers are left out; anything else goes through (a reader refuses a typo).
    opts = {k: v for k, v in options.items() if v is not None and (k in params or k not in _READER_OPTIONS)}
    try:
        profiles = mod.read(path, **opts)
    except (IcingError, MemoryError, KeyboardInterrupt):
        raise
    except Exception as exc:  # a reader's own checks missed something: still one typed line naming the file
        raise SoundingFormatError(f"cannot read as {getattr(mod, 'FORMAT', format)}: {type(exc).__name__}: "
                                  f"{str(exc)[:200]}", file=path) from exc
    if not profiles:
        raise SoundingFormatError("no profile found in the file", file=path)
    return profiles


def read_paths(paths, progress=None, **options) -> list:
    """Every profile in the given files and directories (a directory: its sounding files, sorted by name).

    In a directory, files that are no sounding (a station table, a model grid) are passed over; a sounding file
    that cannot be read is an error naming it. ``progress(done, total, what)`` is called after each file.
    """
    if isinstance(paths, str | Path):
        paths = [paths]
    files = []  # (path, skip-if-not-a-sounding)
    for item in paths:
        p = Path(item)
        if p.is_dir():
            found = sorted(f for f in p.iterdir() if f.is_file() and not f.name.startswith(".")
                           and f.suffix.lower() in SOUNDING_SUFFIXES)
            if not found:
                raise SoundingFormatError("no sounding files in this directory", file=p)
            files += [(f, True) for f in found]
        else:
            files.append((p, False))
    out = []
    for k, (f, lenient) in enumerate(files):
        try:
            out.extend(read_profiles(f, **options))
        except SoundingFormatError as exc:
            if not (lenient and any(why in exc.reason for why in ("not a known sounding format", "gridded model fields",
                                                                   "not an upper-air sounding"))):
                raise
        if progress is not None:
            progress(k + 1, len(files), f.name)
    return out


def read_soundings(paths_or_dir, progress=None, **options):
    """Many sounding files of any supported format as one Dataset with a ``profile`` dimension.

    Levels are padded with NaN; station, position, elevation, valid time, source and format are variables
    along ``profile``; the quality records of all files are in ``attrs["quality"]``, tagged by profile. With
    more than 20 files and a terminal on stderr, a progress bar is drawn there (or pass ``progress``).
    """
    from icing.profile import stack_profiles

    if progress is None:
        progress = _terminal_progress()
    profiles = read_paths(paths_or_dir, progress=progress, **options)
    if progress is not None and hasattr(progress, "close"):
        progress.close()
    return stack_profiles(profiles)


class _terminal_progress:
    """A one-line bar on stderr for long reads, drawn only on a terminal and past 20 files."""

    def __init__(self):
        import sys

        self.stream = sys.stderr
        self.on = hasattr(self.stream, "isatty") and self.stream.isatty()
        self.drawn = False

    def __call__(self, done, total, what=""):
        if not self.on or total <= 20:
            return
        k = round(30 * done / total)
        self.stream.write(f"\rreading soundings [{'#' * k}{'.' * (30 - k)}] {done}/{total} {what}"[:79].ljust(79))
        self.stream.flush()
        self.drawn = True

    def close(self):
        if self.drawn:
            self.stream.write("\r" + " " * 79 + "\r")
            self.stream.flush()


def read_sounding(path, format: str | None = None, **options):
    """Read one sounding file into the canonical profile Dataset, sniffing the format.

    A file holding one profile gives that profile; a file holding several gives them stacked along a
    ``profile`` dimension (see :func:`icing.profile.stack_profiles`). ``units={"temperature": "degC", ...}``
    gives the units of table columns (or netCDF variables) whose header names none.
    """
    from icing.profile import stack_profiles

    profiles = read_profiles(path, format, **options)
    return profiles[0] if len(profiles) == 1 else stack_profiles(profiles)
